"""read_columns (the fast, column-wise reader) agrees with read_table (row by row)
on every file it accepts, and declines everything that needs a message."""

from __future__ import annotations

import csv
import io
from datetime import date

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import pytest

from logbook.csvread import COLUMNS, read_columns, read_table

TODAY = date(2026, 1, 1)
POOL = {
    "serial": ["S-100", "S-200", "", "bad serial!", "S 1"],
    "date": ["2025-06-01", "2025-07-15", "20250801", "", "01/06/2025", "2031-01-01"],
    "machine": ["M-1", "", "M 2"],
    "position": ["main", "", "swing"],
    "machine_hours": ["1900", "2000.5", "", "-1", "abc", " 7 ", "1_900", "\u0661\u0669\u0660\u0660"],
    "case_drain": ["3.9", "", "0", "401", "=A1"],
    "servo_pressure": ["25", "", "24.5", "nan", "1e999"],
    "neutral_drift": ["-1.5", "", "150", "151"],
    "charge_pressure": ["", "22", "121"],
    "oil_temp": ["50", "", "-30"],
    "test_pressure": ["400", "", "4"],
    "test_speed": ["2000", "", "99"],
    "oil_grade": ["46", "", "VG 68", "47"],
    "oil_vi": ["", "140", "401"],
    "nu40_cst": ["44.1", "", "1.5", "44,1 mm2/s"],
    "nu100_cst": ["6.6", "", "600"],
    "iso4406": ["18/16/13", "", "16/18/13", "\uff11\uff18/16/13"],
    "technician": ["Ana", "", "Ben, the new one", "=cmd"],
    "note": ["", "after filter change", "two\nlines", 'say "hi"', "- seals checked", "'=1+1"],
}


@st.composite
def readings_file(draw):
    names = draw(st.lists(st.sampled_from(sorted(COLUMNS["readings"])), min_size=1, max_size=8, unique=True))
    for required in ("serial", "date", "machine_hours"):
        if draw(st.integers(0, 9)) and required not in names:
            names.append(required)
    if "servo_pressure" not in names and draw(st.booleans()):
        names.append("servo_pressure")

    def cell(name: str) -> str:  # mostly the first (good) value, sometimes anything from the pool
        return POOL[name][0] if draw(st.integers(0, 29)) else draw(st.sampled_from(POOL[name]))

    rows = [[cell(n) for n in names] for _ in range(draw(st.integers(0, 6)))]
    if rows and draw(st.integers(0, 3)) == 0:
        rows.insert(draw(st.integers(0, len(rows))), [""] * len(names))  # a blank row
    if rows and draw(st.integers(0, 5)) == 0:
        rows[0] = rows[0][:-1]  # a short row
    buf = io.StringIO()
    quoting = draw(st.sampled_from([csv.QUOTE_MINIMAL, csv.QUOTE_MINIMAL, csv.QUOTE_ALL]))
    ending = draw(st.sampled_from(["\n", "\r\n", "\r"]))
    csv.writer(buf, quoting=quoting, lineterminator=ending).writerows([names, *rows])
    text = buf.getvalue()
    if draw(st.booleans()):
        text = text.rstrip("\r\n")  # no newline at the end
    return text.encode(draw(st.sampled_from(["utf-8", "utf-8-sig"])))


@pytest.mark.slow
def test_read_columns_agrees_with_read_table():
    stats = {"cases": 0, "fast": 0}

    @settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
    @given(readings_file())
    def check(data):
        stats["cases"] += 1
        rows, lines, problems, blank = read_table("readings", data, TODAY)
        fast = read_columns("readings", data, TODAY)
        if fast is None:
            return
        stats["fast"] += 1
        columns, fast_lines = fast
        assert problems == [] and blank == 0
        assert fast_lines == lines
        names = list(columns)
        assert [dict(zip(names, values)) for values in zip(*columns.values())] == rows

    check()
    print(f"csv reader cases: {stats}")
    assert stats["cases"] >= 200 and stats["fast"] >= 8  # both paths exercised


# -- strict numbers and dates, free text verbatim (issue 10, item 7) ---------------------
HEADER = "serial,date,machine_hours,servo_pressure,iso4406,technician,note\n"
GOOD = ["S-100", "2025-06-01", "1900", "25", "18/16/13", "Ana", ""]


def _file(**cells) -> bytes:
    row = dict(zip(HEADER.strip().split(","), GOOD)) | cells
    return (HEADER + ",".join(row.values()) + "\n").encode()


@pytest.mark.parametrize(
    "column,cell",
    [
        ("machine_hours", "1_900"),  # float() reads it as 1900
        ("machine_hours", "\u0967\u096f\u0966\u0966"),  # 1900 in Devanagari digits
        ("servo_pressure", "\u0662\u0665"),  # 25 in Arabic-Indic digits
        ("servo_pressure", "\uff12\uff15"),  # 25 in full-width digits
        ("iso4406", "\u0661\u0668/\u0661\u0666/\u0661\u0663"),  # 18/16/13 in Arabic-Indic digits
        ("date", "20250601"),  # ISO 8601 basic format: date.fromisoformat (3.11) takes it
        ("date", "2025-W22-7"),  # ISO week date: so does this
    ],
)
def test_lenient_cells_are_refused_by_both_readers(column, cell):
    data = _file(**{column: cell})
    assert read_columns("readings", data, TODAY) is None  # the fast lane declines ...
    rows, _, problems, _ = read_table("readings", data, TODAY)  # ... and the row reader says why
    assert rows == [] and [p.field for p in problems] == [column] and problems[0].value == cell
    assert problems[0].line == 2


@pytest.mark.parametrize("note", ["- seals checked", "=HYPERLINK(\"http://example.invalid\",\"x\")",
                                  "-2+3+cmd|' /C calc'!A0", "@SUM(A1)", "+3 bar more"])
def test_formula_leading_notes_are_stored_verbatim_by_both_readers(note):
    data = _csv(note)
    rows, _, problems, _ = read_table("readings", data, TODAY)
    assert problems == [] and rows[0]["note"] == note and rows[0]["technician"] == note
    columns, _ = read_columns("readings", data, TODAY)
    assert columns["note"] == [note] and columns["technician"] == [note]


def _csv(note: str) -> bytes:
    buf = io.StringIO()
    csv.writer(buf, lineterminator="\n").writerows([HEADER.strip().split(","), GOOD[:5] + [note, note]])
    return buf.getvalue().encode()


def test_one_quote_before_a_formula_start_is_taken_off_text_cells_only():
    data = _csv("'=1+1")
    rows, _, problems, _ = read_table("readings", data, TODAY)
    assert problems == [] and rows[0]["note"] == "=1+1"
    assert read_table("readings", _csv("'plain"), TODAY)[0][0]["note"] == "'plain"  # no formula start: kept
    _, _, problems, _ = read_table("readings", _file(serial="'-S1"), TODAY)
    assert [p.field for p in problems] == ["serial"]  # a name column is never unquoted


def test_a_huge_bad_cell_is_echoed_cut():
    data = _file(machine_hours="9" * 100 + "x" * 100_000)
    _, _, problems, _ = read_table("readings", data, TODAY)
    assert problems[0].field == "machine_hours" and len(str(problems[0])) < 400
    assert "(100100 characters)" in str(problems[0])
    header = ("serial,date,machine_hours [" + "u" * 100_000 + "],servo_pressure\nS-1,2025-06-01,1900,25\n").encode()
    _, _, problems, _ = read_table("readings", header, TODAY)
    assert problems and all(len(str(p)) < 400 for p in problems)
