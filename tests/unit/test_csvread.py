"""read_columns (the fast, column-wise reader) agrees with read_table (row by row)
on every file it accepts, and declines everything that needs a message."""

from __future__ import annotations

import csv
import io
from datetime import date

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from logbook.csvread import COLUMNS, read_columns, read_table

TODAY = date(2026, 1, 1)
POOL = {
    "serial": ["S-100", "S-200", "", "bad serial!", "S 1"],
    "date": ["2025-06-01", "2025-07-15", "20250801", "", "01/06/2025", "2031-01-01"],
    "machine": ["M-1", "", "M 2"],
    "machine_hours": ["1900", "2000.5", "", "-1", "abc", " 7 "],
    "case_drain": ["3.9", "", "0", "401", "=A1"],
    "servo_pressure": ["25", "", "24.5", "nan", "1e999"],
    "neutral_drift": ["-1.5", "", "150", "151"],
    "charge_pressure": ["", "22", "121"],
    "oil_temp": ["50", "", "-30"],
    "test_pressure": ["400", "", "4"],
    "test_speed": ["2000", "", "99"],
    "oil_grade": ["46", "", "VG 68", "47"],
    "oil_vi": ["", "140", "401"],
    "iso4406": ["18/16/13", "", "16/18/13"],
    "technician": ["Ana", "", "Ben, the new one", "=cmd"],
    "note": ["", "after filter change", "two\nlines", 'say "hi"'],
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
