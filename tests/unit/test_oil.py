"""Oil viscosity against ASTM D341, ASTM D2270 and ISO 3448 (each check names its worked example)."""

import numpy as np
import pytest

from logbook import oil


def test_walther_constants_d341_worked_example():
    # ASTM D341 worked example as quoted by a secondary source (re-derived): 32 cSt at 40 C,
    # 5.4 cSt at 100 C -> A = 9.5308, B = 3.7466 with T = C + 273.15.
    a, b = oil.walther_constants(40.0, 32.0, 100.0, 5.4)
    assert a == pytest.approx(9.5308, abs=5e-4)
    assert b == pytest.approx(3.7466, abs=5e-4)


def test_walther_viscosity_d341_worked_example_at_80c():
    # Same ASTM D341 example: about 8.53 cSt at 80 C.
    assert oil.viscosity_from_points(80.0, 40.0, 32.0, 100.0, 5.4) == pytest.approx(8.53, abs=0.01)


def test_walther_passes_through_its_two_points():
    # ASTM D341: the line is defined by the two points; it must reproduce them.
    nu = oil.viscosity_from_points(np.array([40.0, 100.0]), 40.0, 68.0, 100.0, 8.7)
    assert nu == pytest.approx([68.0, 8.7], rel=1e-12)


@pytest.mark.parametrize(
    "nu40, nu100, vi",
    [
        (73.30, 8.86, 92.43),  # ASTM D2270 worked example, procedure A (VI 92 rounded)
        (22.83, 5.05, 156.4),  # ASTM D2270 worked example, procedure B (VI 156 rounded)
        (53.47, 7.80, 111.3),  # ASTM D2270 worked example, procedure B
    ],
)
def test_viscosity_index_d2270_worked_examples(nu40, nu100, vi):
    assert oil.viscosity_index(nu40, nu100) == pytest.approx(vi, abs=0.05)


def test_d2270_table_equals_the_chemicals_copy():
    # Cross-check of our copy of ASTM D2270 Table 1 against the `chemicals`
    # package's table (which cites ASTM D2270-10(2016)); test-only dependency.
    from chemicals import viscosity as chem

    for y, low, high in zip(chem.VI_nus, chem.VI_Ls, chem.VI_Hs):
        assert oil.d2270_l_h(y) == pytest.approx((low, high), rel=1e-12)


def test_d2270_formulas_above_70_cst():
    # ASTM D2270: L = 0.8353Y^2 + 14.67Y - 216, H = 0.1684Y^2 + 11.85Y - 97 above 70 cSt.
    y = 80.0
    assert oil.d2270_l_h(y) == pytest.approx((0.8353 * y * y + 14.67 * y - 216, 0.1684 * y * y + 11.85 * y - 97))


def test_viscosity_index_agrees_with_chemicals_over_a_grid():
    # Reference library: chemicals.viscosity.viscosity_index (inputs in m^2/s), unrounded.
    from chemicals.viscosity import viscosity_index as chem_vi

    rng = np.random.default_rng(11)
    for _ in range(200):
        nu100 = rng.uniform(2.1, 90.0)
        nu40 = nu100 * rng.uniform(3.0, 12.0)
        assert oil.viscosity_index(nu40, nu100) == pytest.approx(chem_vi(nu40 * 1e-6, nu100 * 1e-6), rel=1e-9, abs=1e-9)


@pytest.mark.parametrize("grade", [22, 32, 46, 68, 100])
@pytest.mark.parametrize("vi", [40.0, 95.0, 100.0, 140.0, 180.0])
def test_nu100_from_grade_and_vi_round_trips_through_chemicals(grade, vi):
    # The inversion (brentq on D2270) must give an oil whose index, computed by the
    # independent `chemicals` implementation, is the one asked for.
    from chemicals.viscosity import viscosity_index as chem_vi

    nu100 = oil.nu100_from_vi(float(grade), vi)
    assert chem_vi(grade * 1e-6, nu100 * 1e-6) == pytest.approx(vi, abs=1e-6)


@pytest.mark.parametrize("grade, low, high", [(32, 28.8, 35.2), (46, 41.4, 50.6), (68, 61.2, 74.8)])
def test_iso_3448_grade_ranges(grade, low, high):
    # ISO 3448 (via several secondary sources): midpoint at 40 C, limits +/-10 %.
    lo, mid, hi = oil.iso_vg_range(grade)
    assert (lo, mid, hi) == pytest.approx((low, grade, high))


def test_grade_oil_has_its_midpoint_at_40c():
    # ISO 3448: an ISO VG 46 oil is 46 cSt at 40 C (midpoint); D341 line through it.
    assert oil.viscosity_cst(40.0, 46, 100.0) == pytest.approx(46.0, rel=1e-10)
    # Hotter oil is thinner (monotone Walther line).
    nus = oil.viscosity_cst(np.array([30.0, 50.0, 70.0, 90.0]), 46, 100.0)
    assert np.all(np.diff(nus) < 0)


def test_bad_grade_names_field_value_and_allowed():
    with pytest.raises(ValueError, match=r"oil_grade = 45: not an ISO 3448 grade; allowed: .*46"):
        oil.viscosity_cst(40.0, 45, 100.0)


def test_unreachable_vi_names_field():
    with pytest.raises(ValueError, match=r"oil_vi = 900"):
        oil.viscosity_cst(40.0, 46, 900.0)
