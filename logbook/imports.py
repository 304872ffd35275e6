"""CSV files in: parse and check every cell, then hand whole files to the store.

Files are imported all-or-nothing. Column headers may carry a unit in brackets
(``case_drain [gpm]``). Formats are documented in docs/csv-formats.md and the README.
"""

from __future__ import annotations

import csv
import hashlib
import io
import re
from dataclasses import dataclass
from datetime import date
from pathlib import Path
from typing import Callable

from logbook import units, validate
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

TABLES = ("models", "machines", "pumps", "events", "readings")
MAX_TEXT = 500
_HEADER_RE = re.compile(r"^\s*([A-Za-z0-9_]+)\s*(?:\[\s*([^\]]*?)\s*\])?\s*$")


@dataclass(frozen=True)
class Column:
    kind: str  # number | date | name | text | grade | iso4406 | event_kind
    required: bool = False
    spec: validate.FieldSpec | None = None


def _num(spec: dict, name: str, required: bool = False) -> Column:
    return Column("number", required, spec[name])


R, M, H = validate.READING_FIELDS, validate.MODEL_FIELDS, validate.HOURS_FIELDS

COLUMNS: dict[str, dict[str, Column]] = {
    "models": {
        "model": Column("name", True),
        "description": Column("text"),
        "displacement": _num(M, "displacement", True),
        "rated_pressure": _num(M, "rated_pressure", True),
        "max_speed": _num(M, "max_speed", True),
        "ref_temp": _num(M, "ref_temp"),
        "ref_pressure": _num(M, "ref_pressure"),
        "oil_grade": Column("grade"),
        "oil_vi": _num(M, "oil_vi"),
        "test_speed": _num(M, "test_speed"),
        "test_temp_min": _num(M, "test_temp_min"),
        "test_temp_max": _num(M, "test_temp_max"),
        "reading_interval_hours": _num(M, "reading_interval_hours"),
        "reading_interval_days": _num(M, "reading_interval_days"),
        "case_drain_limit": _num(M, "case_drain_limit"),
        "servo_pressure_limit": _num(M, "servo_pressure_limit"),
        "neutral_drift_limit": _num(M, "neutral_drift_limit"),
    },
    "machines": {"unit": Column("name", True), "site": Column("name", True), "description": Column("text")},
    "pumps": {
        "serial": Column("name", True),
        "model": Column("name", True),
        "note": Column("text"),
        "machine": Column("name"),
        "position": Column("name"),
        "fitted_on": Column("date"),
        "machine_hours_at_fit": _num(H, "machine_hours_at_fit"),
        "pump_hours_at_fit": _num(H, "pump_hours_at_fit"),
    },
    "readings": {
        "serial": Column("name", True),
        "date": Column("date", True),
        "machine": Column("name"),
        "machine_hours": _num(R, "machine_hours", True),
        "case_drain": _num(R, "case_drain"),
        "servo_pressure": _num(R, "servo_pressure"),
        "neutral_drift": _num(R, "neutral_drift"),
        "charge_pressure": _num(R, "charge_pressure"),
        "oil_temp": _num(R, "oil_temp"),
        "test_pressure": _num(R, "test_pressure"),
        "test_speed": _num(R, "test_speed"),
        "oil_grade": Column("grade"),
        "oil_vi": _num(R, "oil_vi"),
        "iso4406": Column("iso4406"),
        "technician": Column("text"),
        "note": Column("text"),
    },
    "events": {
        "date": Column("date", True),
        "kind": Column("event_kind", True),
        "serial": Column("name"),
        "machine": Column("name"),
        "hours": _num(H, "hours"),
        "to_machine": Column("name"),
        "to_position": Column("name"),
        "to_hours": _num(H, "to_hours"),
        "technician": Column("text"),
        "note": Column("text"),
    },
}

MEASURED = ("case_drain", "servo_pressure", "neutral_drift")


#: Largest file imported at once; bigger ones are refused before parsing (split them:
#: each file is imported all-or-nothing).
MAX_FILE_BYTES = 200 * 1024 * 1024
_FORMULA_RE = re.compile(r"^\s*(=|[+\-@]\s*[A-Za-z(])")
_CACHE_LIMIT = 50_000  # distinct cell texts remembered per column
_INF = float("inf")


