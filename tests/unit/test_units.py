"""Unit factors against NIST SP 811 values and scipy.constants."""

from __future__ import annotations

import pytest
from scipy import constants

from logbook import units


def test_psi_per_bar_matches_nist_sp811():
    # NIST SP 811 (2008), Appendix B.8: 1 psi = 6.894 757 E+03 Pa; 1 bar = 1.0 E+05 Pa.
    assert units.PSI_PER_BAR == pytest.approx(1e5 / 6894.757293168361, rel=1e-12)
    assert units.PSI_PER_BAR == pytest.approx(14.503773773, rel=1e-9)  # NIST SP 811 (2008), Appendix B.8, as above
    assert units.to_canonical(14.503773773, "psi") == pytest.approx(1.0, rel=1e-9)


def test_us_gallon_per_minute_matches_nist_sp811():
    # NIST SP 811, Appendix B.8: 1 gallon (U.S.) = 3.785 412 E-03 m^3 (231 in^3 exactly).
    assert units.LITRE_PER_US_GALLON == pytest.approx(3.785411784, rel=1e-12)
    assert units.LITRE_PER_US_GALLON == pytest.approx(231 * 0.0254**3 * 1000, rel=1e-12)
    assert units.to_canonical(1.0, "gpm") == pytest.approx(3.785411784)
    assert units.from_canonical(3.785411784, "gpm") == pytest.approx(1.0)


def test_fahrenheit_matches_scipy_and_fixed_points():
    # Water boils at 212 F = 100 C, freezes at 32 F = 0 C (definition of the scale).
    assert units.to_canonical(212, "F") == pytest.approx(100.0)
    assert units.to_canonical(32, "F") == pytest.approx(0.0)
    assert units.from_canonical(-40, "F") == pytest.approx(-40.0)
    assert units.to_canonical(122, "F") == pytest.approx(constants.convert_temperature(122, "F", "C"))


def test_theoretical_flow_handbook_identity():
    # Q_th = Vg * n / 1000: 50 cm3/rev at 1450 rpm -> 72.5 L/min (standard fluid power identity:
    # displacement per revolution times speed).
    assert units.theoretical_flow_lpm(50, 1450) == pytest.approx(72.5)
    # US form gpm = in^3/rev * rpm / 231: 1 in^3/rev at 231 rpm is 1 gpm.
    cc_per_in3 = 2.54**3
    assert units.from_canonical(units.theoretical_flow_lpm(cc_per_in3, 231), "gpm") == pytest.approx(1.0)


@pytest.mark.parametrize("text,expected", [("psi", "psi"), ("PSI", "psi"), ("bar", "bar"), ("", "bar"), ("kPa", None)])
def test_pressure_unit_aliases(text, expected):
    assert units.resolve_unit(units.PRESSURE, text) == expected


@pytest.mark.parametrize(
    "text,expected",
    [
        ("4.2gpm", ("4.2", "gpm")),
        (" 61 psi ", ("61", "psi")),
        ("24", ("24", "")),
        ("-1.5e3 bar", ("-1.5e3", "bar")),
        ("120°F", ("120", "°F")),
        ("4_2gpm", None),  # float("4_2") is 42 (PEP 515 underscores): not a reading
        ("\u0664.\u0662gpm", None),  # 4.2 in Arabic-Indic digits
        ("\uff14.\uff12 gpm", None),  # 4.2 in full-width digits
        ("\u096a.\u0968", None),  # 4.2 in Devanagari digits
        ("1.2.3", None),
        ("nan", None),
        ("", None),
    ],
)
def test_a_value_with_a_unit_is_split_only_when_the_number_is_in_ascii_digits(text, expected):
    assert units.split_value_unit(text) == expected
