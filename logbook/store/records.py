"""Readings and events: validated against the pump, its fitments and the hour meter."""

from __future__ import annotations

import dataclasses
from collections import defaultdict
from datetime import date
from typing import Sequence

from logbook import meter
from logbook.model import (
    Event,
    EventKind,
    Fitment,
    ImportReport,
    InputRejected,
    Problem,
    Reading,
)
from logbook.store.writes import EVENT_COLUMNS, READING_COLUMNS, _line, _with_line
from logbook.validate import check_hour_meter, check_reading_against_model

_VALUE_FIELDS = (
    "case_drain_lpm servo_pressure_bar neutral_drift_bar charge_pressure_bar oil_temp_c test_pressure_bar "
    "test_speed_rpm oil_grade oil_vi iso4406"
).split()


def _same_values(a: Reading, b: Reading) -> bool:
    return all(getattr(a, f) == getattr(b, f) for f in _VALUE_FIELDS)


class RecordsMixin:
    """add_readings / add_events (batches) and their one-record forms."""

    def _all_fitments(self) -> dict[str, list[Fitment]]:
        by_serial: dict[str, list[Fitment]] = defaultdict(list)
        for f in self.fitments():
            by_serial[f.serial].append(f)
        return by_serial

    def _replacements(self) -> dict[str, list[Event]]:
        by_machine: dict[str, list[Event]] = defaultdict(list)
        for e in self.events():
            if e.kind is EventKind.METER_REPLACED:
                by_machine[e.machine].append(e)
        return by_machine

    # -- readings ------------------------------------------------------------------
    def add_readings(
        self,
        readings: Sequence[Reading],
        *,
        today: date,
        lines: Sequence[int] | None = None,
        dry_run: bool = False,
        source: tuple[str, str] | None = None,
    ) -> ImportReport:
        """Check every reading, then write all in one transaction (or none).
        ``source`` is (file name, sha256) for an import."""
        pumps, models = self.pumps(), self.models()
        fits = self._all_fitments()
        existing: dict[tuple, Reading] = {}
        serials = {r.serial for r in readings}
        for r in self.readings():
            if r.serial in serials:
                existing[(r.serial, r.taken_on, r.machine_hours)] = r
        problems: list[Problem] = []
        accepted: list[tuple[int, Reading]] = []
        present = 0
        seen: set[tuple] = set()
        for i, r in enumerate(readings):
            line = _line(lines, i)
            row_problems: list[Problem] = []
            pump = pumps.get(r.serial)
            if pump is None:
                problems.append(Problem("serial", r.serial, "is not a known pump serial", line=line))
                continue
            if r.taken_on > today:
                row_problems.append(Problem("date", r.taken_on.isoformat(), f"is in the future: dates up to {today.isoformat()} are allowed"))
            fit = meter.fitment_on(fits.get(r.serial, []), r.taken_on)
            if fit is None:
                periods = ", ".join(
                    f"{f.machine} {f.fitted_on}..{f.removed_on or 'now'}" for f in fits.get(r.serial, [])
                ) or "never fitted"
                row_problems.append(
                    Problem("date", r.taken_on.isoformat(), f"pump {r.serial} was not fitted to a machine that day (fitted: {periods})")
                )
            elif r.machine is not None and r.machine != fit.machine:
                row_problems.append(Problem("machine", r.machine, f"pump {r.serial} sat in {fit.machine} on {r.taken_on}"))
            row_problems += check_reading_against_model(r, models[pump.model])
            key = (r.serial, r.taken_on, r.machine_hours)
            if not row_problems:
                if key in seen:
                    row_problems.append(Problem("serial/date/machine_hours", f"{r.serial} {r.taken_on} {r.machine_hours:g}", "appears twice in this file"))
                elif key in existing:
                    if _same_values(existing[key], r):
                        present += 1
                        continue
                    row_problems.append(
                        Problem(
                            "serial/date/machine_hours",
                            f"{r.serial} {r.taken_on} {r.machine_hours:g}",
                            f"a reading with other values is already recorded (id {existing[key].id}); "
                            "correct it with `logbook correct` so the original is kept",
                        )
                    )
            seen.add(key)
            if row_problems:
                problems += _with_line(row_problems, line)
                continue
            accepted.append((i, dataclasses.replace(r, machine=fit.machine)))
        # Hour meters: check the accepted rows against each other and the database.
        timelines: dict[str, meter.MeterTimeline] = {}
        for _, r in accepted:
            if r.machine not in timelines:
                timelines[r.machine] = self._timeline(r.machine)
        for _, r in accepted:
            timelines[r.machine].add(r.taken_on, r.machine_hours)
        for i, r in accepted:
            earlier, later = timelines[r.machine].neighbours(r.taken_on)
            problem = check_hour_meter("machine_hours", r.taken_on, r.machine_hours, earlier, later)
            if problem:
                problems.append(_with_line([problem], _line(lines, i))[0])
        if problems or dry_run:
            return ImportReport("readings", added=0 if problems else len(accepted), already_present=present, problems=problems, dry_run=dry_run)
        now, ids = self._now_text(), []
        with self.transaction():
            import_id = self._record_import("readings", source, len(accepted), now) if source else None
            rows = [
                (
                    r.serial, r.taken_on.isoformat(), r.machine, r.machine_hours, r.case_drain_lpm, r.servo_pressure_bar,
                    r.neutral_drift_bar, r.charge_pressure_bar, r.oil_temp_c, r.test_pressure_bar, r.test_speed_rpm,
                    r.oil_grade, r.oil_vi, r.iso4406, r.technician, r.note, self.user, now, import_id,
                )
                for _, r in accepted
            ]
            sql = f"INSERT INTO readings ({', '.join(READING_COLUMNS)}) VALUES ({', '.join('?' * len(READING_COLUMNS))})"
            if source is None:
                for row, (_, r) in zip(rows, accepted):
                    cur = self.conn.execute(sql, row)
                    ids.append(cur.lastrowid)
                    after = dict(zip(READING_COLUMNS, row))
                    self._audit("insert", "readings", cur.lastrowid, r.serial, None, after)
            else:
                self.conn.executemany(sql, rows)
        return ImportReport("readings", added=len(accepted), already_present=present, problems=[], dry_run=False, ids=ids)

    def _record_import(self, kind: str, source: tuple[str, str], count: int, now: str) -> int:
        cur = self.conn.execute(
            "INSERT INTO imports (kind, file_name, file_sha256, rows_added, entered_by, entered_at) VALUES (?,?,?,?,?,?)",
            (kind, source[0], source[1], count, self.user, now),
        )
        self._audit("import", kind, cur.lastrowid, None, None, {"file": source[0], "sha256": source[1], "rows": count})
        return int(cur.lastrowid)

    def add_reading(self, reading: Reading, *, today: date) -> Reading:
        """Record one reading; raises InputRejected with every problem, writing nothing."""
        report = self.add_readings([reading], today=today)
        if report.problems:
            raise InputRejected(report.problems)
        if report.already_present:
            raise InputRejected(
                [Problem("reading", f"{reading.serial} {reading.taken_on}", "is already recorded with the same values")]
            )
        return self.reading(report.ids[0])

    # -- events --------------------------------------------------------------------
    def add_events(
        self,
        events: Sequence[Event],
        *,
        today: date,
        lines: Sequence[int] | None = None,
        dry_run: bool = False,
        source: tuple[str, str] | None = None,
    ) -> ImportReport:
        """Check events in date order (moves change where a pump sits for the
        events after them), then write all in one transaction (or none)."""
        pumps, machines = self.pumps(), self.machines()
        fits = self._all_fitments()
        reps = self._replacements()
        existing = {(e.kind, e.happened_on, e.serial, e.machine, e.hours) for e in self.events()}
        order = sorted(range(len(events)), key=lambda i: (events[i].happened_on, i))
        problems: list[Problem] = []
        plan: list[tuple[int, Event, Fitment | None, Fitment | None]] = []  # event, closed fitment, new fitment
        present = 0
        timelines: dict[str, meter.MeterTimeline] = {}

        def timeline(machine: str) -> meter.MeterTimeline:
            if machine not in timelines:
                timelines[machine] = self._timeline(machine)
            return timelines[machine]

        for i in order:
            e, line = events[i], _line(lines, i)
            errs: list[Problem] = []
            if e.happened_on > today:
                errs.append(Problem("date", e.happened_on.isoformat(), f"is in the future: dates up to {today.isoformat()} are allowed"))
            closed = opened = None
            machine = e.machine
            if e.kind is EventKind.METER_REPLACED:
                if not e.machine or e.machine not in machines:
                    errs.append(Problem("machine", e.machine or "", "must be a known machine unit for meter_replaced"))
                if e.hours is None:
                    errs.append(Problem("hours", "", "is required: the old meter's last reading", "h"))
                if e.to_hours is None:
                    errs.append(Problem("to_hours", "", "is required: the new meter's first reading", "h"))
                if not errs:
                    # The old meter's last reading may not be below what it showed before.
                    earlier, _ = timeline(e.machine).neighbours(e.happened_on)
                    p = check_hour_meter("hours", e.happened_on, e.hours, earlier, None)
                    if p:
                        errs.append(p)
            else:
                if not e.serial or e.serial not in pumps:
                    errs.append(Problem("serial", e.serial or "", f"must be a known pump serial for {e.kind.value}"))
                else:
                    current = meter.fitment_on(fits.get(e.serial, []), e.happened_on)
                    if current is not None:
                        if machine is not None and machine != current.machine:
                            errs.append(Problem("machine", machine, f"pump {e.serial} sat in {current.machine} on {e.happened_on}"))
                        machine = current.machine
                        if e.hours is None:
                            errs.append(Problem("hours", "", f"is required: the hour meter of {current.machine}", "h"))
                        else:
                            earlier, later = timeline(current.machine).neighbours(e.happened_on)
                            p = check_hour_meter("hours", e.happened_on, e.hours, earlier, later)
                            if p:
                                errs.append(p)
                    if e.kind is EventKind.MOVE:
                        errs += self._check_move(e, machines, fits, current, timeline)
                        if not errs:
                            closed, opened = self._move_fitments(e, current, fits, reps)
            e = dataclasses.replace(e, machine=machine)
            key = (e.kind, e.happened_on, e.serial, e.machine, e.hours)
            if not errs and key in existing:
                present += 1
                continue
            existing.add(key)
            if errs:
                problems += _with_line(errs, line)
                continue
            if opened is not None:
                fits[e.serial] = [closed if f is current else f for f in fits.get(e.serial, [])] + [opened]
            if e.hours is not None and machine and e.kind is not EventKind.METER_REPLACED:
                timeline(machine).add(e.happened_on, e.hours)
            if e.kind is EventKind.MOVE:
                timeline(e.to_machine).add(e.happened_on, e.to_hours)
            if e.kind is EventKind.METER_REPLACED:
                reps[e.machine].append(e)
                timeline(e.machine).add_replacement(e.happened_on)
            plan.append((i, e, closed, opened))
        if problems or dry_run:
            return ImportReport("events", added=0 if problems else len(plan), already_present=present, problems=problems, dry_run=dry_run)
        now, ids = self._now_text(), []
        with self.transaction():
            import_id = self._record_import("events", source, len(plan), now) if source else None
            sql = f"INSERT INTO events ({', '.join(EVENT_COLUMNS)}) VALUES ({', '.join('?' * len(EVENT_COLUMNS))})"
            for _, e, closed, opened in plan:
                row = (
                    e.kind.value, e.happened_on.isoformat(), e.serial, e.machine, e.hours, e.to_machine, e.to_position,
                    e.to_hours, e.technician, e.note, self.user, now, import_id,
                )
                cur = self.conn.execute(sql, row)
                ids.append(cur.lastrowid)
                self._audit("insert", "events", cur.lastrowid, e.serial, None, dict(zip(EVENT_COLUMNS, row)))
                if closed is not None and closed.id is not None and closed.id > 0:
                    self.conn.execute(
                        "UPDATE fitments SET removed_on = ?, machine_hours_at_removal = ? WHERE id = ?",
                        (closed.removed_on.isoformat(), closed.machine_hours_at_removal, closed.id),
                    )
                    self._audit("update", "fitments", closed.id, e.serial, None, dataclasses.asdict(closed))
                if opened is not None:
                    self._insert_fitment(opened)
        return ImportReport("events", added=len(plan), already_present=present, problems=[], ids=ids)

    def _check_move(self, e: Event, machines, fits, current: Fitment | None, timeline) -> list[Problem]:
        errs = []
        if not e.to_machine or e.to_machine not in machines:
            errs.append(Problem("to_machine", e.to_machine or "", "must be a known machine unit for a move"))
        if not e.to_position:
            errs.append(Problem("to_position", e.to_position or "", "is required for a move"))
        if e.to_hours is None:
            errs.append(Problem("to_hours", "", "is required for a move: the target machine's hour meter", "h"))
        if errs:
            return errs
        if current is not None and current.removed_on is not None:
            errs.append(Problem("date", e.happened_on.isoformat(), f"pump {e.serial} left {current.machine} on {current.removed_on}"))
        for serial, fl in fits.items():
            for f in fl:
                if serial != e.serial and f.machine == e.to_machine and f.position == e.to_position and (
                    f.removed_on is None or f.removed_on > e.happened_on
                ) and f.fitted_on <= e.happened_on:
                    errs.append(Problem("to_position", e.to_position, f"on {e.to_machine} is held by pump {serial} on {e.happened_on}"))
        earlier, later = timeline(e.to_machine).neighbours(e.happened_on)
        p = check_hour_meter("to_hours", e.happened_on, e.to_hours, earlier, later)
        if p:
            errs.append(p)
        return errs

    def _move_fitments(self, e: Event, current: Fitment | None, fits, reps) -> tuple[Fitment | None, Fitment]:
        if current is not None:
            hours_at_removal = meter.pump_hours(e.hours, e.happened_on, current, reps.get(current.machine, []))
            closed = dataclasses.replace(current, removed_on=e.happened_on, machine_hours_at_removal=e.hours)
        else:
            closed = None
            hours_at_removal = 0.0
            past = [f for f in fits.get(e.serial, []) if f.removed_on is not None and f.machine_hours_at_removal is not None]
            if past:
                last = past[-1]
                hours_at_removal = meter.pump_hours(last.machine_hours_at_removal, last.removed_on, last, reps.get(last.machine, []))
        opened = Fitment(
            id=None, serial=e.serial, machine=e.to_machine, position=e.to_position, fitted_on=e.happened_on,
            removed_on=None, machine_hours_at_fit=e.to_hours, pump_hours_at_fit=round(hours_at_removal, 3),
        )
        return closed, opened

    def add_event(self, event: Event, *, today: date) -> Event:
        """Record one event; raises InputRejected with every problem, writing nothing."""
        report = self.add_events([event], today=today)
        if report.problems:
            raise InputRejected(report.problems)
        if report.already_present:
            raise InputRejected([Problem("event", f"{event.kind.value} {event.happened_on}", "is already recorded")])
        return next(e for e in self.events() if e.id == report.ids[0])
