"""Events (overhauls, exchanges, moves, meter replacements...): validated in date order
against the pumps, their fitments and the hour meters; a move closes one fitment and
opens another; written all or nothing."""

from __future__ import annotations

import dataclasses
from collections import defaultdict
from datetime import date
from typing import TYPE_CHECKING, Callable, Sequence

from logbook import meter
from logbook.model import Event, EventKind, Fitment, ImportReport, InputRejected, Machine, Problem, Pump
from logbook.store.base import StorePart
from logbook.store.batches import Checked, _line, _repeats, _row_id, _shown, _text_hint, _text_problems, _with_line
from logbook.store.meters import _METER_POINTS
from logbook.validate import check_hour_meter

if TYPE_CHECKING:
    from logbook.plausible import Doubt

EVENT_COLUMNS = (
    "kind happened_on serial machine hours to_machine to_position to_hours technician note entered_by entered_at import_id "
    "serial_in"
).split()
_INSERT_EVENT = f"INSERT INTO events ({', '.join(EVENT_COLUMNS)}) VALUES ({', '.join('?' * len(EVENT_COLUMNS))})"

_DESTINATION = ("to_machine", "to_position", "to_hours", "serial_in")

#: One checked event as the write takes it: (index in the batch, event, the fitment it closes as it
#: was, that fitment closed, the fitment it opens); the two before/closed are None together.
_Planned = tuple[int, Event, Fitment | None, Fitment | None, Fitment | None]
#: A machine's hour-meter timeline (the batch's own, with the events checked before).
_Timelines = Callable[[str], meter.MeterTimeline]


def _destination(e: Event) -> tuple:
    """Where a move or a meter replacement went, which pump an exchange fitted (with the key, an
    event's identity)."""
    return (e.to_machine, e.to_position, e.to_hours, e.serial_in)


def _hours_at_last_removal(fitments: Sequence[Fitment], reps: dict[str, list[Event]]) -> float:
    """A pump's own hours at the last of its removals with a meter reading (0 without one)."""
    for f in reversed(fitments):
        if f.removed_on is not None and f.machine_hours_at_removal is not None:
            return meter.pump_hours(f.machine_hours_at_removal, f.removed_on, f, reps.get(f.machine, []))
    return 0.0


