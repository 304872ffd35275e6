"""The generator of fleets with known truth (tests/bench/truth_fleet.py), checked on its own."""

from __future__ import annotations

import math
from datetime import timedelta

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from logbook.model import ALL_KINDS, Kind
from tests.bench.truth_fleet import (
    OILS,
    WEARING_PATHS,
    condition,
    crossing_hours,
    make_truth_fleet,
    oil_cst,
    path_to,
    reference_value,
    walther_constants,
    walther_cst,
)


def test_walther_against_the_astm_d341_example():
    # ASTM D341 worked example: an oil of 32 cSt at 40 C and 5.4 cSt at 100 C has about
    # 8.53 cSt at 80 C (re-derived from log10(log10(nu + 0.7)) = A - B log10(T), T in K).
    a, b = walther_constants(40.0, 32.0, 100.0, 5.4)
    assert walther_cst(80.0, a, b) == pytest.approx(8.53, abs=0.01)
    # and it passes through its own two points
    assert walther_cst(40.0, a, b) == pytest.approx(32.0, rel=1e-12)
    assert walther_cst(100.0, a, b) == pytest.approx(5.4, rel=1e-12)


@pytest.mark.parametrize("oil", sorted(OILS))
def test_oil_table_gives_its_viscosity_index(oil):
    # ASTM D2270 as the chemicals library implements it (chemicals.viscosity.viscosity_index, m^2/s)
    from chemicals.viscosity import viscosity_index

    grade, vi = oil
    assert viscosity_index(grade * 1e-6, OILS[oil] * 1e-6) == pytest.approx(vi, abs=0.5)
    assert oil_cst(40.0, grade, vi) == pytest.approx(grade, rel=1e-12)  # ISO 3448 midpoint at 40 C


@pytest.mark.parametrize("path", WEARING_PATHS + ("servo_falling", "drift_growing"))
def test_crossing_is_where_the_path_meets_the_level(path):
    rng = np.random.default_rng(3)
    falling = path == "servo_falling"
    y0, level, hours = (26.0, 18.0, 7000.0) if falling else (1.5, 5.0, 7000.0)
    params = path_to(path, y0, level, hours, rng)
    assert crossing_hours(path, params, level) == pytest.approx(hours, rel=1e-12)
    assert float(condition(path, params, hours)) == pytest.approx(level, rel=1e-12)
    assert float(condition(path, params, 0.0)) == pytest.approx(y0, rel=1e-12)
    before = float(condition(path, params, 0.9 * hours))
    assert (before > level) if falling else (before < level)


def test_power3_is_hagen_poiseuille_with_a_clearance_opening_steadily():
    # Laminar leakage of a concentric annulus: Q = pi D c^3 dp / (12 mu L) (Hagen-Poiseuille;
    # Rabie, Fluid Power Engineering, 2009, eq. 2.19), with c = c0 + k h.
    d, length, dp, mu = 0.02, 0.03, 250e5, 0.027  # m, m, Pa, Pa s
    c0, k = 10e-6, 2e-9  # m, m per operating hour
    hours = np.array([0.0, 1000.0, 5000.0, 12000.0])
    q = math.pi * d * (c0 + k * hours) ** 3 * dp / (12 * mu * length)
    got = condition("power3", (q[0], c0 / k), hours)
    np.testing.assert_allclose(got, q, rtol=1e-12)