def _formula(name: str, value: str) -> Problem:
    return Problem(name, value, "is a spreadsheet formula, not a value: save the sheet as CSV with values")


def parse_text(name: str, value: str) -> tuple[str, Problem | None]:
    if len(value) > MAX_TEXT:
        return "", Problem(name, value[:40] + "...", f"is longer than {MAX_TEXT} characters")
    if any(ord(ch) < 32 and ch not in "\t" for ch in value):
        return "", Problem(name, value, "contains control characters (line breaks are not allowed in one cell)")
    if _FORMULA_RE.match(value):
        return "", _formula(name, value)
    return value, None


def parse_cell(name: str, col: Column, raw: str, unit: str | None, today: date):
    """One cell to its canonical value, or a Problem."""
    if col.kind != "text" and _FORMULA_RE.match(raw) and not _is_number(raw):
        return None, _formula(name, raw)
    if col.kind == "number":
        return validate.parse_number(col.spec, raw, unit)
    if col.kind == "date":
        return validate.parse_date(name, raw, today, required=False)
    if col.kind == "name":
        return validate.parse_name(name, raw, required=False)
    if col.kind == "grade":
        return validate.parse_oil_grade(raw)
    if col.kind == "iso4406":
        return validate.parse_iso4406(raw)
    if col.kind == "event_kind":
        return validate.parse_event_kind(raw) if raw.strip() else (None, None)
    return parse_text(name, raw)


def _is_number(raw: str) -> bool:
    try:
        float(raw)
    except ValueError:
        return False
    return True


def cell_parser(
    name: str, col: Column, unit: str | None, today: date, sink: list[Problem]
) -> Callable[[str], object]:
    """``parse_cell`` for one column, compiled once per file: returns the value and
    appends any problem to ``sink``. A fast path takes plain numbers in range and
    repeated cells (memo); anything unusual goes through ``parse_cell``, so the
    messages are the same."""
    cache: dict[str, object] = {}

    def slow(raw: str):
        value, problem = parse_cell(name, col, raw, unit, today)
        if problem is not None:
            sink.append(problem)
        elif len(cache) < _CACHE_LIMIT:
            cache[raw] = value
        return value

    if col.kind == "number":
        spec = col.spec
        unit_id = unit if unit is not None else spec.quantity.canonical
        tolerance = 1e-9 * max(1.0, abs(spec.maximum))
        lo, hi = spec.minimum - tolerance, spec.maximum + tolerance
        plain = unit_id == spec.quantity.canonical
        integer = spec.integer
        to_canonical = units.to_canonical

        def parse_number(raw: str):
            try:
                return cache[raw]
            except KeyError:
                pass
            try:
                value = float(raw)
            except ValueError:
                return slow(raw)
            if value != value or value == _INF or value == -_INF or integer:
                return slow(raw)
            canonical = value if plain else to_canonical(value, unit_id)
            if lo <= canonical <= hi:
                if len(cache) < _CACHE_LIMIT:
                    cache[raw] = canonical
                return canonical
            return slow(raw)

        return parse_number

    def parse(raw: str):
        try:
            return cache[raw]
        except KeyError:
            return slow(raw)

    return parse


