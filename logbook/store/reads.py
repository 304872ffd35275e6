"""Reading the database into domain records."""

from __future__ import annotations

import json
from datetime import date, datetime
from typing import Sequence

from logbook.model import (
    ALL_KINDS,
    Event,
    EventKind,
    Fitment,
    Fleet,
    Kind,
    Limit,
    Machine,
    Pump,
    PumpHistory,
    PumpModel,
    Reading,
)
from logbook.columns import FIELDS as READING_FIELDS
from logbook.columns import ReadingColumns
from logbook.store.base import StorePart

#: Readings in the store's order: oldest first, by day, hour meter and id.
_READINGS = f"SELECT {', '.join(READING_FIELDS)} FROM readings"
_READING_ORDER = " ORDER BY taken_on, machine_hours, id"
_CURRENT = "superseded_by IS NULL AND removed_reason IS NULL"


def _d(text: str | None) -> date | None:
    return date.fromisoformat(text) if text else None


def _dt(text: str | None) -> datetime | None:
    return datetime.fromisoformat(text) if text else None


def event_from_row(row: dict) -> Event:
    return Event(
        id=row["id"],
        kind=EventKind(row["kind"]),
        happened_on=date.fromisoformat(row["happened_on"]),
        serial=row["serial"],
        machine=row["machine"],
        hours=row["hours"],
        to_machine=row["to_machine"],
        to_position=row["to_position"],
        to_hours=row["to_hours"],
        technician=row["technician"],
        note=row["note"],
        entered_by=row["entered_by"],
        entered_at=_dt(row["entered_at"]),
        removed_reason=row.get("removed_reason"),
        serial_in=row.get("serial_in"),
    )


def fitment_from_row(row: dict) -> Fitment:
    return Fitment(
        id=row["id"],
        serial=row["serial"],
        machine=row["machine"],
        position=row["position"],
        fitted_on=date.fromisoformat(row["fitted_on"]),
        removed_on=_d(row["removed_on"]),
        machine_hours_at_fit=row["machine_hours_at_fit"],
        pump_hours_at_fit=row["pump_hours_at_fit"],
        machine_hours_at_removal=row["machine_hours_at_removal"],
    )


