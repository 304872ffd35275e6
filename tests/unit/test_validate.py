"""Field validation: every message names the field, the value and what is allowed."""

from __future__ import annotations

from datetime import date

import pytest

from logbook import validate

TODAY = date(2026, 12, 1)


@pytest.mark.parametrize(
    "code,ok",
    [
        ("18/16/13", True),
        ("-/16/13", True),
        ("28/28/28", True),
        ("18/16", False),  # two numbers: the three-number form is required here
        ("18/19/13", False),  # more particles >= 6 um than >= 4 um is impossible
        ("29/16/13", False),  # above the top scale number 28 (ISO 4406 table, from memory)
        ("abc", False),
    ],
)
def test_iso4406_codes(code, ok):
    value, problem = validate.parse_iso4406(code)
    assert (problem is None) == ok
    if not ok:
        assert problem.field == "iso4406" and problem.value == code and "18/16/13" in problem.allowed


def test_number_out_of_range_names_field_value_unit_and_range():
    spec = validate.READING_FIELDS["servo_pressure"]
    value, problem = validate.parse_number(spec, "2000", "psi")
    assert value is None
    text = str(problem)
    assert "servo_pressure" in text and "'2000'" in text and "psi" in text and "from 0 to" in text


def test_number_in_psi_is_converted_to_bar():
    value, problem = validate.parse_number(validate.READING_FIELDS["servo_pressure"], "400", "psi")
    assert problem is None and value == pytest.approx(400 / 14.503773773, rel=1e-9)


@pytest.mark.parametrize("text", ["12,5", "1e400", "nan", "=1+1", "4.2.1", ""])
def test_non_numbers_are_rejected_or_blank(text):
    value, problem = validate.parse_number(validate.READING_FIELDS["case_drain"], text)
    assert value is None
    assert (problem is None) == (text == "")


def test_dates():
    assert validate.parse_date("date", "2026-11-30", TODAY) == (date(2026, 11, 30), None)
    _, p = validate.parse_date("date", "2026-12-02", TODAY)
    assert "future" in p.allowed
    _, p = validate.parse_date("date", "30/11/2026", TODAY)
    assert "YYYY-MM-DD" in p.allowed


@pytest.mark.parametrize("grade,ok", [("46", True), ("VG 68", True), ("ISO VG 32", True), ("47", False), ("x", False)])
def test_oil_grades_are_iso_3448(grade, ok):
    # ISO 3448 viscosity grade numbers (ISO VG 2 to 3200).
    value, problem = validate.parse_oil_grade(grade)
    assert (problem is None) == ok
