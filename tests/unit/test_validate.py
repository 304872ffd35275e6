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


# -- strict number and date forms (issue 10, item 7) ---------------------------------
# Python's float() and int() read "4_2" as 42 (PEP 515 digit grouping) and any Unicode
# decimal digit (Unicode category Nd) as that digit; date.fromisoformat (3.11) reads
# the ISO 8601 basic format 20260203. None of these is accepted as typed input.
UNICODE_DIGITS = {
    "devanagari": "\u096a\u0968",  # "42" in Devanagari digits
    "arabic-indic": "\u0664\u0662",  # "42" in Arabic-Indic digits
    "full-width": "\uff14\uff12",  # "42" in full-width digits
}


@pytest.mark.parametrize("text", ["4_2", "1_00", "4_2.5", *UNICODE_DIGITS.values(), "\u0664.\u0662", "4.\uff12"])
def test_numbers_only_in_ascii_digits(text):
    assert 0 < float(text) <= 400  # float() takes it, and in range: it used to be stored
    value, problem = validate.parse_number(validate.READING_FIELDS["case_drain"], text)
    assert value is None and problem.field == "case_drain" and problem.value == text
    assert "digits 0-9" in problem.allowed and "from 0 to 400" in problem.allowed


@pytest.mark.parametrize("text,expected", [("42", 42.0), (" 4.2 ", 4.2), ("-0", 0.0), (".5", 0.5), ("1.", 1.0), ("4e1", 40.0)])
def test_plain_ascii_numbers_still_parse(text, expected):
    assert validate.parse_number(validate.READING_FIELDS["case_drain"], text) == (pytest.approx(expected), None)


@pytest.mark.parametrize("code", ["\u0661\u0668/\u0661\u0666/\u0661\u0663", "\uff11\uff18/\uff11\uff16/\uff11\uff13",
                                  "\u0967\u096e/16/13"])
def test_iso4406_code_in_unicode_digits_is_refused(code):
    assert validate._ISO4406_RE.pattern.count("[0-9]") == 3  # the old pattern used \d, which matches every Nd digit
    value, problem = validate.parse_iso4406(code)
    assert value is None and problem.field == "iso4406"


@pytest.mark.parametrize("text", ["4_6", "\u0664\u0666", "\uff14\uff16", "VG 4_6"])
def test_oil_grade_in_underscored_or_unicode_digits_is_refused(text):
    assert int(text.removeprefix("VG ")) == 46  # what int() makes of it
    value, problem = validate.parse_oil_grade(text)
    assert value is None and problem.field == "oil_grade"


@pytest.mark.parametrize("text", ["20260203", "2026-W05-2", "2026-034", "\uff12\uff10\uff12\uff16-02-03", "2026-02-03T00:00",
                                  " 2026-2-3", "2026/02/03"])
def test_only_yyyy_mm_dd_is_a_date(text):
    value, problem = validate.parse_date("date", text, TODAY)
    assert value is None and "YYYY-MM-DD" in problem.allowed
    assert validate.iso_date(text.strip()) is None


def test_yyyy_mm_dd_with_spaces_around_is_still_a_date():
    assert validate.parse_date("date", " 2026-02-03 ", TODAY) == (date(2026, 2, 3), None)


@pytest.mark.parametrize("text,expected", [("6", 6), ("-1", -1), ("0", 0), ("4_2", None), ("\u0664", None), (" 6", None),
                                           ("+6", None), ("", None), ("-", None), ("6.0", None)])
def test_whole_numbers(text, expected):
    assert validate.whole_number(text) == expected


def test_a_huge_bad_value_is_echoed_cut_and_counted():
    huge = "x" * 1_000_000
    _, problem = validate.parse_number(validate.READING_FIELDS["case_drain"], huge)
    text = str(problem)
    assert problem.value == huge  # the Problem keeps the value whole
    assert len(text) < 400 and "(1000000 characters)" in text and "'" + "x" * 60 + "'" in text
    _, problem = validate.parse_free_text("note", "n" * 5000)
    assert "(5000 characters)" in str(problem) and len(str(problem)) < 300


def test_free_text_is_kept_verbatim_formula_looking_or_not():
    for text in ['=HYPERLINK("http://example.invalid","x")', "-2+3+cmd|' /C calc'!A0", "- seals checked", "@x", "+1",
                 "\tindented", "[/b] Ann [night shift]"]:
        assert validate.parse_free_text("note", text) == (text, None)
    assert validate.parse_free_text("note", "two\nlines")[1].field == "note"
