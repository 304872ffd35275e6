"""Readings and events: validated against the pump, its fitments and the hour meter."""

from __future__ import annotations

import dataclasses
import json
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
from logbook.store.writes import EVENT_COLUMNS, READING_COLUMNS, Checked, _line, _shown, _with_line
from logbook.validate import check_hour_meter, check_reading_against_model

MAX_TEXT = 500
_VALUE_FIELDS = (
    "case_drain_lpm servo_pressure_bar neutral_drift_bar charge_pressure_bar oil_temp_c test_pressure_bar "
    "test_speed_rpm oil_grade oil_vi nu40_cst nu100_cst iso4406"
).split()


_INSERT_READING = f"INSERT INTO readings ({', '.join(READING_COLUMNS)}) VALUES ({', '.join('?' * len(READING_COLUMNS))})"
_INSERT_EVENT = f"INSERT INTO events ({', '.join(EVENT_COLUMNS)}) VALUES ({', '.join('?' * len(EVENT_COLUMNS))})"


def _text_problems(technician: str, note: str) -> list[Problem]:
    """Free text: one line of at most MAX_TEXT characters (as in a CSV cell)."""
    return [
        Problem(name, text[:40], f"must be one line of at most {MAX_TEXT} characters")
        for name, text in (("technician", technician), ("note", note))
        if text and (len(text) > MAX_TEXT or any(ord(ch) < 32 and ch != "\t" for ch in text))
    ]


def _values(r: Reading) -> tuple:
    """The measured values of a reading, in _VALUE_FIELDS order (to spot a re-import)."""
    return (r.case_drain_lpm, r.servo_pressure_bar, r.neutral_drift_bar, r.charge_pressure_bar, r.oil_temp_c,
            r.test_pressure_bar, r.test_speed_rpm, r.oil_grade, r.oil_vi, r.nu40_cst, r.nu100_cst, r.iso4406)


# A stored reading or event that a new row may repeat, kept as the tuple it is read in (big files
# bring one for every stored row of their pumps): (key..., id, values..., technician, note, machine, kept).
# ``values`` make its identity with the key: measured values (readings), where it went (events);
# technician and note are free text; ``kept`` is None while current, else "corrected" or "removed".
#: Where the id sits in that tuple.
_ID_AT = {"readings": 3, "events": 0}


def _same_record(stored: Sequence[tuple], at: int, values: tuple, texts: tuple[str, str], machine: str | None
                 ) -> tuple | None:
    """The stored record a new row repeats (same key and values, and the machine if the row names one):
    a current one with the same text first, then a kept original with the same text, then one whose text differs."""
    same = [s for s in stored if s[at + 1:-4] == values and machine in (None, s[-2])]
    if len(same) == 1:
        return same[0]
    return min(same, key=lambda s: (s[-4:-2] != texts, s[-1] is not None), default=None)


_DESTINATION = ("to_machine", "to_position", "to_hours")


def _destination(e: Event) -> tuple:
    """Where a move or a meter replacement went (with the key, an event's identity)."""
    return (e.to_machine, e.to_position, e.to_hours)


def _where(line: int | None, text: str) -> str:
    return f"line {line}: {text}" if line is not None else text


def _text_hint(notes: list[str], how: str) -> str:
    """For one record typed in again: how its text differs from the stored one ('' when it does not)."""
    return f" ({notes[0].removeprefix('already present; ').removesuffix(' - not changed')}; {how})" if notes else ""