class ReadMixin(StorePart):
    """Queries returning dataclasses; no caller sees a row or SQL."""

    def models(self) -> dict[str, PumpModel]:
        limits: dict[str, list[Limit]] = {}
        for row in self.db.query("SELECT model, kind, value, direction FROM limits ORDER BY model, kind"):
            limits.setdefault(row["model"], []).append(Limit(Kind(row["kind"]), row["value"], row["direction"]))
        order = {k: i for i, k in enumerate(ALL_KINDS)}
        result = {}
        for row in self.db.query("SELECT * FROM models ORDER BY code"):
            lims = tuple(sorted(limits.get(row["code"], []), key=lambda lim: order[lim.kind]))
            result[row["code"]] = PumpModel(
                code=row["code"],
                description=row["description"],
                displacement_cc=row["displacement_cc"],
                rated_pressure_bar=row["rated_pressure_bar"],
                max_speed_rpm=row["max_speed_rpm"],
                ref_temp_c=row["ref_temp_c"],
                ref_pressure_bar=row["ref_pressure_bar"],
                oil_grade=row["oil_grade"],
                oil_vi=row["oil_vi"],
                test_speed_rpm=row["test_speed_rpm"],
                test_temp_min_c=row["test_temp_min_c"],
                test_temp_max_c=row["test_temp_max_c"],
                reading_interval_hours=row["reading_interval_hours"],
                reading_interval_days=row["reading_interval_days"],
                limits=lims,
            )
        return result

    def machines(self) -> dict[str, Machine]:
        return {
            r["unit"]: Machine(r["unit"], r["site"], r["description"])
            for r in self.db.query("SELECT * FROM machines ORDER BY unit")
        }

    def pumps(self) -> dict[str, Pump]:
        return {r["serial"]: Pump(r["serial"], r["model"], r["note"]) for r in self.db.query("SELECT * FROM pumps ORDER BY serial")}

    def fitments(self, serial: str | None = None, machine: str | None = None) -> list[Fitment]:
        sql, params = "SELECT * FROM fitments", []
        where = []
        if serial is not None:
            where.append("serial = ?")
            params.append(serial)
        if machine is not None:
            where.append("machine = ?")
            params.append(machine)
        if where:
            sql += " WHERE " + " AND ".join(where)
        return [fitment_from_row(r) for r in self.db.query(sql + " ORDER BY fitted_on, id", params)]

    def reading_columns(self, where: str = "", params: Sequence[object] = ()) -> ReadingColumns:
        """Readings as columns (``logbook.columns``), straight from the rows SQLite gives: no record
        per reading. ``where``: an SQL condition on the readings table, with its ``params``."""
        sql = _READINGS + (f" WHERE {where}" if where else "") + _READING_ORDER
        return ReadingColumns.from_rows(self.conn.execute(sql, tuple(params)).fetchall())

    def readings(self, serial: str | None = None, *, include_superseded: bool = False) -> list[Reading]:
        """Current readings (oldest first); ``include_superseded`` adds corrected and removed ones."""
        where = [c for c, wanted in (("serial = ?", serial is not None), (_CURRENT, not include_superseded)) if wanted]
        return list(self.reading_columns(" AND ".join(where), [serial] if serial is not None else []))

    def reading(self, reading_id: int) -> Reading | None:
        found = self.reading_columns("id = ?", [reading_id])
        return found[0] if len(found) else None

    def events(self, serial: str | None = None, *, include_removed: bool = False) -> list[Event]:
        """Events in date order; removed ones only with ``include_removed``."""
        where, params = [], []
        if serial is not None:
            where.append("serial = ?")
            params.append(serial)
        if not include_removed:
            where.append("removed_reason IS NULL")
        sql = "SELECT * FROM events" + (" WHERE " + " AND ".join(where) if where else "")
        return [event_from_row(r) for r in self.db.query(sql + " ORDER BY happened_on, id", params)]

    def event(self, event_id: int) -> Event | None:
        rows = list(self.db.query("SELECT * FROM events WHERE id = ?", [event_id]))
        return event_from_row(rows[0]) if rows else None

    def fleet(self) -> Fleet:
        """A consistent snapshot of everything, read in one transaction."""
        self.conn.execute("BEGIN")
        try:
            fleet = Fleet(
                models=self.models(),
                machines=self.machines(),
                pumps=self.pumps(),
                fitments=tuple(self.fitments()),
                readings=self.reading_columns(_CURRENT),
                events=tuple(self.events()),
                source=self.path,
                change_count=self.change_count(),
            )
        finally:
            self.conn.execute("COMMIT")
        return fleet

    def fleet_for_pump(self, serial: str) -> Fleet:
        """The part of the fleet that one pump's forecast in its fleet
        (``analysis.fleet.forecast_in_fleet``) depends on, read in one transaction: the
        pumps of its model (pooling never crosses models), the machines they sat in and
        every record on those machines (their utilisation), all models and machines.
        The same forecast as from ``fleet()``, reading a part of the file
        (tests/store/test_record_speed.py holds the two to the same result)."""
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
            readings = self.reading_columns(
                "(serial IN (SELECT value FROM json_each(?)) OR machine IN (SELECT value FROM json_each(?))) AND "
                + _CURRENT, [serials, machines])
            events = tuple(event_from_row(dict(r)) for r in self.db.query(
                "SELECT * FROM events WHERE (serial IN (SELECT value FROM json_each(?)) "
                "OR machine IN (SELECT value FROM json_each(?)) OR to_machine IN (SELECT value FROM json_each(?))) "
                "AND removed_reason IS NULL ORDER BY happened_on, id", [serials, machines, machines]))
            fleet = Fleet(models=self.models(), machines=self.machines(), pumps=pumps, fitments=fits,
                          readings=readings, events=events, source=self.path, change_count=self.change_count())
        finally:
            self.conn.execute("COMMIT")
        return fleet

    def fleet_as_of(self, day: date) -> Fleet:
        """The fleet as the logbook knew it on ``day`` (see ``logbook.asof``), read in one transaction."""
        from logbook.asof import fleet_as_of

        fleet, known = self.fleet_history()
        return fleet_as_of(fleet, known, day)

    def fleet_history(self):
        """Every row, superseded and removed ones too, with when each became known (``asof.Known``), read in
        one transaction: ``asof.fleet_as_of(fleet, known, day)`` then gives any past day without reading again."""
        self.conn.execute("BEGIN")
        try:
            fleet = Fleet(
                models=self.models(),
                machines=self.machines(),
                pumps=self.pumps(),
                fitments=tuple(self.fitments()),
                readings=tuple(self.readings(include_superseded=True)),
                events=tuple(self.events(include_removed=True)),
                source=self.path,
                change_count=self.change_count(),
            )
            known = self.known_spans(fleet)
        finally:
            self.conn.execute("COMMIT")
        return fleet, known

    def known_spans(self, fleet: Fleet):
        """When each reading and event of ``fleet`` came to be known and, if corrected or removed,
        the day that was entered (from the corrections' own entry times and the audit trail)."""
        from logbook.asof import Known

        removed = {
            (row["table_name"], int(row["row_key"])): datetime.fromisoformat(row["at"]).date()
            for row in self.db.query(
                "SELECT table_name, row_key, min(at) AS at FROM audit WHERE action = 'remove' "
                "AND table_name IN ('readings', 'events') GROUP BY table_name, row_key"
            )
        }
        by_id = {r.id: r for r in fleet.readings}
        corrections = {r.superseded_by for r in fleet.readings if r.superseded_by is not None}

        def entered(r: Reading) -> date:
            return r.entered_at.date() if r.entered_at is not None else r.taken_on

        readings: dict[int, tuple[date, date | None]] = {}
        for r in fleet.readings:
            if r.id is None:  # a stored reading always has its id
                continue
            known_from = entered(r) if r.id in corrections else r.taken_on
            until = None
            if r.superseded_by is not None and r.superseded_by in by_id:
                until = entered(by_id[r.superseded_by])
            if r.removed_reason is not None:
                gone = removed.get(("readings", r.id), known_from)
                until = gone if until is None else min(until, gone)
            readings[r.id] = (known_from, until)
        events = {
            e.id: (e.happened_on, removed.get(("events", e.id), e.happened_on) if e.removed_reason is not None else None)
            for e in fleet.events if e.id is not None
        }
        return Known(readings=readings, events=events)

    def history(self, serial: str) -> PumpHistory:
        return self.fleet().history(serial)

    def counts(self) -> dict[str, int]:
        return {
            table: self.db.table(table).count
            for table in ("models", "machines", "pumps", "fitments", "readings", "events")
        }

    def audit_trail(self, serial: str | None = None) -> list[dict]:
        if serial is None:
            return list(self.db.query("SELECT * FROM audit ORDER BY id"))
        return list(self.db.query("SELECT * FROM audit WHERE serial = ? ORDER BY id", [serial]))
