"""Corrections and removals: nothing is edited in place or deleted.

A correction inserts a new reading and points the old one at it (``superseded_by``);
a removal marks the row with its reason. Both keep the original, run in one write
transaction (read, check, write under the lock) and leave an audit row with
before, after and the reason.
"""

from __future__ import annotations

import dataclasses
from datetime import date

from logbook.model import Event, EventKind, Fitment, InputRejected, Problem, Reading
from logbook.store.base import StorePart
from logbook.store.reads import fitment_from_row
from logbook.store.readings import READING_COLUMNS

#: Fields of a reading that a correction may change (the rest is who/when/where).
CORRECTABLE = (
    "taken_on machine_hours case_drain_lpm servo_pressure_bar neutral_drift_bar charge_pressure_bar oil_temp_c "
    "test_pressure_bar test_speed_rpm oil_grade oil_vi nu40_cst nu100_cst iso4406 technician note"
).split()
MAX_REASON = 500


def _reason(reason: str | None) -> str:
    text = (reason or "").strip()
    if not text:
        raise InputRejected([Problem("reason", reason or "", "is required: say why, for the audit trail")])
    if len(text) > MAX_REASON or any(ord(ch) < 32 and ch != "\t" for ch in text):
        raise InputRejected([Problem("reason", text[:40], f"must be one line of at most {MAX_REASON} characters")])
    return text


def _row(r: Reading) -> dict:
    """A reading as the audit stores it (the column names of the table)."""
    d = {c: getattr(r, c, None) for c in READING_COLUMNS if c != "import_id"}
    d.update(id=r.id, taken_on=r.taken_on.isoformat(), machine=r.machine, superseded_by=r.superseded_by,
             removed_reason=r.removed_reason)
    return d


def _event_row(e: Event) -> dict:
    d = dataclasses.asdict(e)
    d["kind"] = e.kind.value
    return d