class RecordsMixin:
    """add_readings / add_events (batches) and their one-record forms.

    The identity of a reading is its pump, date, hour meter and measured values; of an
    event its kind, date, pump (or machine, for meter_replaced), hour meter and, for a
    move or meter replacement, where it went. A row with the identity of a stored record
    is already present and never written again: from a file (``source`` given) also when
    that record was corrected or removed since, so a re-import never undoes either.
    Technician and note are free text: a difference is reported, the stored text stays."""

    def _repeats(self, table: str, stored: Sequence[tuple], values: tuple, texts: tuple[str, str], machine: str | None,
                 line: int | None, given: str, notes: list[str]) -> bool:
        """Whether a new row repeats a stored record (then it is already present); adds to ``notes``
        what to tell about it: a kept original, a technician or note that differs."""
        s = _same_record(stored, _ID_AT[table], values, texts, machine)
        if s is None:
            return False
        kept = s[-1]
        if kept is not None or s[-4:-2] != texts:
            diffs = [f"{name} differs: stored {old!r}, {given} {new!r}"
                     for name, old, new in zip(("technician", "note"), s[-4:-2], texts) if old != new]
            text = "already present" + (f" ({self._kept_since(table, s[_ID_AT[table]], kept)})" if kept else "")
            text += "".join(f"; {d}" for d in diffs)
            text += " - " + ", ".join(what for what, why in (("not added again", kept), ("not changed", diffs)) if why)
            notes.append(_where(line, text))
        return True

    def _all_fitments(self) -> dict[str, list[Fitment]]:
        by_serial: dict[str, list[Fitment]] = defaultdict(list)
        for f in self.fitments():
            by_serial[f.serial].append(f)
        return by_serial

    #: Up to this many records, a check reads only the pumps it is about (one save of a
    #: reading reads its pump and machine, not the fleet: issue 14, bench_record.py).
    FEW = 20

    def _pumps_and_fitments(self, serials) -> tuple[dict, dict[str, list[Fitment]]]:
        """The pumps and fitments a check needs: of ``serials`` only, for a few records."""
        wanted = sorted(set(serials))
        if len(wanted) > self.FEW:
            return self.pumps(), self._all_fitments()
        from logbook.model import Pump

        pumps, fits = {}, defaultdict(list)
        for serial in wanted:
            row = self.conn.execute("SELECT serial, model, note FROM pumps WHERE serial = ?", (serial,)).fetchone()
            if row is not None:
                pumps[row[0]] = Pump(row[0], row[1], row[2])
                fits[serial] = self._fitments_of(serial)
        return pumps, fits

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
            if self._repeats("readings", here, _values(r), (r.technician, r.note), r.machine, line, given, notes):
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
            cur = self.conn.execute(_INSERT_READING, row)
            ids.append(cur.lastrowid)
            self._audit("insert", "readings", cur.lastrowid, r.serial, None, dict(zip(READING_COLUMNS, row)))
        return ids

    def _record_import(self, kind: str, source: tuple[str, str], count: int, now: str) -> int:
        cur = self.conn.execute(
            "INSERT INTO imports (kind, file_name, file_sha256, rows_added, entered_by, entered_at) VALUES (?,?,?,?,?,?)",
            (kind, source[0], source[1], count, self.user, now),
        )
        self._audit("import", kind, cur.lastrowid, None, None, {"file": source[0], "sha256": source[1], "rows": count})
        return int(cur.lastrowid)

    # -- what one pump's forecast needs ---------------------------------------------------
    def fleet_for_pump(self, serial: str):
        """The part of the fleet that one pump's forecast in its fleet
        (``analysis.fleet.forecast_in_fleet``) depends on, read in one transaction: the
        pumps of its model (pooling never crosses models), the machines they sat in and
        every record on those machines (their utilisation), all models and machines.
        The same forecast as from ``fleet()``, reading a part of the file
        (tests/store/test_record_speed.py holds the two to the same result)."""
        from logbook.model import Fleet, Pump
        from logbook.store.reads import event_from_row, fitment_from_row, reading_from_row

        self.conn.execute("BEGIN")
        try:
            row = self.conn.execute("SELECT model FROM pumps WHERE serial = ?", (serial,)).fetchone()
            if row is None:
                return self.fleet()
            pumps = {r[0]: Pump(r[0], r[1], r[2]) for r in self.conn.execute(
                "SELECT serial, model, note FROM pumps WHERE model = ? OR serial = ? ORDER BY serial", (row[0], serial))}
            serials = json.dumps(sorted(pumps))
            machines = json.dumps(sorted({r[0] for r in self.conn.execute(
                "SELECT DISTINCT machine FROM fitments WHERE serial IN (SELECT value FROM json_each(?))", (serials,))}))
            fits = tuple(fitment_from_row(dict(r)) for r in self.db.query(
                "SELECT * FROM fitments WHERE serial IN (SELECT value FROM json_each(?)) "
                "OR machine IN (SELECT value FROM json_each(?)) ORDER BY fitted_on, id", [serials, machines]))
            readings = tuple(reading_from_row(dict(r)) for r in self.db.query(
                "SELECT * FROM readings WHERE (serial IN (SELECT value FROM json_each(?)) "
                "OR machine IN (SELECT value FROM json_each(?))) AND superseded_by IS NULL AND removed_reason IS NULL "
                "ORDER BY taken_on, machine_hours, id", [serials, machines]))
            events = tuple(event_from_row(dict(r)) for r in self.db.query(
                "SELECT * FROM events WHERE (serial IN (SELECT value FROM json_each(?)) "
                "OR machine IN (SELECT value FROM json_each(?)) OR to_machine IN (SELECT value FROM json_each(?))) "
                "AND removed_reason IS NULL ORDER BY happened_on, id", [serials, machines, machines]))
            fleet = Fleet(models=self.models(), machines=self.machines(), pumps=pumps, fitments=fits,
                          readings=readings, events=events, source=self.path, data_version=self.change_count())
        finally:
            self.conn.execute("COMMIT")
        return fleet

    # -- plausibility (the rules are logbook.plausible's; the store gathers their context) --
    def plausibility_context(self, reading: Reading, *, without: Sequence[int] = ()):
        """What ``logbook.plausible`` needs to question ``reading``: its pump's model, earlier
        readings and events, and its machine's meter records before that day (same meter).
        Reads only that pump and that machine. None for an unknown pump or one not fitted."""
        from logbook.plausible import Context
        from logbook.store.reads import event_from_row, reading_from_row
        from logbook.store.writes import _METER_POINTS

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
            r for r in (reading_from_row(dict(row)) for row in self.db.query(
                "SELECT * FROM readings WHERE serial = ? AND taken_on <= ? AND superseded_by IS NULL "
                "AND removed_reason IS NULL ORDER BY taken_on, machine_hours, id", [reading.serial, day]))
            if r.id not in skip and (r.taken_on, r.machine_hours) != (reading.taken_on, reading.machine_hours)
        )
        events = tuple(event_from_row(dict(row)) for row in self.db.query(
            "SELECT * FROM events WHERE serial = ? AND happened_on <= ? AND removed_reason IS NULL "
            "ORDER BY happened_on, id", [reading.serial, day]))
        return Context(model, points, earlier, events)

    def event_doubts(self, event: Event) -> list:
        """``logbook.plausible.meter_doubt`` for an event's hour meter on its machine (the
        machine's records before that day on the same meter, and its utilisation)."""
        from logbook.plausible import hours_per_day, meter_before, meter_doubt
        from logbook.store.writes import _METER_POINTS

        machine = event.machine
        if machine is None and event.serial is not None:  # a pump's event: the machine it sat in that day
            fit = meter.fitment_on(self._fitments_of(event.serial), event.happened_on)
            machine = fit.machine if fit else None
        if machine is None or event.hours is None:
            return []
        event = dataclasses.replace(event, machine=machine)
        day = event.happened_on.isoformat()
        reps = [r[0] for r in self.conn.execute(
            "SELECT happened_on FROM events WHERE kind = 'meter_replaced' AND machine = ? AND removed_reason IS NULL",
            (event.machine,))]
        start = max((d for d in reps if d < day or (d == day and event.kind is not EventKind.METER_REPLACED)),
                    default="0000-00-00")
        points = tuple((date.fromisoformat(on), hours) for on, hours in self.conn.execute(
            _METER_POINTS + "on_day <= ? ORDER BY on_day",  # the same day's records too
            (event.machine, "[]", event.machine, event.machine, event.machine, start, "9999-99-99", day))
            if hours is not None)
        doubt = meter_doubt(event.happened_on, event.hours, meter_before(points),
                            hours_per_day(points, event.happened_on), field_name="hours")
        return [doubt] if doubt else []

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
        ids: list[int] = []

        def write(checked: Checked) -> None:
            ids.extend(self._write_events(checked.items, source))

        checked, _ = self._check_then_write(lambda: self._check_events(events, today, lines, from_file=source is not None),
                                            write, dry_run=dry_run)
        added = 0 if checked.problems else len(checked.items)
        return ImportReport("events", added=added, already_present=checked.present, problems=checked.problems,
                            flagged=checked.notes, dry_run=dry_run, ids=ids)

    def _stored_events(self, *, kept: bool) -> dict[tuple, list[tuple]]:
        """(kind, date, serial, hours) -> the stored events with that key: the current ones and,
        with ``kept``, removed ones too."""
        found: dict[tuple, list[tuple]] = defaultdict(list)
        for e in self.events(include_removed=kept):
            found[(e.kind, e.happened_on, e.serial, e.hours)].append(
                (e.id, *_destination(e), e.technician, e.note, e.machine, "removed" if e.removed_reason is not None else None))
        return found

    def _check_events(self, events: Sequence[Event], today: date, lines: Sequence[int] | None, *,
                      from_file: bool = False) -> Checked:
        """Every problem of a batch of events; the plan as (index, event, fitment before, closed, opened).
        ``from_file``: removed events count as present too."""
        pumps, machines = self.pumps(), self.machines()
        fits = self._all_fitments()
        reps = self._replacements()
        stored = self._stored_events(kept=from_file)
        given = "file" if from_file else "given"
        order = sorted(range(len(events)), key=lambda i: (events[i].happened_on, i))
        problems: list[Problem] = []
        notes: list[str] = []
        plan: list[tuple[int, Event, Fitment | None, Fitment | None, Fitment | None]] = []
        present = 0
        seen: set[tuple] = set()
        timelines: dict[str, meter.MeterTimeline] = {}

        def timeline(machine: str) -> meter.MeterTimeline:
            if machine not in timelines:
                timelines[machine] = self._timeline(machine)
            return timelines[machine]

        for i in order:
            e, line = events[i], _line(lines, i)
            # A meter replacement is known by its machine: without one it matches nothing (and is refused below).
            here = stored.get((e.kind, e.happened_on, e.serial, e.hours), ()) if e.serial or e.machine else ()
            if self._repeats("events", here, _destination(e), (e.technician, e.note), e.machine, line, given, notes):
                present += 1  # recorded before: nothing to check, nothing to write
                continue
            clash = next((s for s in here if s[-1] is None and e.machine in (None, s[-2])), None)
            if clash is not None:
                name, old, new = next((n, a, b) for n, a, b in zip(_DESTINATION, clash[1:-4], _destination(e)) if a != b)
                problems.append(Problem(
                    name, new if new is not None else "",
                    f"a {e.kind.value} with other values is already recorded (event {clash[0]}: {name} stored {_shown(old)}); "
                    f"to record it otherwise, remove that one with `logbook remove event {clash[0]} --reason ...` first",
                    line=line,
                ))
                continue
            errs: list[Problem] = []
            current = None
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
            errs += _text_problems(e.technician, e.note)
            e = dataclasses.replace(e, machine=machine)
            key = (e.kind, e.happened_on, e.serial, e.machine, e.hours, *_destination(e))
            if not errs and key in seen:
                errs.append(Problem("event", f"{e.kind.value} {e.happened_on}", "appears twice in this file"))
            seen.add(key)
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
            plan.append((i, e, current if closed is not None else None, closed, opened))
        return Checked(problems, plan, present, notes)

    def _write_events(self, plan, source: tuple[str, str] | None) -> list[int]:
        """Insert checked events and the fitment changes of moves (inside the caller's transaction)."""
        now, ids = self._now_text(), []
        import_id = self._record_import("events", source, len(plan), now) if source else None
        for _, e, before, closed, opened in plan:
            row = (
                e.kind.value, e.happened_on.isoformat(), e.serial, e.machine, e.hours, e.to_machine, e.to_position,
                e.to_hours, e.technician, e.note, self.user, now, import_id, e.serial_in,
            )
            cur = self.conn.execute(_INSERT_EVENT, row)
            ids.append(cur.lastrowid)
            if import_id is None:  # from a file: the import's audit row stands for its rows
                self._audit("insert", "events", cur.lastrowid, e.serial, None, dict(zip(EVENT_COLUMNS, row)))
            if closed is not None and closed.id is not None and closed.id > 0:
                self.conn.execute(
                    "UPDATE fitments SET removed_on = ?, machine_hours_at_removal = ? WHERE id = ?",
                    (closed.removed_on.isoformat(), closed.machine_hours_at_removal, closed.id),
                )
                self._audit("update", "fitments", closed.id, e.serial, dataclasses.asdict(before), dataclasses.asdict(closed))
            if opened is not None:
                self._insert_fitment(opened)
        return ids

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
            raise InputRejected([Problem("event", f"{event.kind.value} {event.happened_on}", "is already recorded"
                                         + _text_hint(report.flagged, "events are not edited: remove it with `logbook remove event` and record it again"))])
        return next(e for e in self.events() if e.id == report.ids[0])
