"""The examples a number message gives fit the field: an hour meter is 22950 or 22950.5 (and in
a CSV file without a thousands separator), a signed field has a negative example, other fields
none; a CSV cell written with a comma is suggested as a number, never read as one."""

from __future__ import annotations

from logbook import validate
from logbook.validate import HOURS_FIELDS, MODEL_FIELDS, READING_FIELDS, number_form, parse_number, parse_quantity


def test_the_examples_fit_the_field():
    hours = number_form(READING_FIELDS["machine_hours"], in_file=True)
    assert "e.g. 22950 or 22950.5" in hours and "thousands separator is not allowed in a CSV file" in hours
    assert "-1.5" not in hours
    assert "-1.5" in number_form(READING_FIELDS["neutral_drift"], in_file=True)
    assert "-1.5" not in number_form(READING_FIELDS["case_drain"], in_file=True)
    assert number_form(MODEL_FIELDS["reading_interval_days"]) == "the digits 0-9, e.g. 30"
    assert "22,950" in number_form(HOURS_FIELDS["hours"])  # typed: a thousands separator is read


def test_a_csv_cell_with_a_comma_is_suggested_not_taken():
    value, problem = parse_number(READING_FIELDS["machine_hours"], "22,950", "h", in_file=True)
    assert value is None
    assert problem.allowed == ("must be a number from 0 to 500000 h written without a thousands separator "
                               "(not allowed in a CSV file); did you mean 22950?")
    value, problem = parse_number(READING_FIELDS["neutral_drift"], "-1,5", "bar", in_file=True)
    assert value is None and "without a decimal comma" in problem.allowed and "did you mean -1.5?" in problem.allowed
    value, problem = parse_number(READING_FIELDS["machine_hours"], "abc", "h", in_file=True)
    assert value is None and "e.g. 22950 or 22950.5" in problem.allowed and "-1.5" not in problem.allowed


def test_typed_numbers_give_examples_that_fit_the_field():
    _, problem = parse_quantity(READING_FIELDS["neutral_drift"], "x", "bar")
    assert "-1,5" in problem.allowed  # a negative example, with a decimal comma as it may be typed
    _, problem = parse_quantity(HOURS_FIELDS["to_hours"], "x", "h")
    assert "e.g. 22950, 22,950 or 22950.5" in problem.allowed
    _, problem = parse_quantity(validate.COST_FIELDS["planned_hours"], "x", "h")
    assert "e.g. 22950" in problem.allowed and "4,2" not in problem.allowed