class EventsMixin(StorePart):
    """add_events (a batch) and add_event.

    The identity of an event is its kind, date, pump (or machine, for meter_replaced),
    hour meter and, for a move or meter replacement, where it went. A row with the
    identity of a stored event is already present and never written again: from a file
    (``source`` given) also when that event was removed since, so a re-import never undoes
    it. Technician and note are free text: a difference is reported, the stored text stays."""

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
        plan: list[_Planned] = []
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
            if _repeats(self._kept_since, "events", here, _destination(e), (e.technician, e.note), e.machine, line, given, notes):
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
                    assert e.machine and e.hours is not None  # else a problem was found above
                    # The old meter's last reading may not be below what it showed before.
                    earlier, _ = timeline(e.machine).neighbours(e.happened_on)
                    p = check_hour_meter("hours", e.happened_on, e.hours, earlier, None)
                    if p:
                        errs.append(p)
            elif e.kind in (EventKind.PARKED, EventKind.BACK_IN_SERVICE):  # a machine's own, as meter_replaced
                if not e.machine or e.machine not in machines:
                    errs.append(Problem("machine", e.machine or "", f"must be a known machine unit for {e.kind.value}"))
                if e.serial:
                    errs.append(Problem("serial", e.serial, f"is not taken: {e.kind.value} is an event of a machine "
                                        "(give its unit with --machine)"))
                if not errs and e.hours is not None:
                    assert e.machine  # else a problem was found above
                    earlier, later = timeline(e.machine).neighbours(e.happened_on)
                    p = check_hour_meter("hours", e.happened_on, e.hours, earlier, later)
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
                    if e.serial_in is not None:  # an exchange that names the pump that went in
                        errs += self._check_exchange(e, pumps, fits, current)
                        if not errs and current is not None:
                            closed, opened = self._exchange_fitments(e, current, fits, reps)
            if e.serial_in is not None and e.kind is not EventKind.EXCHANGE:
                errs.append(Problem("serial_in", e.serial_in, f"is only taken by an exchange, not by {e.kind.value}"))
            errs += _text_problems(e.technician, e.note)
            e = dataclasses.replace(e, machine=machine)
            key = (e.kind, e.happened_on, e.serial, e.machine, e.hours, *_destination(e))
            if not errs and key in seen:
                errs.append(Problem("event", f"{e.kind.value} {e.happened_on}", "appears twice in this file"))
            seen.add(key)
            if errs:
                problems += _with_line(errs, line)
                continue
            if opened is not None:  # a move's pump, or the pump an exchange fitted, gets its new fitment
                if closed is not None:  # and the one it sat in is closed (a pump in no machine leaves none)
                    fits[closed.serial] = [closed if f is current else f for f in fits.get(closed.serial, [])]
                fits[opened.serial] = fits.get(opened.serial, []) + [opened]
            if e.hours is not None and machine and e.kind is not EventKind.METER_REPLACED:
                timeline(machine).add(e.happened_on, e.hours)
            if e.kind is EventKind.MOVE:
                assert e.to_machine and e.to_hours is not None  # _check_move found both given
                timeline(e.to_machine).add(e.happened_on, e.to_hours)
            if e.kind is EventKind.METER_REPLACED:
                assert e.machine  # a known machine, checked above
                reps[e.machine].append(e)
                timeline(e.machine).add_replacement(e.happened_on)
            plan.append((i, e, current if closed is not None else None, closed, opened))
        return Checked(problems, plan, present, notes)

    def _write_events(self, plan: Sequence[_Planned], source: tuple[str, str] | None) -> list[int]:
        """Insert checked events and the fitment changes of moves (inside the caller's transaction)."""
        now, ids = self._now_text(), []
        import_id = self._record_import("events", source, len(plan), now) if source else None
        for _, e, before, closed, opened in plan:
            row = (
                e.kind.value, e.happened_on.isoformat(), e.serial, e.machine, e.hours, e.to_machine, e.to_position,
                e.to_hours, e.technician, e.note, self.user, now, import_id, e.serial_in,
            )
            event_id = _row_id(self.conn.execute(_INSERT_EVENT, row))
            ids.append(event_id)
            if import_id is None:  # from a file: the import's audit row stands for its rows
                self._audit("insert", "events", event_id, e.serial, None, dict(zip(EVENT_COLUMNS, row)))
            if closed is not None and closed.id is not None and closed.id > 0:
                assert before is not None and closed.removed_on is not None  # a closed fitment: _Planned
                self.conn.execute(
                    "UPDATE fitments SET removed_on = ?, machine_hours_at_removal = ? WHERE id = ?",
                    (closed.removed_on.isoformat(), closed.machine_hours_at_removal, closed.id),
                )
                self._audit("update", "fitments", closed.id, e.serial, dataclasses.asdict(before), dataclasses.asdict(closed))
            if opened is not None:
                self._insert_fitment(opened)
        return ids

    def _check_move(self, e: Event, machines: dict[str, Machine], fits: dict[str, list[Fitment]],
                    current: Fitment | None, timeline: _Timelines) -> list[Problem]:
        errs: list[Problem] = []
        if not e.to_machine or e.to_machine not in machines:
            errs.append(Problem("to_machine", e.to_machine or "", "must be a known machine unit for a move"))
        if not e.to_position:
            errs.append(Problem("to_position", e.to_position or "", "is required for a move"))
        if e.to_hours is None:
            errs.append(Problem("to_hours", "", "is required for a move: the target machine's hour meter", "h"))
        if errs:
            return errs
        assert e.to_machine and e.to_position and e.to_hours is not None  # else a problem was found above
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

    def _check_exchange(self, e: Event, pumps: dict[str, Pump], fits: dict[str, list[Fitment]],
                        current: Fitment | None) -> list[Problem]:
        """An exchange that names the pump that went in: that pump is known, is another one, and sat
        in no machine that day or later; the pump that came out sat in a machine that day and was
        not read, moved or fitted elsewhere after it (those records rest on where it sat)."""
        b, day = e.serial_in, e.happened_on
        if b is None or b not in pumps:
            return [Problem("serial_in", b, "must be a known pump serial (add the pump that went in first: "
                            "`logbook import pumps`)")]
        if b == e.serial:
            return [Problem("serial_in", b, "must be another pump than the one that came out; an overhaul "
                            "keeps the same pump in place")]
        errs: list[Problem] = []
        if current is None:
            errs.append(Problem("date", day.isoformat(), f"pump {e.serial} sat in no machine that day: an exchange "
                                "takes it out of its place"))
        elif current.removed_on is not None:
            errs.append(Problem("date", day.isoformat(), f"pump {e.serial} left {current.machine} on "
                                f"{current.removed_on}; an exchange before that would leave two records of its removal"))
        held = meter.fitment_on(fits.get(b, []), day)
        later = [f for f in fits.get(b, []) if f.fitted_on > day]
        if held is not None:
            errs.append(Problem("serial_in", b, f"sat in {held.machine} on {day}: record its move out of it first"))
        elif later:
            errs.append(Problem("serial_in", b, f"was fitted to {later[0].machine} on {later[0].fitted_on}, after "
                                "the exchange: it cannot also be in this place from that day"))
        if current is not None:
            assert e.serial is not None  # current is where pump e.serial sat
            moved = [f for f in fits.get(e.serial, []) if f.fitted_on > day]
            read = self.conn.execute(
                "SELECT count(*), min(taken_on) FROM readings WHERE serial = ? AND taken_on > ? "
                "AND superseded_by IS NULL AND removed_reason IS NULL", (e.serial, day.isoformat())).fetchone()
            if read[0]:
                errs.append(Problem("date", day.isoformat(), f"{read[0]} reading(s) of {e.serial} from {read[1]} on "
                                    f"were taken in {current.machine} after it; correct the date or remove them first"))
            if moved:
                errs.append(Problem("date", day.isoformat(), f"pump {e.serial} was fitted to {moved[0].machine} on "
                                    f"{moved[0].fitted_on}; record the exchange before that or remove the later move"))
        return errs

    def _exchange_fitments(self, e: Event, current: Fitment, fits: dict[str, list[Fitment]],
                           reps: dict[str, list[Event]]) -> tuple[Fitment, Fitment]:
        """The fitment the exchange closes (the pump that came out, removed that day at that meter
        reading) and the one it opens: the pump that went in, in the same machine and position from
        that day, its own hours counting on from its last removal with a meter reading (0 for a
        pump never fitted), the machine's meter as its fitting reading."""
        assert e.serial_in is not None and e.hours is not None  # the check found both given
        closed = dataclasses.replace(current, removed_on=e.happened_on, machine_hours_at_removal=e.hours)
        hours_in = _hours_at_last_removal(fits.get(e.serial_in, []), reps)
        opened = Fitment(
            id=None, serial=e.serial_in, machine=current.machine, position=current.position, fitted_on=e.happened_on,
            removed_on=None, machine_hours_at_fit=e.hours, pump_hours_at_fit=round(hours_in, 3),
        )
        return closed, opened

    def _move_fitments(self, e: Event, current: Fitment | None, fits: dict[str, list[Fitment]],
                       reps: dict[str, list[Event]]) -> tuple[Fitment | None, Fitment]:
        # _check_move found the destination given, the pump known and, if it sat in a machine, its hours
        assert e.serial and e.to_machine and e.to_position and e.to_hours is not None
        if current is not None:
            assert e.hours is not None  # required of a pump in a machine
            hours_at_removal = meter.pump_hours(e.hours, e.happened_on, current, reps.get(current.machine, []))
            closed = dataclasses.replace(current, removed_on=e.happened_on, machine_hours_at_removal=e.hours)
        else:
            closed = None
            hours_at_removal = _hours_at_last_removal(fits.get(e.serial, []), reps)
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

    def event_doubts(self, event: Event) -> list[Doubt]:
        """``logbook.plausible.meter_doubt`` for an event's hour meter on its machine (the
        machine's records before that day on the same meter, and its utilisation)."""
        from logbook.plausible import hours_per_day, meter_before, meter_doubt

        machine = event.machine
        if machine is None and event.serial is not None:  # a pump's event: the machine it sat in that day
            fit = meter.fitment_on(self._fitments_of(event.serial), event.happened_on)
            machine = fit.machine if fit else None
        meter_hours = event.hours
        if machine is None or meter_hours is None:
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
        doubt = meter_doubt(event.happened_on, meter_hours, meter_before(points),
                            hours_per_day(points, event.happened_on), field_name="hours")
        return [doubt] if doubt else []
