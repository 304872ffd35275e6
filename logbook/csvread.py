"""Reading one CSV table: headers with units, every cell parsed and range-checked.

``read_table`` returns rows as dicts (all tables); ``read_columns`` is its fast twin
for big, clean files: it parses column by column and declines (returns None) at
the first thing out of the ordinary, so the row-by-row reader produces the
messages. Both give the same values for a file both accept.

Formula cells (OWASP "CSV Injection"): every CSV the program writes passes each cell
through ``quote_formula``, which puts a single quote before a cell a spreadsheet would
run as a formula (one starting with = + - @, a tab or a carriage return; plain numbers
such as -2.5 are left alone). Reading a text column (technician, note, description)
undoes exactly that: one leading quote before such a start is removed
(``unquote_formula``), so a note written out and read back is the note as typed. Free
text is otherwise stored verbatim, formula-looking or not.
"""

from __future__ import annotations

import csv
import io
import re
from dataclasses import dataclass, replace
from datetime import date
from typing import Callable

from logbook import units, validate
from logbook.model import Problem

TABLES = ("models", "machines", "pumps", "events", "readings", "costs")
MAX_TEXT = validate.MAX_TEXT
_HEADER_RE = re.compile(r"^\s*([A-Za-z0-9_]+)\s*(?:\[\s*([^\]]*?)\s*\])?\s*$")


@dataclass(frozen=True)
class Column:
    kind: str  # number | date | name | text | grade | iso4406 | event_kind
    required: bool = False
    spec: validate.FieldSpec | None = None


def _num(spec: dict, name: str, required: bool = False) -> Column:
    return Column("number", required, spec[name])


R, M, H = validate.READING_FIELDS, validate.MODEL_FIELDS, validate.HOURS_FIELDS
#: A costs file's amounts, checked as ``logbook costs`` checks them, named by their columns.
C = {col: replace(validate.COST_FIELDS[key], name=col) for col, key in (
    ("planned_cost", "planned"), ("failure_cost", "failure"), ("downtime_cost_per_hour", "per_hour"),
    ("planned_downtime_hours", "planned_hours"), ("failure_downtime_hours", "failure_hours"))}

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
    "costs": {
        "scope": Column("name", True),  # model, site or machine
        "name": Column("name", True),
        **{col: _num(C, col) for col in C},
    },
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
        "position": Column("name"),  # checked against the pump's fitment, not stored (round sheets carry it)
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
        "nu40_cst": _num(R, "nu40_cst"),
        "nu100_cst": _num(R, "nu100_cst"),
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
        "serial_in": Column("name"),
        "technician": Column("text"),
        "note": Column("text"),
    },
}

MEASURED = ("case_drain", "servo_pressure", "neutral_drift")


#: Largest file imported at once; bigger ones are refused before parsing (split them:
#: each file is imported all-or-nothing).
MAX_FILE_BYTES = 200 * 1024 * 1024
_FORMULA_RE = re.compile(r"^\s*(=|[+\-@]\s*[A-Za-z(])")
#: Cell starts a spreadsheet reads as a formula (OWASP "CSV Injection").
FORMULA_START = ("=", "+", "-", "@", "\t", "\r")
#: A negative number as the program writes one (-2.5): kept a number, not quoted.
_PLAIN_NUMBER = re.compile(r"-[0-9]+(?:\.[0-9]+)?")
#: Characters that make a file need the csv module: quotes, NUL, and line breaks that
#: str.splitlines() would split on but csv.reader would not.
_NOT_PLAIN = ('"', "\x00", "\v", "\f", "\x1c", "\x1d", "\x1e", "\x85", "\u2028", "\u2029")
#: A row whose first cell starts with this is a comment (e.g. the round sheet's safety lines):
#: skipped before the header always, and after it unless the first column is free text,
#: where "#" is text (no other column's value can start with it).
COMMENT = "#"
_CACHE_LIMIT = 50_000  # distinct cell texts remembered per column
_INF = float("inf")


def quote_formula(cell: str) -> str:
    """The cell as every CSV writer of the program writes it: a single quote before a
    cell that starts like a formula (``FORMULA_START``, also after quotes already there,
    so ``unquote_formula`` gives back exactly the cell), except a plain negative number
    such as -2.5 (digits and one point: no sign +, no exponent)."""
    if cell.lstrip("'").startswith(FORMULA_START) and not _PLAIN_NUMBER.fullmatch(cell):
        return "'" + cell
    return cell


def unquote_formula(cell: str) -> str:
    """Inverse of ``quote_formula`` for a text cell read back: drops one leading quote
    when a formula start follows it (after any further quotes)."""
    if cell.startswith("'") and cell.lstrip("'").startswith(FORMULA_START):
        return cell[1:]
    return cell


