"""Numbers as people type them on the forms and the command line: unit suffixes (the
README's 1.8gpm, 265psi, 122F, 20lpm), a decimal comma and thousands separators where
unambiguous; messages name the on-screen label and the unit shown."""

from __future__ import annotations

import pytest
from scipy import constants

from logbook.model import Problem
from logbook.validate import READING_FIELDS, parse_quantity, say

PSI_BAR = constants.psi / constants.bar  # 1 psi = 6894.757 Pa, 1 bar = 1e5 Pa (NIST SP 811)
GAL_L = constants.gallon / constants.litre  # 1 US gallon = 3.785412 L (NIST SP 811)


@pytest.mark.parametrize("field, text, unit, expected", [
    ("case_drain", "1.8gpm", "L/min", 1.8 * GAL_L),
    ("servo_pressure", "265psi", "bar", 265 * PSI_BAR),
    ("oil_temp", "122F", "C", 50.0),  # (122 - 32) / 1.8 = 50 (NIST SP 811 B.9)
    ("case_drain", "20lpm", "L/min", 20.0),
    ("case_drain", "20 L/min", "gpm", 20.0),  # a unit typed overrides the user's units
    ("case_drain", "28,9", "L/min", 28.9),  # decimal comma
    ("machine_hours", "22,950", "h", 22950.0),  # as the app prints hours
    ("machine_hours", "22,950 h", "h", 22950.0),
    ("machine_hours", "1,234,567.5", "h", None),  # grouped, but over the range: refused below
    ("machine_hours", "1.234,5", "h", 1234.5),  # dot groups, comma decimal
    ("test_speed", "1,800", "rpm", 1800.0),  # 1.8 rpm is out of range: only 1800 fits
    ("case_drain", "2,125", "L/min", 2.125),  # 2125 L/min is out of range: only 2.125 fits
    ("neutral_drift", "-1,5", "bar", -1.5),
])
def test_numbers_are_read_as_typed(field, text, unit, expected):
    value, problem = parse_quantity(READING_FIELDS[field], text, unit)
    if expected is None:
        assert value is None and problem is not None
    else:
        assert problem is None and value == pytest.approx(expected, rel=1e-12)


def test_an_ambiguous_comma_is_refused_with_both_readings():
    # charge pressure 0-120 bar: 1,500 could be 1500 psi (103 bar) or 1.5 psi: both in range
    value, problem = parse_quantity(READING_FIELDS["charge_pressure"], "1,500", "psi")
    assert value is None and "could be 1500 or 1.500" in problem.allowed


def test_messages_use_the_label_and_the_unit_shown():
    _, problem = parse_quantity(READING_FIELDS["machine_hours"], "2295O", "h")
    text = say(problem)
    assert text.startswith("Hour meter '2295O': must be a number from 0 to 500000 h") and "machine_hours" not in text
    _, problem = parse_quantity(READING_FIELDS["case_drain"], "9999", "gpm")
    assert say(problem) == "Case drain '9999': must be a number from 0 to 105.669 gpm"  # 400 L/min / 3.785412
    assert say(Problem("oil_temp", "", "is required with a case drain reading")) == (
        "Oil temperature (empty): is required with a case drain reading")