class CorrectionsMixin(StorePart):
    """correct_reading, remove_reading, remove_event."""

    def _current_reading(self, reading_id: int) -> Reading:
        old = self.reading(reading_id)
        if old is None:
            raise InputRejected([Problem("reading", reading_id, "is not a known reading id (see `logbook show SERIAL --all-readings`)")])
        if old.superseded_by is not None:
            raise InputRejected([Problem("reading", reading_id, f"was already corrected by reading {old.superseded_by}; correct that one")])
        if old.removed_reason is not None:
            raise InputRejected([Problem("reading", reading_id, f"was removed ({old.removed_reason}); it cannot be changed")])
        return old

    def _reread(self, reading_id: int) -> Reading:
        """A reading just written in this transaction, as the store now holds it."""
        saved = self.reading(reading_id)
        assert saved is not None
        return saved

    def _kept_since(self, table: str, row_id: int, kept: str) -> str:
        """'corrected on DATE' or 'removed on DATE' for a kept original (the day of its audit row)."""
        action = "correct" if kept == "corrected" else "remove"
        row = self.conn.execute(
            "SELECT at FROM audit WHERE table_name = ? AND row_key = ? AND action = ? ORDER BY id DESC LIMIT 1",
            (table, str(row_id), action),
        ).fetchone()
        return f"{kept} on {row[0][:10]}" if row else kept

    def correct_reading(self, reading_id: int, *, reason: str, today: date, **changes) -> Reading:
        """Supersede a reading by a corrected copy, validated exactly as a new reading
        (the old one left out of the hour-meter timeline). Returns the new reading."""
        why = _reason(reason)
        unknown = sorted(set(changes) - set(CORRECTABLE))
        if unknown:
            raise InputRejected([Problem("field", ", ".join(unknown), "cannot be corrected; allowed: " + ", ".join(CORRECTABLE))])
        with self.transaction():
            old = self._current_reading(reading_id)
            new = dataclasses.replace(old, id=None, entered_by="", entered_at=None, superseded_by=None, machine=None, **changes)
            if all(getattr(new, f) == getattr(old, f) for f in CORRECTABLE):
                raise InputRejected([Problem("changes", "", "change nothing: give at least one new value")])
            checked = self._check_readings([new], today, None, without=[reading_id])
            if checked.problems:
                raise InputRejected(checked.problems)
            if checked.present:  # the corrected values are those of another current reading
                raise InputRejected([Problem("changes", "", "would make it a copy of another reading already recorded "
                                             f"({new.serial} {new.taken_on} {new.machine_hours:g} h); remove this one instead")])
            _, _, machine = checked.items[0]
            # The new row takes the next id; the old row points at it first, because the
            # index of current readings allows one (serial, date, hours) at a time.
            new_id = int(self.conn.execute("SELECT coalesce(max(id), 0) + 1 FROM readings").fetchone()[0])
            self.conn.execute("PRAGMA defer_foreign_keys = ON")
            self.conn.execute("UPDATE readings SET superseded_by = ? WHERE id = ?", (new_id, old.id))
            now = self._now_text()
            values = [
                new.serial, new.taken_on.isoformat(), machine, new.machine_hours, new.case_drain_lpm, new.servo_pressure_bar,
                new.neutral_drift_bar, new.charge_pressure_bar, new.oil_temp_c, new.test_pressure_bar, new.test_speed_rpm,
                new.oil_grade, new.oil_vi, new.nu40_cst, new.nu100_cst, new.iso4406, new.technician, new.note, self.user, now,
                None,
            ]
            self.conn.execute(
                f"INSERT INTO readings (id, {', '.join(READING_COLUMNS)}) VALUES (?, {', '.join('?' * len(READING_COLUMNS))})",
                [new_id, *values],
            )
            saved = self._reread(new_id)
            self._audit("correct", "readings", old.id, old.serial, _row(old), _row(saved), why)
        return saved

    def remove_reading(self, reading_id: int, *, reason: str) -> Reading:
        """Take a reading out of every trend and check, keeping it (marked) for the record."""
        why = _reason(reason)
        with self.transaction():
            old = self._current_reading(reading_id)
            self.conn.execute("UPDATE readings SET removed_reason = ? WHERE id = ?", (why, reading_id))
            saved = self._reread(reading_id)
            self._audit("remove", "readings", old.id, old.serial, _row(old), _row(saved), why)
        return saved

    def remove_event(self, event_id: int, *, reason: str) -> Event:
        """Mark an event removed. A move, or an exchange that names the pump that went in, also gives
        back the old fitment (and takes away the new one); it is
        refused while later records rest on it. A meter replacement is refused while
        later hour-meter records of the machine were read from the new meter."""
        why = _reason(reason)
        with self.transaction():
            old = self.event(event_id)
            if old is None:
                raise InputRejected([Problem("event", event_id, "is not a known event id (see `logbook history SERIAL`)")])
            if old.removed_reason is not None:
                raise InputRejected([Problem("event", event_id, f"was already removed ({old.removed_reason})")])
            if old.kind is EventKind.MOVE:
                self._undo_move(old, why)
            elif old.kind is EventKind.EXCHANGE and old.serial_in is not None:
                self._undo_exchange(old, why)
            elif old.kind is EventKind.METER_REPLACED and old.machine is not None:  # a replacement names its machine
                later = self._records_on_or_after(old.machine, old.happened_on, exclude_event=event_id)
                if later:
                    raise InputRejected([Problem(
                        "event", event_id,
                        f"cannot be removed: {later} on {old.machine} from {old.happened_on} on were read from the new "
                        "hour meter; remove or correct them first",
                    )])
            self.conn.execute("UPDATE events SET removed_reason = ? WHERE id = ?", (why, event_id))
            saved = self.event(event_id)
            assert saved is not None  # marked just now, in this transaction
            self._audit("remove", "events", old.id, old.serial, _event_row(old), _event_row(saved), why)
        return saved

    def _records_on_or_after(self, machine: str, on: date, *, exclude_event: int) -> str:
        """Describe the hour-meter records of a machine dated on or after ``on`` ('' when none)."""
        day = on.isoformat()
        n_readings = self.conn.execute(
            "SELECT count(*) FROM readings WHERE machine = ? AND taken_on >= ? AND superseded_by IS NULL AND removed_reason IS NULL",
            (machine, day),
        ).fetchone()[0]
        n_events = self.conn.execute(
            "SELECT count(*) FROM events WHERE id != ? AND removed_reason IS NULL AND happened_on >= ? "
            "AND ((machine = ? AND hours IS NOT NULL) OR (to_machine = ? AND to_hours IS NOT NULL))",
            (exclude_event, day, machine, machine),
        ).fetchone()[0]
        n_fits = self.conn.execute(
            "SELECT count(*) FROM fitments WHERE machine = ? AND fitted_on >= ?", (machine, day)
        ).fetchone()[0]
        parts = [f"{n} {what}" for n, what in ((n_readings, "reading(s)"), (n_events, "event(s)"), (n_fits, "fitment(s)")) if n]
        return ", ".join(parts)

    def _undo_exchange(self, e: Event, why: str) -> None:
        """Delete the fitment an exchange opened for the pump that went in and reopen the one it
        closed (both audited); refused while later records of the pump that went in rest on it."""
        day = e.happened_on.isoformat()
        problems = []
        n_read = self.conn.execute(
            "SELECT count(*) FROM readings WHERE serial = ? AND taken_on >= ? AND superseded_by IS NULL "
            "AND removed_reason IS NULL", (e.serial_in, day)).fetchone()[0]
        if n_read:
            problems.append(f"{n_read} reading(s) of {e.serial_in} were taken after it went in")
        n_events = self.conn.execute(
            "SELECT count(*) FROM events WHERE serial = ? AND happened_on >= ? AND id != ? AND removed_reason IS NULL",
            (e.serial_in, day, e.id)).fetchone()[0]
        if n_events:
            problems.append(f"{n_events} event(s) of {e.serial_in} happened after it went in")
        fits_in = [fitment_from_row(dict(r)) for r in self.db.query(
            "SELECT * FROM fitments WHERE serial = ? ORDER BY fitted_on, id", [e.serial_in])]
        opened = [f for f in fits_in if f.fitted_on == e.happened_on and f.machine == e.machine]
        if not opened or opened[-1] is not fits_in[-1] or opened[-1].removed_on is not None:
            problems.append(f"pump {e.serial_in} has been moved since (or its fitment record is missing; run "
                            "`logbook check`)")
        fits_out = [fitment_from_row(dict(r)) for r in self.db.query(
            "SELECT * FROM fitments WHERE serial = ? ORDER BY fitted_on, id", [e.serial])]
        closed = [f for f in fits_out if f.removed_on == e.happened_on and f.machine == e.machine]
        if closed and any(f.fitted_on >= e.happened_on for f in fits_out if f is not closed[-1]):
            problems.append(f"pump {e.serial} has been fitted elsewhere since")
        if problems:
            raise InputRejected([Problem(
                "event", e.id, "is an exchange that later records depend on: " + "; ".join(problems) + ". Remove those first",
            )])
        new_fit = opened[-1]
        self.conn.execute("DELETE FROM fitments WHERE id = ?", (new_fit.id,))
        self._audit("remove", "fitments", new_fit.id, e.serial_in, dataclasses.asdict(new_fit), None, why)
        if closed:
            c = closed[-1]
            reopened = dataclasses.replace(c, removed_on=None, machine_hours_at_removal=None)
            self.conn.execute("UPDATE fitments SET removed_on = NULL, machine_hours_at_removal = NULL WHERE id = ?", (c.id,))
            self._audit("update", "fitments", c.id, e.serial, dataclasses.asdict(c), dataclasses.asdict(reopened), why)

    def _undo_move(self, e: Event, why: str) -> None:
        """Delete the fitment a move opened and reopen the one it closed (both audited)."""
        day = e.happened_on.isoformat()
        problems = []
        later_readings = [
            r[0] for r in self.conn.execute(
                "SELECT id FROM readings WHERE serial = ? AND taken_on >= ? AND superseded_by IS NULL AND removed_reason IS NULL "
                "ORDER BY taken_on, id",
                (e.serial, day),
            )
        ]
        if later_readings:
            ids = ", ".join(str(i) for i in later_readings[:10]) + (" ..." if len(later_readings) > 10 else "")
            problems.append(f"reading(s) {ids} of {e.serial} were taken after the move")
        later_events = [
            r[0] for r in self.conn.execute(
                "SELECT id FROM events WHERE serial = ? AND happened_on >= ? AND id != ? AND removed_reason IS NULL ORDER BY happened_on, id",
                (e.serial, day, e.id),
            )
        ]
        if later_events:
            problems.append(f"event(s) {', '.join(map(str, later_events))} of {e.serial} happened after the move")
        fits = [fitment_from_row(dict(r)) for r in self.db.query(
            "SELECT * FROM fitments WHERE serial = ? ORDER BY fitted_on, id", [e.serial])]
        opened = [f for f in fits if f.fitted_on == e.happened_on and f.machine == e.to_machine and f.position == e.to_position]
        if not opened or opened[-1] is not fits[-1]:
            problems.append(f"pump {e.serial} has been fitted elsewhere since (or its fitment record is missing; run `logbook check`)")
        closed = [f for f in fits if f.removed_on == e.happened_on and (e.machine is None or f.machine == e.machine)]
        if closed:
            c = closed[-1]
            holder = self.conn.execute(
                "SELECT serial FROM fitments WHERE machine = ? AND position = ? AND serial != ? AND fitted_on >= ?",
                (c.machine, c.position, e.serial, day),
            ).fetchone()
            if holder:
                problems.append(f"position {c.position} on {c.machine} has since been given to pump {holder[0]}")
        if problems:
            raise InputRejected([Problem(
                "event", e.id, "is a move that later records depend on: " + "; ".join(problems) + ". Remove those first",
            )])
        new_fit: Fitment = opened[-1]
        self.conn.execute("DELETE FROM fitments WHERE id = ?", (new_fit.id,))
        self._audit("remove", "fitments", new_fit.id, e.serial, dataclasses.asdict(new_fit), None, why)
        if closed:
            c = closed[-1]
            reopened = dataclasses.replace(c, removed_on=None, machine_hours_at_removal=None)
            self.conn.execute("UPDATE fitments SET removed_on = NULL, machine_hours_at_removal = NULL WHERE id = ?", (c.id,))
            self._audit("update", "fitments", c.id, e.serial, dataclasses.asdict(c), dataclasses.asdict(reopened), why)