def parse_text(name: str, value: str) -> tuple[str, Problem | None]:
    """A free-text cell, verbatim but for the quote ``quote_formula`` adds."""
    text, problem = validate.parse_free_text(name, unquote_formula(value))
    return ("", problem) if problem else (text, None)


def parse_cell(name: str, col: Column, raw: str, unit: str | None, today: date):
    """One cell to its canonical value, or a Problem."""
    if col.kind != "text" and _FORMULA_RE.match(raw) and not _float_like(raw):
        return None, Problem(name, raw, "is a spreadsheet formula, not a value: save the sheet as CSV with values")
    if col.kind == "number":
        return validate.parse_number(col.spec, raw, unit, in_file=True)
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


def _float_like(raw: str) -> bool:
    """float() reads it ('-inf', '+nan'): not a formula, though not a number the checks take."""
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
        # rounding room at each bound, relative to that bound (as validate.parse_number)
        lo = spec.minimum - 1e-9 * max(1.0, abs(spec.minimum))
        hi = spec.maximum + 1e-9 * max(1.0, abs(spec.maximum))
        plain = unit_id == spec.quantity.canonical
        integer = spec.integer
        to_canonical = units.to_canonical
        is_number = units.is_number

        def parse_number(raw: str):
            try:
                return cache[raw]
            except KeyError:
                pass
            if not is_number(raw):  # float() would take 4_2, Unicode digits, nan, spaces
                return slow(raw)
            value = float(raw)
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


def _open(table: str, data: bytes):
    """Decode the file and read its header: (csv reader, [(column, unit)], problems, text)."""
    if table not in COLUMNS:
        raise ValueError(f"unknown table {table!r}: choose one of {', '.join(TABLES)}")
    columns = COLUMNS[table]
    if len(data) > MAX_FILE_BYTES:
        return None, [], [Problem("file", f"{len(data) / 1e6:.0f} MB", f"is larger than {MAX_FILE_BYTES // (1024 * 1024)} MiB: "
                                  "split it into smaller files (each is imported all-or-nothing)")], ""
    try:
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        return None, [], [Problem("file", f"byte {exc.start}", "is not UTF-8 text; save the file as CSV UTF-8", line=line)], ""
    if not text.strip():
        return None, [], [Problem("file", "", "is empty: expected a header row and data rows")], text
    reader = csv.reader(io.StringIO(text, newline=""))
    try:
        header = next(reader)
        while header and header[0].startswith(COMMENT):
            header = next(reader)
    except StopIteration:
        return None, [], [Problem("file", "", "has only comment rows: expected a header row and data rows")], text
    except csv.Error as exc:
        return None, [], [Problem("file", "", f"is not readable CSV ({exc})", line=reader.line_num)], text
    at = reader.line_num  # the header's line: comment rows may come before it
    problems: list[Problem] = []
    fields: list[tuple[str, str | None]] = []
    for cell in header:
        m = _HEADER_RE.match(cell)
        name = m.group(1).lower() if m else None
        if name not in columns:
            problems.append(Problem("header", cell, f"is not a {table} column; allowed: {', '.join(columns)}", line=at))
            fields.append(("", None))
            continue
        col, unit_text = columns[name], m.group(2)
        unit = None
        if unit_text is not None:
            quantity = col.spec.quantity if col.spec is not None else units.NONE
            unit = units.resolve_unit(quantity, unit_text)
            if unit is None:
                problems.append(
                    Problem("header", cell, f"the unit in brackets is not allowed for {name}; allowed: "
                            f"{units.allowed_units(quantity) or 'no unit'}", line=at)
                )
        if name in (f for f, _ in fields):
            problems.append(Problem("header", cell, "appears twice", line=at))
        fields.append((name, unit))
    present = {f for f, _ in fields}
    for name, col in columns.items():
        if col.required and name not in present:
            problems.append(Problem("header", name, "required column is missing", line=at))
    if problems:
        problems = _separator_hint(header, text, at) + problems  # the cause first
    return reader, fields, problems, text


_SPLIT_DECIMAL = re.compile(r"(?:^|,)-?[0-9]+,[0-9]+(?:,|$)")
_DECIMAL_COMMA = re.compile(r"(?:^|;)\s*-?[0-9]+,[0-9]+\s*(?:;|$)", re.M)


def _separator_hint(header: list[str], text: str, line: int) -> list[Problem]:
    """A header that reads as one cell holding ';' is a file saved with semicolons between the
    columns (spreadsheets do so where the decimal mark is a comma): say so, and how to fix it."""
    if len(header) != 1 or ";" not in header[0]:
        return []
    how = ("the file uses ';' between columns: save it as CSV with commas between columns "
           "(in the spreadsheet: CSV UTF-8, comma-separated), or replace the ';' with ','")
    if _DECIMAL_COMMA.search(text):
        how += ("; its numbers are written with a decimal comma (e.g. 4,2): write them with a decimal "
                "point (4.2), e.g. by setting the spreadsheet's language to one that uses the point, before saving")
    return [Problem("file", "';' separators", how, line=line)]


