"""Fleet life: censored Weibull fit, B10/median bounds, expected overhauls, interval extraction."""

from __future__ import annotations

import math
from datetime import date

import numpy as np
import pytest
from lifelines import WeibullFitter
from scipy import stats

from logbook.analysis.life import NoFit, fit_weibull, fleet_life, life_figures, tbo_intervals
from logbook.model import Event, EventKind, Fitment, Fleet, Machine, Pump, PumpModel

# NIST/SEMATECH e-Handbook of Statistical Methods, section 8.4.1.3 (apr413): 20 units,
# 10 failures, 10 still running at 500 h.
NIST_FAILURES = [54, 187, 216, 240, 244, 335, 361, 373, 375, 386]
NIST_HOURS = np.array(NIST_FAILURES + [500] * 10, float)
NIST_OBSERVED = np.array([True] * 10 + [False] * 10)


@pytest.fixture(scope="module")
def nist_fit():
    return fit_weibull(NIST_HOURS, NIST_OBSERVED)


@pytest.fixture(scope="module")
def nist_lifelines():
    return WeibullFitter().fit(NIST_HOURS, NIST_OBSERVED)


def test_nist_handbook_example(nist_fit):
    # NIST/SEMATECH e-Handbook 8.4.1.3: shape 1.7208, scale 606.53, log-likelihood -75.135.
    assert nist_fit.shape == pytest.approx(1.7208, abs=5e-5)
    assert nist_fit.scale_hours == pytest.approx(606.53, abs=5e-3)
    assert nist_fit.loglik == pytest.approx(-75.135, abs=5e-4)
    assert (nist_fit.failures, nist_fit.censored) == (10, 10)


def test_matches_scipy_censored_fit(nist_fit):
    # Outside reference: scipy.stats.weibull_min.fit(CensoredData, floc=0)
    # (gives 1.720797, 606.5276; the NIST/SEMATECH e-Handbook of Statistical Methods, section 8.4.1.3, 1.7208 and 606.53).
    data = stats.CensoredData(uncensored=NIST_FAILURES, right=[500] * 10)
    shape, _, scale = stats.weibull_min.fit(data, floc=0)
    assert nist_fit.shape == pytest.approx(shape, rel=1e-4)
    assert nist_fit.scale_hours == pytest.approx(scale, rel=1e-4)
    assert nist_fit.shape == pytest.approx(1.720797, abs=2e-6)
    assert nist_fit.scale_hours == pytest.approx(606.5276, abs=1e-3)


def test_matches_lifelines_parameters_and_covariance(nist_fit, nist_lifelines):
    # Outside reference: lifelines WeibullFitter (lambda_ = scale, rho_ = shape) and its
    # variance matrix on the natural scale; ours is on the log scale: V = D C D, D = diag(scale, shape).
    wf = nist_lifelines
    assert nist_fit.shape == pytest.approx(wf.rho_, rel=1e-6)
    assert nist_fit.scale_hours == pytest.approx(wf.lambda_, rel=1e-6)
    assert nist_fit.loglik == pytest.approx(wf.log_likelihood_, abs=1e-6)
    cov_log = np.array(nist_fit.cov_log)  # (ln shape, ln scale)
    d = np.diag([nist_fit.scale_hours, nist_fit.shape])
    natural = d @ cov_log[::-1, ::-1] @ d  # reorder to (scale, shape)
    expected = wf.variance_matrix_.loc[["lambda_", "rho_"], ["lambda_", "rho_"]].to_numpy()
    np.testing.assert_allclose(natural, expected, rtol=2e-3)


def test_left_truncation_matches_lifelines_entry():
    # Outside reference: lifelines WeibullFitter.fit(..., entry=) handles delayed entry.
    entry = np.array([0.0] * 15 + [100.0] * 5)
    ours = fit_weibull(NIST_HOURS, NIST_OBSERVED, entry)
    wf = WeibullFitter().fit(NIST_HOURS, NIST_OBSERVED, entry=entry)
    assert ours.shape == pytest.approx(wf.rho_, rel=1e-5)
    assert ours.scale_hours == pytest.approx(wf.lambda_, rel=1e-5)
    assert ours.loglik == pytest.approx(wf.log_likelihood_, abs=1e-5)


def test_b10_and_median_with_fisher_bounds(nist_fit, nist_lifelines):
    # Point values: scipy.stats.weibull_min.ppf and lifelines percentile (survival 0.9 / 0.5).
    assert nist_fit.quantile_hours(0.1) == pytest.approx(
        stats.weibull_min.ppf(0.1, nist_fit.shape, scale=nist_fit.scale_hours), rel=1e-12
    )
    assert nist_fit.quantile_hours(0.1) == pytest.approx(nist_lifelines.percentile(0.9), rel=1e-5)
    assert nist_fit.quantile_hours(0.5) == pytest.approx(nist_lifelines.percentile(0.5), rel=1e-5)
    # Bounds: delta method with lifelines' own variance matrix on the natural scale
    # (se of ln t_p = se of t_p / t_p), Wald 90 % two-sided.
    wf = nist_lifelines
    v = wf.variance_matrix_.loc[["lambda_", "rho_"], ["lambda_", "rho_"]].to_numpy()
    for p in (0.1, 0.5):
        c = -math.log1p(-p)
        tp = wf.lambda_ * c ** (1 / wf.rho_)
        grad = np.array([tp / wf.lambda_, -tp * math.log(c) / wf.rho_**2])
        se_log = math.sqrt(grad @ v @ grad) / tp
        z = stats.norm.ppf(0.95)
        low, high = nist_fit.quantile_bounds(p, 0.90)
        assert low == pytest.approx(tp * math.exp(-z * se_log), rel=2e-3)
        assert high == pytest.approx(tp * math.exp(z * se_log), rel=2e-3)
        assert low < nist_fit.quantile_hours(p) < high


