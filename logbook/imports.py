"""CSV files in: parse and check every cell, then hand whole files to the store.

Files are imported all-or-nothing. Column headers may carry a unit in brackets
(``case_drain [gpm]``). Formats are documented in docs/csv-formats.md and the README.
Rows already recorded (also corrected or removed since) are counted, never written
again; what the store says about them comes back as the report's ``flagged`` lines.
"""

from __future__ import annotations

import dataclasses
import hashlib
from datetime import date
from pathlib import Path
from typing import Callable

from logbook.csvread import (  # noqa: F401  (re-exported: the import's public names)
    COLUMNS,
    MAX_FILE_BYTES,
    MAX_TEXT,
    MEASURED,
    TABLES,
    Column,
    cell_parser,
    parse_cell,
    parse_text,
    read_columns,
    read_table,
)
from logbook.model import (
    Event,
    Fitment,
    ImportReport,
    Kind,
    Limit,
    Machine,
    Problem,
    Pump,
    PumpModel,
    Reading,
)


# -- rows to records --------------------------------------------------------------
def _model(v: dict) -> PumpModel:
    limits = []
    for kind, direction in ((Kind.CASE_DRAIN, "above"), (Kind.SERVO_PRESSURE, "below"), (Kind.NEUTRAL_DRIFT, "above")):
        value = v.get(f"{kind.value}_limit")
        if value is not None:
            limits.append(Limit(kind, value, direction))
    days = v.get("reading_interval_days")
    return PumpModel(
        code=v["model"],
        description=v.get("description") or "",
        displacement_cc=v["displacement"],
        rated_pressure_bar=v["rated_pressure"],
        max_speed_rpm=v["max_speed"],
        ref_temp_c=v["ref_temp"] if v.get("ref_temp") is not None else 50.0,
        ref_pressure_bar=v["ref_pressure"] if v.get("ref_pressure") is not None else v["rated_pressure"],
        oil_grade=v.get("oil_grade") or 46,
        oil_vi=v["oil_vi"] if v.get("oil_vi") is not None else 100.0,
        test_speed_rpm=v["test_speed"] if v.get("test_speed") is not None else v["max_speed"],
        test_temp_min_c=v["test_temp_min"] if v.get("test_temp_min") is not None else 40.0,
        test_temp_max_c=v["test_temp_max"] if v.get("test_temp_max") is not None else 60.0,
        reading_interval_hours=v.get("reading_interval_hours"),
        reading_interval_days=int(days) if days is not None else None,
        limits=tuple(limits),
    )


def _pump(v: dict, line: int) -> tuple[tuple[Pump, Fitment | None], list[Problem]]:
    pump = Pump(v["serial"], v["model"], v.get("note") or "")
    if not v.get("machine"):
        extra = [k for k in ("position", "fitted_on", "machine_hours_at_fit") if v.get(k) is not None]
        if extra:
            return (pump, None), [Problem("machine", "", f"is required when {', '.join(extra)} is given", line=line)]
        return (pump, None), []
    missing = [k for k in ("position", "fitted_on", "machine_hours_at_fit") if v.get(k) in (None, "")]
    if missing:
        return (pump, None), [Problem(k, "", "is required when the pump is fitted to a machine", line=line) for k in missing]
    fit = Fitment(
        id=None, serial=pump.serial, machine=v["machine"], position=v["position"], fitted_on=v["fitted_on"],
        removed_on=None, machine_hours_at_fit=v["machine_hours_at_fit"], pump_hours_at_fit=v.get("pump_hours_at_fit") or 0.0,
    )
    return (pump, fit), []


def _reading(v: dict) -> Reading:
    get = v.get
    return Reading(
        None, v["serial"], v["date"], v["machine_hours"], get("case_drain"), get("servo_pressure"), get("neutral_drift"),
        get("charge_pressure"), get("oil_temp"), get("test_pressure"), get("test_speed"), get("oil_grade"), get("oil_vi"),
        get("iso4406"), get("technician") or "", get("note") or "", machine=get("machine"),
        nu40_cst=get("nu40_cst"), nu100_cst=get("nu100_cst"),
    )


def _event(v: dict) -> Event:
    return Event(
        id=None, kind=v["kind"], happened_on=v["date"], serial=v.get("serial"), machine=v.get("machine"),
        hours=v.get("hours"), to_machine=v.get("to_machine"), to_position=v.get("to_position"),
        to_hours=v.get("to_hours"), technician=v.get("technician") or "", note=v.get("note") or "",
        serial_in=v.get("serial_in"),
    )


