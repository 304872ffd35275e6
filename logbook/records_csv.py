"""The logbook's own records as the CSV files ``logbook import`` reads (docs/csv-formats.md): the
writing side of ``imports``.

What is current goes out: readings as they stand after corrections (the corrected
originals, removed readings and removed events stay in the database and its history),
each pump with the fitment its own row created (later fitments come from the move and
exchange events), costs per model, site and machine. Numbers in the canonical units with
every digit stored, written without an exponent (the importer takes digits, a sign and a
point only); every cell through ``csvread.quote_formula``, the guard all the program's
CSV writers share. Importing the files in ``ORDER`` into an empty database gives the
same records back.
"""

from __future__ import annotations

import csv
import io
from decimal import Decimal

from logbook.csvread import COLUMNS, quote_formula
from logbook.model import CostBook, Event, EventKind, Fitment, Fleet, Kind, PumpModel, Reading

#: Tables in the order an empty database takes them (pumps need models and machines, ...).
ORDER = ("models", "machines", "pumps", "events", "readings", "costs")


def number(value: float | int | None) -> str:
    """Every digit Python keeps of ``value``, positional: 22950.5, 0.00001, -2.5; empty for none."""
    if value is None:
        return ""
    return format(Decimal(repr(float(value))), "f").removesuffix(".0") if isinstance(value, float) else str(value)


def model_rows(models: dict[str, PumpModel]) -> list[dict]:
    rows = []
    for m in models.values():
        limit = {kind: m.limit(kind) for kind in Kind}
        rows.append({
            "model": m.code, "description": m.description, "displacement": number(m.displacement_cc),
            "rated_pressure": number(m.rated_pressure_bar), "max_speed": number(m.max_speed_rpm),
            "ref_temp": number(m.ref_temp_c), "ref_pressure": number(m.ref_pressure_bar), "oil_grade": number(m.oil_grade),
            "oil_vi": number(m.oil_vi), "test_speed": number(m.test_speed_rpm), "test_temp_min": number(m.test_temp_min_c),
            "test_temp_max": number(m.test_temp_max_c), "reading_interval_hours": number(m.reading_interval_hours),
            "reading_interval_days": number(m.reading_interval_days),
            **{f"{kind.value}_limit": number(lim.value if lim else None) for kind, lim in limit.items()},
        })  # fmt: skip
    return rows


def pump_rows(fleet: Fleet) -> list[dict]:
    """One row per pump, with the first fitment unless an exchange event fitted it (that event does again)."""
    by_exchange = {(e.serial_in, e.happened_on) for e in fleet.events if e.kind is EventKind.EXCHANGE and e.serial_in}
    first: dict[str, Fitment] = {}
    for f in sorted(fleet.fitments, key=lambda f: (f.fitted_on, f.id or 0)):
        first.setdefault(f.serial, f)
    rows = []
    for pump in fleet.pumps.values():
        row = {"serial": pump.serial, "model": pump.model, "note": pump.note, "machine": "", "position": "",
               "fitted_on": "", "machine_hours_at_fit": "", "pump_hours_at_fit": ""}  # fmt: skip
        f = first.get(pump.serial)
        if f is not None and (f.serial, f.fitted_on) not in by_exchange:
            row.update(machine=f.machine, position=f.position, fitted_on=f.fitted_on.isoformat(),
                       machine_hours_at_fit=number(f.machine_hours_at_fit), pump_hours_at_fit=number(f.pump_hours_at_fit))
        rows.append(row)
    return rows


def event_rows(events: tuple[Event, ...] | list[Event]) -> list[dict]:
    return [
        {"date": e.happened_on.isoformat(), "kind": e.kind.value, "serial": e.serial or "", "machine": e.machine or "",
         "hours": number(e.hours), "to_machine": e.to_machine or "", "to_position": e.to_position or "",
         "to_hours": number(e.to_hours), "serial_in": e.serial_in or "", "technician": e.technician, "note": e.note}
        for e in events
        if e.removed_reason is None
    ]  # fmt: skip


def reading_rows(readings: tuple[Reading, ...] | list[Reading]) -> list[dict]:
    return [
        {"serial": r.serial, "date": r.taken_on.isoformat(), "machine": r.machine or "", "position": "",
         "machine_hours": number(r.machine_hours), "case_drain": number(r.case_drain_lpm),
         "servo_pressure": number(r.servo_pressure_bar), "neutral_drift": number(r.neutral_drift_bar),
         "charge_pressure": number(r.charge_pressure_bar), "oil_temp": number(r.oil_temp_c),
         "test_pressure": number(r.test_pressure_bar), "test_speed": number(r.test_speed_rpm),
         "oil_grade": number(r.oil_grade), "oil_vi": number(r.oil_vi), "nu40_cst": number(r.nu40_cst),
         "nu100_cst": number(r.nu100_cst), "iso4406": r.iso4406 or "", "technician": r.technician, "note": r.note}
        for r in readings
        if r.superseded_by is None and r.removed_reason is None
    ]  # fmt: skip


def cost_rows(book: CostBook) -> list[dict]:
    rows = [{"scope": "currency", "name": book.currency}] if book.currency else []
    rows += [{"scope": "model", "name": c.model, "planned_cost": number(c.planned), "failure_cost": number(c.failure)}
            for c in book.models.values()]  # fmt: skip
    rows += [{"scope": d.scope, "name": d.name, "downtime_cost_per_hour": number(d.cost_per_hour),
              "planned_downtime_hours": number(d.planned_hours), "failure_downtime_hours": number(d.failure_hours)}
             for d in (*book.sites.values(), *book.machines.values())]  # fmt: skip
    return rows


def table_rows(table: str, fleet: Fleet, book: CostBook | None = None) -> list[dict]:
    """The rows of one table of ``ORDER``."""
    if table == "models":
        return model_rows(fleet.models)
    if table == "machines":
        return [{"unit": m.unit, "site": m.site, "description": m.description} for m in fleet.machines.values()]
    if table == "pumps":
        return pump_rows(fleet)
    if table == "events":
        return event_rows(fleet.events)
    if table == "readings":
        return reading_rows(fleet.readings)
    if table == "costs":
        return cost_rows(book or CostBook())
    raise ValueError(f"table = {table!r}: allowed {', '.join(ORDER)}")


def to_csv(table: str, rows: list[dict]) -> str:
    """The rows under the import header of ``table`` (columns left empty where a row has none)."""
    buffer = io.StringIO()
    writer = csv.DictWriter(buffer, fieldnames=list(COLUMNS[table]), lineterminator="\n", restval="")
    writer.writeheader()
    writer.writerows({k: quote_formula(v) for k, v in row.items()} for row in rows)
    return buffer.getvalue()