def test_conditional_chance_and_expected_overhauls(nist_fit):
    # Outside reference: conditional failure probability 1 - S(a+h)/S(a) with scipy's Weibull sf.
    ages = np.array([100.0, 400.0, 800.0])
    ahead = np.array([200.0, 200.0, 50.0])
    sf = stats.weibull_min(nist_fit.shape, scale=nist_fit.scale_hours).sf
    expected = 1 - sf(ages + ahead) / sf(ages)
    np.testing.assert_allclose(nist_fit.chance_within(ages, ahead), expected, rtol=1e-10)
    figures = life_figures("N", NIST_HOURS, NIST_OBSERVED, ages_hours=ages, horizon_hours=ahead)
    assert figures.expected_overhauls == pytest.approx(expected.sum(), rel=1e-10)
    assert figures.expected_sd == pytest.approx(math.sqrt(np.sum(expected * (1 - expected))), rel=1e-10)
    assert figures.b10_bounds[0] < figures.b10_hours < figures.b10_bounds[1]
    assert figures.reason == "" and figures.running == 3


def test_too_few_failures_gives_no_fit_and_says_why():
    figures = life_figures("K", [300.0, 500.0, 500.0], [True, False, False])
    assert figures.fit is None and figures.b10_hours is None
    assert "1 overhaul" in figures.reason and "at least 2" in figures.reason
    with pytest.raises(NoFit, match="equally long"):
        fit_weibull([400.0, 400.0, 400.0], [True, True, True])
    with pytest.raises(NoFit, match="positive"):
        fit_weibull([-1.0, 400.0, 300.0], [True, True, True])


def test_few_failures_fit_with_a_caution():
    # Outside reference for the point estimate: scipy weibull_min.fit on uncensored data.
    lives = [820.0, 1430.0, 2210.0]
    figures = life_figures("K", lives + [1500.0], [True, True, True, False])
    assert figures.fit is not None and "wide" in figures.reason
    complete = fit_weibull(lives, [True] * 3)
    shape, _, scale = stats.weibull_min.fit(lives, floc=0)
    assert complete.shape == pytest.approx(shape, rel=1e-4)
    assert complete.scale_hours == pytest.approx(scale, rel=1e-4)


# ---------------------------------------------------------------- from a fleet

MODEL = PumpModel("AX90", "", 90, 400, 2200, 50, 250, 46, 100, 1800, 40, 60, None, None)


def _fleet(pump_hours_at_fit=0.0):
    fits = (Fitment(1, "P1", "EX-1", "main", date(2020, 1, 1), None, 1000.0, pump_hours_at_fit),)
    events = (
        Event(1, EventKind.OVERHAUL, date(2021, 1, 1), serial="P1", machine="EX-1", hours=4000.0),
        Event(2, EventKind.METER_REPLACED, date(2021, 6, 1), machine="EX-1", hours=5000.0, to_hours=0.0),
        Event(3, EventKind.EXCHANGE, date(2022, 1, 1), serial="P1", machine="EX-1", hours=2500.0),
    )
    return Fleet(
        models={"AX90": MODEL},
        machines={"EX-1": Machine("EX-1", "North")},
        pumps={"P1": Pump("P1", "AX90")},
        fitments=fits,
        readings=(),
        events=events,
    )


def test_intervals_from_events_across_a_meter_replacement():
    # Hand arithmetic from model.py definitions: fitted new at meter 1000; overhaul at 4000
    # -> 3000 h; meter 5000 replaced by 0 (continuous +5000); exchange at 2500 -> 7500 - 4000.
    iv = tbo_intervals(_fleet(), ages_now={"P1": 1200.0})["AX90"]
    assert iv.hours == (3000.0, 3500.0, 1200.0)
    assert iv.observed == (True, True, False)
    assert iv.entry == (0.0, 0.0, 0.0)


def test_pump_fitted_with_hours_enters_late():
    iv = tbo_intervals(_fleet(pump_hours_at_fit=500.0))["AX90"]
    assert iv.hours[0] == 3500.0 and iv.entry[0] == 500.0
    figures = fleet_life(_fleet())  # no readings: nothing running is known
    assert figures[0].model == "AX90" and (figures[0].failures, figures[0].censored) == (2, 0)
    assert "wide" in figures[0].reason and figures[0].expected_overhauls is None