def read_table(table: str, data: bytes, today: date) -> tuple[list[dict], list[int], list[Problem], int]:
    """Parse a CSV file of one table: (rows of canonical values, their line numbers,
    problems, blank rows). Blank readings rows (nothing measured) are skipped."""
    reader, fields, problems, _ = _open(table, data)
    if problems:
        return [], [], problems, 0
    columns = COLUMNS[table]
    names = [name for name, _ in fields]
    sink: list[Problem] = []
    parsers = [cell_parser(name, columns[name], unit, today, sink) for name, unit in fields]
    required = [name for name, col in columns.items() if col.required]
    measured = table == "readings"
    width = len(fields)
    comments = columns[names[0]].kind != "text"
    rows, lines, blank = [], [], 0
    try:
        for record in reader:
            line = reader.line_num
            if comments and record and record[0].startswith(COMMENT):
                continue
            if len(record) != width:
                if not "".join(record).strip():
                    continue
                comma = (" (a number with a decimal comma, e.g. 4,2, splits into two cells: write it 4.2)"
                         if len(record) > width and _SPLIT_DECIMAL.search(",".join(record)) else "")
                problems.append(Problem("row", f"{len(record)} cells", f"must have {width} cells like the header{comma}",
                                        line=line))
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


def _plain_cells(text: str, width: int) -> tuple[list[list[str]], int]:
    """The cells of a plain file's data rows (after the header line), column by column, and how
    many rows; ([], 0) unless every line has ``width`` cells. Each cell of the last column keeps
    its line's "\\n" (read_columns parses it without): every line end is made a cell boundary
    too, so that a row of too few or too many cells shows as a last-column cell without one."""
    if "\r" in text:
        text = text.replace("\r\n", "\n").replace("\r", "\n")
    body = text[text.find("\n") + 1:] if "\n" in text else ""
    if not body:
        return [], 0
    if body[-1] != "\n":
        body += "\n"
    rows = body.count("\n")
    flat = body.replace("\n", "\n,").split(",")
    flat.pop()  # the empty cell after the last line end
    if len(flat) != rows * width:
        return [], 0
    columns = [flat[j::width] for j in range(width)]
    if not all(cell[-1:] == "\n" for cell in set(columns[-1])):
        return [], 0  # a line of fewer cells and one of more
    return columns, rows


def read_columns(table: str, data: bytes, today: date) -> tuple[dict[str, list], list[int]] | None:
    """``read_table`` column by column, for a file with nothing unusual: ({column: values},
    line numbers), or None as soon as anything would need a message, a blank row or an
    irregular row, so the caller falls back to ``read_table``."""
    try:
        reader, fields, problems, text = _open(table, data)
        if problems or text.startswith(COMMENT) or f"\n{COMMENT}" in text or f"\r{COMMENT}" in text \
                or f'"{COMMENT}' in text:
            return None  # comment rows: read_table skips them
        width = len(fields)
        plain = not any(ch in text for ch in _NOT_PLAIN)
        if plain:
            # No quoting and only \n, \r\n or \r line ends: every record is one line of
            # width-1 commas, so plain splitting gives exactly what csv.reader gives.
            cells_by_column, rows = _plain_cells(text, width)
            if not rows:
                return None
            lines = list(range(2, rows + 2))
        else:
            records, lines = [], []
            for record in reader:
                records.append(record)
                lines.append(reader.line_num)
            if not records or set(map(len, records)) != {width}:
                return None
            cells_by_column = list(zip(*records))
    except csv.Error:
        return None
    columns: dict[str, list] = {}
    has_none: dict[str, bool] = {}  # per column, found on its distinct values: a cell read as None
    has_blank: dict[str, bool] = {}  # ... or as ""
    sink: list[Problem] = []
    ends = len(fields) - 1 if plain else None  # the last column's cells end in "\n" (_plain_cells)
    for k, ((name, unit), cells) in enumerate(zip(fields, cells_by_column)):
        parse = cell_parser(name, COLUMNS[table][name], unit, today, sink)
        if k == ends:
            parsed = {cell: parse(cell[:-1]) for cell in set(cells)}
        else:
            parsed = {cell: parse(cell) for cell in set(cells)}
        if sink:
            return None
        columns[name] = list(map(parsed.__getitem__, cells))
        values = parsed.values()
        has_none[name] = None in values
        has_blank[name] = has_none[name] or "" in values
    for name, col in COLUMNS[table].items():
        if col.required and has_blank[name]:
            return None
    if table == "readings" and all(has_none.get(k, True) for k in MEASURED):  # else no row lacks all of them
        n = len(lines)
        measured = [columns.get(k) or [None] * n for k in MEASURED]
        if (None, None, None) in set(zip(*measured)):
            return None
    return columns, lines
