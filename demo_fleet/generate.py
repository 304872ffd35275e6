"""Build the demo operator's CSV files (docs/csv-formats.md) and load them into a store.

Dates count back from ``today`` so that the demo always looks current; the same
``today`` and ``seed`` give byte-identical files.
"""

from __future__ import annotations

import csv
import io
import tempfile
from dataclasses import dataclass
from datetime import date, timedelta
from pathlib import Path

from demo_fleet import scenario as sc
from demo_fleet.pumps import PumpPlan, build_pumps
from demo_fleet.simulate import event_row, hours_text, simulate_pump
from demo_fleet.timeline import MachineLife, build_machines

#: The order ``load`` imports the files in: events before readings, because a
#: reading is checked against the machine its pump sat in on that day (moves) and
#: against that machine's meter (meter replacements).
IMPORT_ORDER = ("models", "machines", "pumps", "events", "readings")

COLUMNS = {
    "models": (
        "model", "description", "displacement", "rated_pressure", "max_speed", "ref_temp", "ref_pressure",
        "oil_grade", "oil_vi", "test_speed", "test_temp_min", "test_temp_max", "reading_interval_hours",
        "reading_interval_days", "case_drain_limit", "servo_pressure_limit", "neutral_drift_limit",
    ),
    "machines": ("unit", "site", "description"),
    "pumps": ("serial", "model", "note", "machine", "position", "fitted_on", "machine_hours_at_fit", "pump_hours_at_fit"),
    "readings": (
        "serial", "date", "machine_hours", "case_drain", "servo_pressure", "neutral_drift", "charge_pressure",
        "oil_temp", "test_pressure", "test_speed", "oil_grade", "oil_vi", "iso4406", "technician", "note",
    ),
    "events": ("date", "kind", "serial", "machine", "hours", "to_machine", "to_position", "to_hours", "technician", "note"),
}
EVENT_ORDER = ("meter_replaced", "move", "oil_change", "overhaul", "exchange", "control_repair", "neutral_reset")


@dataclass
class DemoData:
    """The five tables as rows of CSV text cells, plus the simulation objects behind them."""

    rows: dict[str, list[dict]]
    machines: dict[str, MachineLife]
    pumps: list[PumpPlan]


def _model_rows() -> list[dict]:
    return [
        {
            "model": m.code, "description": m.description, "displacement": f"{m.displacement_cc:g}",
            "rated_pressure": f"{m.rated_pressure_bar:g}", "max_speed": f"{m.max_speed_rpm:g}",
            "ref_temp": f"{m.ref_temp_c:g}", "ref_pressure": f"{m.ref_pressure_bar:g}",
            "oil_grade": str(m.ref_oil[0]), "oil_vi": str(m.ref_oil[1]), "test_speed": f"{m.test_speed_rpm:g}",
            "test_temp_min": f"{m.test_temp_min_c:g}", "test_temp_max": f"{m.test_temp_max_c:g}",
            "reading_interval_hours": str(m.reading_interval_hours), "reading_interval_days": str(m.reading_interval_days),
            "case_drain_limit": f"{m.case_drain_limit_lpm:g}", "servo_pressure_limit": f"{m.servo_pressure_limit_bar:g}",
            "neutral_drift_limit": f"{m.neutral_drift_limit_bar:g}",
        }
        for m in sc.MODELS
    ]


def _machine_rows(machines: dict[str, MachineLife]) -> list[dict]:
    notes = {
        sc.RETIRED_MACHINE: " - retired (frame crack)",
        sc.REPLACEMENT_MACHINE: " - bought used",
        sc.NEW_MACHINE: " - delivered new",
    }
    return [
        {"unit": life.unit, "site": life.site.name, "description": life.description + notes.get(life.unit, "")}
        for life in machines.values()
    ]


def _pump_rows(pumps: list[PumpPlan]) -> list[dict]:
    rows = []
    for plan in pumps:
        row = {"serial": plan.serial, "model": plan.model.code, "note": plan.note}
        row.update({"machine": "", "position": "", "fitted_on": "", "machine_hours_at_fit": "", "pump_hours_at_fit": ""})
        if plan.fits:
            first = plan.fits[0]
            row.update(
                machine=first.machine, position=first.position, fitted_on=first.on.isoformat(),
                machine_hours_at_fit=hours_text(first.op_tenths_at_fit),  # all first fitments precede any meter change
                pump_hours_at_fit=hours_text(first.pump_tenths_at_fit),
            )
        rows.append(row)
    return rows


