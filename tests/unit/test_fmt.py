"""How a value stands against its limit, in words, for rising and falling readings."""

from logbook import fmt
from logbook.model import Kind, Limit
from logbook.units import UnitPrefs

SERVO = Limit(Kind.SERVO_PRESSURE, 20.0, "below")
DRAIN = Limit(Kind.CASE_DRAIN, 24.0, "above")


def test_rising_reading_is_a_share_of_its_limit():
    assert fmt.limit_use(Kind.CASE_DRAIN, 18.0, DRAIN, UnitPrefs()) == "75%"
    assert fmt.against_limit(Kind.CASE_DRAIN, 18.0, DRAIN, UnitPrefs()) == "75 % of the 24.00 L/min limit"
    assert fmt.against_limit(Kind.CASE_DRAIN, 30.0, DRAIN, UnitPrefs()).endswith("(over)")


def test_falling_reading_is_a_margin_to_its_lower_limit():
    assert fmt.limit_use(Kind.SERVO_PRESSURE, 22.5, SERVO, UnitPrefs()) == "+2.5"
    assert fmt.against_limit(Kind.SERVO_PRESSURE, 22.5, SERVO, UnitPrefs()) == "2.50 bar above the 20.00 bar lower limit"
    below = fmt.against_limit(Kind.SERVO_PRESSURE, 19.0, SERVO, UnitPrefs())
    assert below == "1.00 bar below the 20.00 bar lower limit (over)"
    # 1 bar = 14.503773773 psi (NIST SP 811 via scipy.constants): a 1 bar margin is 14.50 psi.
    assert fmt.against_limit(Kind.SERVO_PRESSURE, 21.0, SERVO, UnitPrefs.us()).startswith("14.50 psi above")