def _readings_from_columns(columns: dict[str, list], n: int) -> list[Reading]:
    """Readings straight from ``read_columns`` (no per-row dicts)."""
    none = [None] * n

    def col(name: str) -> list:
        return columns.get(name) or none

    texts = [[t or "" for t in col(name)] for name in ("technician", "note")]
    return [
        Reading(None, s, d, h, cd, sp, nd, cp, ot, tp, ts, og, vi, iso, tech, note, machine=m, nu40_cst=n40,
                nu100_cst=n100)
        for s, d, h, cd, sp, nd, cp, ot, tp, ts, og, vi, iso, tech, note, m, n40, n100 in zip(
            columns["serial"], columns["date"], columns["machine_hours"], col("case_drain"), col("servo_pressure"),
            col("neutral_drift"), col("charge_pressure"), col("oil_temp"), col("test_pressure"), col("test_speed"),
            col("oil_grade"), col("oil_vi"), col("iso4406"), texts[0], texts[1], col("machine"), col("nu40_cst"),
            col("nu100_cst"),
        )
    ]


def position_problems(store, rows: list[tuple[str, date, str | None, int]]) -> list[Problem]:
    """A readings file's ``position`` column (a round sheet carries it) is checked, not stored: each
    (serial, date, position, line) given must be where the pump sat that day; a move is an event."""
    from collections import defaultdict

    wanted = [(s, d, p, line) for s, d, p, line in rows if p not in (None, "")]
    if not wanted:
        return []
    fits = defaultdict(list)
    for f in store.fitments():
        fits[f.serial].append(f)
    problems = []
    for serial, day, position, line in wanted:
        fit = next((f for f in fits.get(serial, []) if f.fitted_on <= day and (f.removed_on is None or day < f.removed_on)), None)
        if fit is not None and fit.position != position:
            problems.append(Problem("position", position, f"pump {serial} sat at {fit.position} on {fit.machine} on {day}; "
                                    "a move is recorded as an event (logbook event move)", line=line))
    return problems  # a pump not fitted that day: the store's own check says so


def import_bytes(store, table: str, data: bytes, *, name: str, today: date, dry_run: bool = False,
                 written: list | None = None) -> ImportReport:
    """Import one CSV file's bytes into ``table``; all rows or none. ``written``: a list that gets
    the readings as written (``store.bulk.Written``) when a clean readings file took the column
    path (else it stays empty: read the store again)."""
    source = (name, hashlib.sha256(data).hexdigest())
    fast = read_columns(table, data, today) if table == "readings" else None
    if fast is not None and "position" in fast[0]:
        columns, lines = fast
        wrong = position_problems(store, list(zip(columns["serial"], columns["date"], columns["position"], lines)))
        if wrong:
            return ImportReport(table, problems=wrong, dry_run=dry_run)
    if fast is not None:  # a clean readings file: parsed column by column
        columns, lines = fast
        report = store.add_reading_columns(columns, lines=lines, today=today, dry_run=dry_run, source=source,
                                            written=written)
        if report is None:  # something needs a closer look (or a message): row by row
            report = store.add_readings(_readings_from_columns(columns, len(lines)), lines=lines, today=today,
                                        dry_run=dry_run, source=source)
        return dataclasses.replace(report, added=0 if report.problems else report.added, dry_run=dry_run,
                                   problems=sorted(report.problems, key=lambda p: (p.line or 0, p.field)))
    rows, lines, problems, blank = read_table(table, data, today)
    write_dry = dry_run or bool(problems)
    if table == "models":
        report = store.add_models([_model(v) for v in rows], lines=lines, dry_run=write_dry)
    elif table == "machines":
        report = store.add_machines(
            [Machine(v["unit"], v["site"], v.get("description") or "") for v in rows], lines=lines, dry_run=write_dry
        )
    elif table == "pumps":
        items = []
        for v, line in zip(rows, lines):
            item, errs = _pump(v, line)
            problems += errs
            items.append(item)
        report = store.add_pumps(items, lines=lines, dry_run=write_dry or bool(problems))
    elif table == "readings":
        problems += position_problems(store, [(v["serial"], v["date"], v.get("position"), line) for v, line in zip(rows, lines)
                                              if v.get("serial") and v.get("date")])
        report = store.add_readings([_reading(v) for v in rows], lines=lines, today=today,
                                    dry_run=write_dry or bool(problems), source=source)
    elif table == "costs":
        report = store.add_costs(rows, lines=lines, dry_run=write_dry)
    else:
        report = store.add_events([_event(v) for v in rows], lines=lines, today=today, dry_run=write_dry, source=source)
    all_problems = sorted(problems + report.problems, key=lambda p: (p.line or 0, p.field))
    return ImportReport(
        table,
        added=0 if all_problems else report.added,
        already_present=report.already_present,
        blank=blank,
        problems=all_problems,
        flagged=report.flagged,
        dry_run=dry_run,
        ids=report.ids,
    )


def import_csv(store, table: str, path: str | Path, *, today: date | None = None, dry_run: bool = False, user: str | None = None) -> ImportReport:
    """Import a CSV file from disk (see ``import_bytes``)."""
    path = Path(path)
    if user is not None:
        store.user = user
    data = path.read_bytes()
    return import_bytes(store, table, data, name=path.name, today=today or date.today(), dry_run=dry_run)


ReportPrinter = Callable[[ImportReport], None]
