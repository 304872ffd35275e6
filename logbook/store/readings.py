"""Readings: validated against the pump, its fitments, its model and the hour meter;
written all or nothing; what the plausibility rules need of the stored ones."""

from __future__ import annotations

import dataclasses
import json
from datetime import date
from typing import Iterable, Sequence

from logbook import meter
from logbook.model import ImportReport, InputRejected, Problem, Reading
from logbook.store.base import StorePart
from logbook.store.batches import _ID_AT, Checked, _line, _repeats, _row_id, _shown, _text_hint, _text_problems, _with_line
from logbook.store.meters import _METER_POINTS
from logbook.validate import check_hour_meter, check_reading_against_model

READING_COLUMNS = (
    "serial taken_on machine machine_hours case_drain_lpm servo_pressure_bar neutral_drift_bar charge_pressure_bar "
    "oil_temp_c test_pressure_bar test_speed_rpm oil_grade oil_vi nu40_cst nu100_cst iso4406 technician note entered_by entered_at import_id"
).split()
_VALUE_FIELDS = (
    "case_drain_lpm servo_pressure_bar neutral_drift_bar charge_pressure_bar oil_temp_c test_pressure_bar "
    "test_speed_rpm oil_grade oil_vi nu40_cst nu100_cst iso4406"
).split()

_INSERT_READING = f"INSERT INTO readings ({', '.join(READING_COLUMNS)}) VALUES ({', '.join('?' * len(READING_COLUMNS))})"


def _values(r: Reading) -> tuple:
    """The measured values of a reading, in _VALUE_FIELDS order (to spot a re-import)."""
    return (r.case_drain_lpm, r.servo_pressure_bar, r.neutral_drift_bar, r.charge_pressure_bar, r.oil_temp_c,
            r.test_pressure_bar, r.test_speed_rpm, r.oil_grade, r.oil_vi, r.nu40_cst, r.nu100_cst, r.iso4406)