def test_paris_path_is_the_paris_law_integrated():
    # da/dN = C (dK)^m with dK proportional to sqrt(a): da/dN = C' a^(m/2) (Paris and Erdogan 1963),
    # integrated numerically by scipy, against the closed form the generator uses.
    a0, m, c = 1.0, 3.6, 2e-4
    p = 2.0 / (m - 2.0)
    hc = a0 ** (1 - m / 2) / (c * (m / 2 - 1))  # where the closed form runs away
    ts = np.array([0.0, 0.3, 0.6, 0.9]) * hc
    sol = solve_ivp(lambda t, a: c * a ** (m / 2), (0.0, ts[-1]), [a0], t_eval=ts, rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(condition("paris", (a0, hc, p), ts), sol.y[0], rtol=1e-6)


def test_same_seed_same_fleet_and_seeds_differ():
    one, two, other = (make_truth_fleet(s, 40, 0.04) for s in (7, 7, 8))
    assert one.fleet.readings == two.fleet.readings
    assert one.truth == two.truth
    assert one.fleet.readings != other.fleet.readings


def test_noise_free_readings_come_back_to_the_true_condition():
    tf = make_truth_fleet(5, 60, 0.0)
    fit = {f.serial: f for f in tf.fleet.fitments}
    checked = 0
    for r in tf.fleet.readings:
        assert r.taken_on < tf.cut
        model = tf.fleet.models[tf.fleet.pumps[r.serial].model]
        x = r.machine_hours - fit[r.serial].machine_hours_at_fit
        for kind in ALL_KINDS:
            t = tf.truth_of(r.serial, kind)
            if t.outlier is not None:
                continue
            # rounding of the stored reading (0.1 h on the meter, 3 decimals on the value)
            want = float(t.value(x))
            assert reference_value(r, kind, model) == pytest.approx(want, rel=2e-3, abs=2e-3)
            checked += 1
    assert checked > 300
    # readings at another temperature or pressure than the reference were really there
    assert len({r.oil_temp_c for r in tf.fleet.readings}) > 100
    assert any(r.oil_grade is not None for r in tf.fleet.readings)


def test_truth_dates_follow_the_machine_calendar():
    tf = make_truth_fleet(11, 120, 0.04)
    fit = {f.serial: f for f in tf.fleet.fitments}
    seen = {"parked_now": 0, "seasonal": 0}
    for t in tf.truth:
        if not math.isfinite(t.cross_hours) or t.cross_on is None:
            continue
        start = fit[t.serial].machine_hours_at_fit
        # the crossing happens during the day cross_on: not yet at its start, reached by the next day's start
        assert tf.meter_on(t.machine, t.cross_on) - start < t.cross_hours + 0.05
        assert tf.meter_on(t.machine, t.cross_on + timedelta(days=1)) - start >= t.cross_hours - 0.05
        assert t.cross_on >= tf.cut and t.cross_hours > t.x_cut
        if t.usage in seen:
            seen[t.usage] += 1
    assert all(seen.values())
    # a machine parked now runs no hours between its last reading and the cut
    for t in tf.truth:
        if t.usage == "parked_now" and t.kind is Kind.CASE_DRAIN:
            last = max(r.taken_on for r in tf.fleet.readings if r.serial == t.serial)
            assert tf.meter_on(t.machine, tf.cut) == pytest.approx(tf.meter_on(t.machine, last + timedelta(days=1)))
            break


def test_failure_modes_are_in_the_fleet():
    tf = make_truth_fleet(2, 240, 0.04)
    paths = {t.path for t in tf.truth}
    assert set(WEARING_PATHS) <= paths and {"servo_falling", "drift_growing", "stable"} <= paths
    assert {t.step for t in tf.truth} >= {"plus40", "sigma8"}
    assert {t.outlier for t in tf.truth} >= {"newest", "earlier"}
    assert {t.readings_class for t in tf.truth} == {"2-4", "5-7", "8+"}
    # the newest case drain typed in gallons reads 3.785 times its neighbours' level
    t = next(t for t in tf.truth if t.outlier == "newest" and t.kind is Kind.CASE_DRAIN)
    rs = sorted((r for r in tf.fleet.readings if r.serial == t.serial), key=lambda r: r.taken_on)
    model = tf.fleet.models[t.model]
    fit = next(f for f in tf.fleet.fitments if f.serial == t.serial)
    ratio = reference_value(rs[-1], t.kind, model) / float(t.value(rs[-1].machine_hours - fit.machine_hours_at_fit))
    assert ratio == pytest.approx(3.785, rel=0.25)  # within the 4 % noise, several sd