def read_table(table: str, data: bytes, today: date) -> tuple[list[dict], list[int], list[Problem], int]:
    """Parse a CSV file of one table: (rows of canonical values, their line numbers,
    problems, blank rows). Blank readings rows (nothing measured) are skipped."""
    if table not in COLUMNS:
        raise ValueError(f"unknown table {table!r}: choose one of {', '.join(TABLES)}")
    columns = COLUMNS[table]
    if len(data) > MAX_FILE_BYTES:
        return [], [], [Problem("file", f"{len(data) / 1e6:.0f} MB", f"is larger than {MAX_FILE_BYTES // (1024 * 1024)} MiB: "
                                "split it into smaller files (each is imported all-or-nothing)")], 0
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        return [], [], [Problem("file", f"byte {exc.start}", "is not UTF-8 text; save the file as CSV UTF-8", line=line)], 0
    if not text.strip():
        return [], [], [Problem("file", "", "is empty: expected a header row and data rows")], 0
    reader = csv.reader(io.StringIO(text, newline=""))
    try:
        header = next(reader)
    except csv.Error as exc:
        return [], [], [Problem("file", "", f"is not readable CSV ({exc})", line=1)], 0
    problems: list[Problem] = []
    fields: list[tuple[str, str | None]] = []
    for cell in header:
        m = _HEADER_RE.match(cell)
        name = m.group(1).lower() if m else None
        if name not in columns:
            problems.append(Problem("header", cell, f"is not a {table} column; allowed: {', '.join(columns)}", line=1))
            fields.append(("", None))
            continue
        col, unit_text = columns[name], m.group(2)
        unit = None
        if unit_text is not None:
            quantity = col.spec.quantity if col.spec is not None else units.NONE
            unit = units.resolve_unit(quantity, unit_text)
            if unit is None:
                problems.append(
                    Problem("header", cell, f"unit [{unit_text}] is not allowed for {name}; allowed: "
                            f"{units.allowed_units(quantity) or 'no unit'}", line=1)
                )
        if name in (f for f, _ in fields):
            problems.append(Problem("header", cell, "appears twice", line=1))
        fields.append((name, unit))
    present = {f for f, _ in fields}
    for name, col in columns.items():
        if col.required and name not in present:
            problems.append(Problem("header", name, "required column is missing", line=1))
    if problems:
        return [], [], problems, 0
    names = [name for name, _ in fields]
    sink: list[Problem] = []
    parsers = [cell_parser(name, columns[name], unit, today, sink) for name, unit in fields]
    required = [name for name, col in columns.items() if col.required]
    measured = table == "readings"
    width = len(fields)
    rows, lines, blank = [], [], 0
    try:
        for record in reader:
            line = reader.line_num
            if len(record) != width:
                if not "".join(record).strip():
                    continue
                problems.append(Problem("row", f"{len(record)} cells", f"must have {width} cells like the header", line=line))
                continue
            values = dict(zip(names, [parse(raw) for parse, raw in zip(parsers, record)]))
            row_problems = []
            if sink:
                if not "".join(record).strip():
                    sink.clear()
                    continue
                for problem in sink:
                    problem.line = line
                row_problems = sink[:]
                sink.clear()
            for name in required:
                if values[name] in (None, "") and not any(p.field == name for p in row_problems):
                    if not "".join(record).strip():
                        break  # a row of empty cells: skipped
                    row_problems.append(Problem(name, "", "is required", line=line))
            else:
                if measured and values.get("case_drain") is None and values.get("servo_pressure") is None \
                        and values.get("neutral_drift") is None and not any(p.field in MEASURED for p in row_problems):
                    blank += 1  # nothing measured: a round-sheet row left empty, even if its date or hours are
                    continue
                if row_problems:
                    problems += row_problems
                    continue
                rows.append(values)
                lines.append(line)
    except csv.Error as exc:
        problems.append(Problem("file", "", f"is not readable CSV ({exc})", line=reader.line_num))
    return rows, lines, problems, blank


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
    )


def _event(v: dict) -> Event:
    return Event(
        id=None, kind=v["kind"], happened_on=v["date"], serial=v.get("serial"), machine=v.get("machine"),
        hours=v.get("hours"), to_machine=v.get("to_machine"), to_position=v.get("to_position"),
        to_hours=v.get("to_hours"), technician=v.get("technician") or "", note=v.get("note") or "",
    )


def import_bytes(store, table: str, data: bytes, *, name: str, today: date, dry_run: bool = False) -> ImportReport:
    """Import one CSV file's bytes into ``table``; all rows or none."""
    rows, lines, problems, blank = read_table(table, data, today)
    source = (name, hashlib.sha256(data).hexdigest())
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
        report = store.add_readings([_reading(v) for v in rows], lines=lines, today=today, dry_run=write_dry, source=source)
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