def _fleet_events(machines: dict[str, MachineLife], pumps: list[PumpPlan], today: date) -> list[dict]:
    """Moves, oil changes and the meter replacement (pump wear events come from the simulation)."""
    rows = []
    move_day = today - timedelta(sc.MOVE_DAYS_AGO)
    for plan in pumps:
        if len(plan.fits) == 2:
            old, new = plan.fits
            rows.append(event_row(
                move_day, "move", plan.serial, old.machine, hours_text(machines[old.machine].meter_tenths(move_day)),
                to_machine=new.machine, to_position=new.position,
                to_hours=hours_text(machines[new.machine].meter_tenths(move_day)),
                technician=sc.WORKSHOP_TECHNICIAN, note=f"{old.machine} retired; pumps moved to {new.machine}",
            ))
    change_day = today - timedelta(sc.OIL_CHANGE_DAYS_AGO)
    life = machines[sc.OIL_CHANGE_MACHINE]
    grade, vi = life.site.oil
    for plan in pumps:
        if plan.fits and plan.fit_on(change_day) is not None and plan.fit_on(change_day).machine == life.unit:
            rows.append(event_row(
                change_day, "oil_change", plan.serial, life.unit, hours_text(life.meter_tenths(change_day)),
                technician=life.site.technicians[1], note=f"tank changed to ISO VG {grade} VI {vi}",
            ))
    meter = machines[sc.METER_MACHINE]
    rows.append(event_row(
        meter.replaced_on, "meter_replaced", "", meter.unit, hours_text(meter.op_tenths(meter.replaced_on)),
        to_hours=hours_text(0), technician=meter.site.technicians[0], note="hour meter failed; new meter fitted",
    ))
    return rows


def build(today: date, seed: int = 7) -> DemoData:
    """Simulate the whole demo operator for ``today`` and ``seed``."""
    machines = build_machines(today, seed)
    pumps = build_pumps(machines, today, seed)
    readings, events = [], _fleet_events(machines, pumps, today)
    for plan in pumps:
        outcome = simulate_pump(plan, machines, today, seed)
        readings += outcome.readings
        events += outcome.events
    machine_of = {p.serial: p for p in pumps}
    readings.sort(key=lambda r: (r["date"], machine_of[r["serial"]].fit_on(date.fromisoformat(r["date"])).machine, r["serial"]))
    events.sort(key=lambda e: (e["date"], EVENT_ORDER.index(e["kind"]), e["machine"], e["serial"]))
    rows = {
        "models": _model_rows(), "machines": _machine_rows(machines), "pumps": _pump_rows(pumps),
        "readings": readings, "events": events,
    }
    return DemoData(rows, machines, pumps)


def csv_text(table: str, rows: list[dict]) -> str:
    from logbook.csvread import quote_formula  # the guard every CSV writer of the program uses

    buffer = io.StringIO()
    writer = csv.DictWriter(buffer, fieldnames=COLUMNS[table], lineterminator="\n")
    writer.writeheader()
    writer.writerows({k: quote_formula(v) if isinstance(v, str) else v for k, v in row.items()} for row in rows)
    return buffer.getvalue()


def write_csvs(dest_dir: Path, today: date, seed: int = 7) -> dict[str, Path]:
    """Write models, machines, pumps, readings and events CSV files into ``dest_dir``."""
    dest_dir = Path(dest_dir)
    dest_dir.mkdir(parents=True, exist_ok=True)
    data = build(today, seed)
    paths = {}
    for table in COLUMNS:
        path = dest_dir / f"{table}.csv"
        path.write_bytes(csv_text(table, data.rows[table]).encode("utf-8"))
        paths[table] = path
    return paths


def load(store, today: date, seed: int = 7, workdir: Path | None = None) -> dict:
    """Write the demo CSVs (to ``workdir`` or a temporary folder) and import them in IMPORT_ORDER."""
    from logbook.imports import import_csv

    def run(folder: Path) -> dict:
        paths = write_csvs(folder, today, seed)
        reports = {table: import_csv(store, table, paths[table], today=today, user="demo") for table in IMPORT_ORDER}
        load_costs(store)
        return reports

    if workdir is not None:
        return run(Path(workdir))
    with tempfile.TemporaryDirectory(prefix="demo-fleet-") as folder:
        return run(Path(folder))


def load_costs(store) -> None:
    """The demo operator's invented costs, entered through the store like anyone's."""
    store.set_currency(sc.CURRENCY)
    for code, (planned, failure) in sc.MODEL_COSTS.items():
        store.set_model_costs(code, planned=planned, failure=failure)
    for scope, table in (("site", sc.SITE_DOWNTIME), ("machine", sc.MACHINE_DOWNTIME)):
        for name, (per_hour, planned_h, failure_h) in table.items():
            store.set_downtime(scope, name, cost_per_hour=per_hour, planned_hours=planned_h, failure_hours=failure_h)


def main(argv: list[str] | None = None) -> int:
    """``python -m demo_fleet OUTDIR [--today YYYY-MM-DD] [--seed N]``"""
    from logbook.cli import Parser, iso_day  # no abbreviated options, strict numbers and dates

    parser = Parser(prog="python -m demo_fleet", description=f"Write the {sc.COMPANY} demo CSV files.")
    parser.add_argument("outdir", type=Path)
    parser.add_argument("--today", type=iso_day, default=date.today(), help="YYYY-MM-DD (default: today)")
    parser.add_argument("--seed", type=int, default=7)
    args = parser.parse_args(argv)
    paths = write_csvs(args.outdir, args.today, args.seed)
    for table, path in paths.items():
        print(f"{table:9} {path}")
    return 0