class ReadingsMixin(StorePart):
    """add_readings (a batch) and add_reading, and what plausibility asks of the stored readings.

    The identity of a reading is its pump, date, hour meter and measured values. A row
    with the identity of a stored reading is already present and never written again:
    from a file (``source`` given) also when that reading was corrected or removed since,
    so a re-import never undoes either.
    Technician and note are free text: a difference is reported, the stored text stays."""

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
        ``source`` is (file name, sha256) for an import: one audit row for the file,
        each row carrying the import's id; otherwise one audit row per reading."""
        ids: list[int] = []

        def write(checked: Checked) -> None:
            ids.extend(self._write_readings(checked.items, source))

        checked, _ = self._check_then_write(lambda: self._check_readings(readings, today, lines, from_file=source is not None),
                                            write, dry_run=dry_run)
        added = 0 if checked.problems else len(checked.items)
        return ImportReport("readings", added=added, already_present=checked.present, problems=checked.problems,
                            flagged=checked.notes, dry_run=dry_run, ids=ids)

    def _stored_readings(self, readings: Sequence[Reading], without: Sequence[int] = (), *, kept: bool = False
                         ) -> dict[tuple, tuple[tuple, ...]]:
        """(serial, date text, machine_hours) -> the stored readings with that key among the pumps
        of ``readings``: the current ones and, with ``kept``, corrected and removed ones too
        (looked up key by key for a few readings). ``without``: ids left out."""
        skip = set(without)
        select = (f"SELECT serial, taken_on, machine_hours, id, {', '.join(_VALUE_FIELDS)}, technician, note, machine, "
                  "CASE WHEN superseded_by IS NOT NULL THEN 'corrected' WHEN removed_reason IS NOT NULL THEN 'removed' END "
                  "FROM readings WHERE ")
        current = "" if kept else " AND superseded_by IS NULL AND removed_reason IS NULL"
        rows: Iterable[tuple]
        if len(readings) <= 20:
            keys = {(r.serial, r.taken_on.isoformat(), r.machine_hours) for r in readings}
            rows = [row for key in keys for row in self.conn.execute(
                select + "serial = ? AND taken_on = ? AND machine_hours = ?" + current, key)]
        else:
            rows = self.conn.execute(select + "serial IN (SELECT value FROM json_each(?))" + current,
                                     (json.dumps(sorted({r.serial for r in readings})),))
        found: dict[tuple, tuple] = {}
        get = found.get
        for row in rows:
            if row[3] not in skip:
                key = row[:3]
                found[key] = get(key, ()) + (row,)
        return found

    def _check_readings(
        self, readings: Sequence[Reading], today: date, lines: Sequence[int] | None, without: Sequence[int] = (),
        *, from_file: bool = False,
    ) -> Checked:
        """Every problem of a batch of readings, and the accepted ones as (index, reading, machine).
        ``without``: reading ids left out of the comparison (the one being corrected).
        ``from_file``: kept originals (corrected or removed readings) count as present too."""
        pumps, fits = self._pumps_and_fitments(r.serial for r in readings)
        models = self.models()
        stored = self._stored_readings(readings, without, kept=from_file)
        given = "file" if from_file else "given"
        problems: list[Problem] = []
        notes: list[str] = []
        accepted: list[tuple[int, Reading, str]] = []
        present = 0
        seen: set[tuple] = set()
        check_model = check_reading_against_model
        for i, r in enumerate(readings):
            line = _line(lines, i)
            pump = pumps.get(r.serial)
            if pump is None:
                problems.append(Problem("serial", r.serial, "is not a known pump serial", line=line))
                continue
            key = (r.serial, r.taken_on.isoformat(), r.machine_hours)
            here = stored.get(key, ())
            if _repeats(self._kept_since, "readings", here, _values(r), (r.technician, r.note), r.machine, line, given, notes):
                present += 1  # recorded before: nothing to check, nothing to write
                continue
            clash = next((s for s in here if s[-1] is None), None)
            if clash is not None:
                clash_id = clash[_ID_AT["readings"]]
                differ = ", ".join(f"{name} stored {_shown(old)}, {given} {_shown(new)}"
                                   for name, old, new in zip(_VALUE_FIELDS, clash[4:-4], _values(r)) if old != new)
                problems.append(Problem(
                    "serial/date/machine_hours", f"{r.serial} {r.taken_on} {r.machine_hours:g}",
                    f"a reading with other values is already recorded (id {clash_id}: "
                    f"{differ or f'machine stored {clash[-2]}, {given} {r.machine}'}); "
                    f"correct it with `logbook correct {clash_id}` so the original is kept", line=line,
                ))
                continue
            row_problems: list[Problem] = []
            if r.taken_on > today:
                row_problems.append(Problem("date", r.taken_on.isoformat(), f"is in the future: dates up to {today.isoformat()} are allowed"))
            fit = meter.fitment_on(fits.get(r.serial, ()), r.taken_on)
            if fit is None:
                periods = ", ".join(
                    f"{f.machine} {f.fitted_on}..{f.removed_on or 'now'}" for f in fits.get(r.serial, [])
                ) or "never fitted"
                row_problems.append(
                    Problem("date", r.taken_on.isoformat(), f"pump {r.serial} was not fitted to a machine that day (fitted: {periods})")
                )
            elif r.machine is not None and r.machine != fit.machine:
                row_problems.append(Problem("machine", r.machine, f"pump {r.serial} sat in {fit.machine} on {r.taken_on}"))
            row_problems += check_model(r, models[pump.model])
            row_problems += _text_problems(r.technician, r.note)
            if not row_problems and key in seen:
                row_problems.append(Problem("serial/date/machine_hours", f"{r.serial} {r.taken_on} {r.machine_hours:g}", "appears twice in this file"))
            seen.add(key)
            if row_problems:
                problems += _with_line(row_problems, line)
                continue
            assert fit is not None  # else a problem was found above
            accepted.append((i, r, fit.machine))
        # Hour meters: check the accepted rows against each other and the database.
        if len(accepted) == 1:
            i, r, machine = accepted[0]
            earlier, later = self._meter_neighbours(machine, r.taken_on, without_readings=without)
            problem = check_hour_meter("machine_hours", r.taken_on, r.machine_hours, earlier, later)
            if problem:
                problems.append(_with_line([problem], _line(lines, i))[0])
            return Checked(problems, accepted, present, notes)
        timelines: dict[str, meter.MeterTimeline] = {}
        for _, r, machine in accepted:
            if machine not in timelines:
                timelines[machine] = self._timeline(machine, without_readings=without)
            timelines[machine].add(r.taken_on, r.machine_hours)
        for i, r, machine in accepted:
            earlier, later = timelines[machine].neighbours(r.taken_on)
            if (earlier is not None and r.machine_hours < earlier[1] - 1e-9) or (later is not None and r.machine_hours > later[1] + 1e-9):
                problem = check_hour_meter("machine_hours", r.taken_on, r.machine_hours, earlier, later)
                assert problem is not None  # the meter runs backwards here: check_hour_meter words it
                problems.append(_with_line([problem], _line(lines, i))[0])
        return Checked(problems, accepted, present, notes)

    def _write_readings(self, accepted: Sequence[tuple[int, Reading, str]], source: tuple[str, str] | None) -> list[int]:
        """Insert checked readings (inside the caller's transaction); returns their ids."""
        now = self._now_text()
        import_id = self._record_import("readings", source, len(accepted), now) if source else None
        user = self.user
        rows = [
            (
                r.serial, r.taken_on.isoformat(), machine, r.machine_hours, r.case_drain_lpm, r.servo_pressure_bar,
                r.neutral_drift_bar, r.charge_pressure_bar, r.oil_temp_c, r.test_pressure_bar, r.test_speed_rpm,
                r.oil_grade, r.oil_vi, r.nu40_cst, r.nu100_cst, r.iso4406, r.technician, r.note, user, now, import_id,
            )
            for _, r, machine in accepted
        ]
        if source is not None:
            self.conn.executemany(_INSERT_READING, rows)
            return []
        ids = []
        for row, (_, r, _machine) in zip(rows, accepted):
            rid = _row_id(self.conn.execute(_INSERT_READING, row))
            ids.append(rid)
            self._audit("insert", "readings", rid, r.serial, None, dict(zip(READING_COLUMNS, row)))
        return ids

    def _record_import(self, kind: str, source: tuple[str, str], count: int, now: str) -> int:
        cur = self.conn.execute(
            "INSERT INTO imports (kind, file_name, file_sha256, rows_added, entered_by, entered_at) VALUES (?,?,?,?,?,?)",
            (kind, source[0], source[1], count, self.user, now),
        )
        self._audit("import", kind, cur.lastrowid, None, None, {"file": source[0], "sha256": source[1], "rows": count})
        return _row_id(cur)

    # -- plausibility (the rules are logbook.plausible's; the store gathers their context) --
    def plausibility_context(self, reading: Reading, *, without: Sequence[int] = ()):
        """What ``logbook.plausible`` needs to question ``reading``: its pump's model, earlier
        readings and events, and its machine's meter records before that day (same meter).
        Reads only that pump and that machine. None for an unknown pump or one not fitted."""
        from logbook.plausible import Context
        from logbook.store.reads import event_from_row

        row = self.conn.execute("SELECT model FROM pumps WHERE serial = ?", (reading.serial,)).fetchone()
        if row is None:
            return None
        model = self.models().get(row[0])  # a handful of rows
        fit = meter.fitment_on(self._fitments_of(reading.serial), reading.taken_on)
        if model is None or fit is None:
            return None
        skip = set(without)
        day = reading.taken_on.isoformat()
        reps = [r[0] for r in self.conn.execute(
            "SELECT happened_on FROM events WHERE kind = 'meter_replaced' AND machine = ? AND removed_reason IS NULL",
            (fit.machine,))]
        start = max((d for d in reps if d <= day), default="0000-00-00")
        points = tuple(
            (date.fromisoformat(on), hours) for on, hours in self.conn.execute(
                _METER_POINTS + "on_day <= ? ORDER BY on_day",  # the same day's records too
                (fit.machine, json.dumps(sorted(skip)), fit.machine, fit.machine, fit.machine, start, "9999-99-99", day))
            if hours is not None
        )
        earlier = tuple(
            r for r in self.reading_columns(
                "serial = ? AND taken_on <= ? AND superseded_by IS NULL AND removed_reason IS NULL", [reading.serial, day])
            if r.id not in skip and (r.taken_on, r.machine_hours) != (reading.taken_on, reading.machine_hours)
        )
        events = tuple(event_from_row(dict(row)) for row in self.db.query(
            "SELECT * FROM events WHERE serial = ? AND happened_on <= ? AND removed_reason IS NULL "
            "ORDER BY happened_on, id", [reading.serial, day]))
        return Context(model, points, earlier, events)

    def reading_doubts(self, reading: Reading, prefs=None, *, without: Sequence[int] = (), bands=None) -> list:
        """``logbook.plausible.reading_doubts`` for ``reading`` against what is stored
        (``bands``: the forecast's, when the caller has them: plausible.forecast_bands)."""
        from logbook.plausible import reading_doubts

        ctx = self.plausibility_context(reading, without=without)
        if ctx is not None and bands:
            ctx = dataclasses.replace(ctx, bands=dict(bands))
        return [] if ctx is None else reading_doubts(reading, ctx, prefs)

    def add_reading(self, reading: Reading, *, today: date) -> Reading:
        """Record one reading; raises InputRejected with every problem, writing nothing."""
        report = self.add_readings([reading], today=today)
        if report.problems:
            raise InputRejected(report.problems)
        if report.already_present:
            hint = ""
            if report.flagged:  # the text differs: say how to change the stored reading's
                (stored,) = self._stored_readings([reading]).values()
                hint = _text_hint(report.flagged, f"change it with `logbook correct {stored[0][_ID_AT['readings']]}`")
            raise InputRejected([Problem("reading", f"{reading.serial} {reading.taken_on}",
                                         "is already recorded with the same values" + hint)])
        saved = self.reading(report.ids[0])
        assert saved is not None  # written just now, in this store's own transaction
        return saved
