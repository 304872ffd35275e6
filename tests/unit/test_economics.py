"""Age replacement and per-month expected costs against independent computations."""

from __future__ import annotations

import math

import numpy as np
import pytest
from reliability.Repairable_systems import optimal_replacement_time
from scipy import integrate, optimize, stats

from logbook.economics import (
    JobCosts,
    cost_rate,
    month_costs,
    optimal_age,
    split_lognormal_chance,
    weibull_mean_up_to,
)


@pytest.mark.parametrize("shape,scale,t", [(2.5, 1000.0, 400.0), (1.7208, 606.53, 900.0), (0.8, 5000.0, 12000.0)])
def test_mean_up_to_matches_numeric_integral_of_survival(shape, scale, t):
    # reference: scipy.integrate.quad of the Weibull survival function (scipy.stats.weibull_min.sf)
    expected, _ = integrate.quad(lambda u: stats.weibull_min.sf(u, shape, scale=scale), 0, t)
    assert weibull_mean_up_to(t, shape, scale) == pytest.approx(expected, rel=1e-9)


@pytest.mark.parametrize(
    "shape,scale,cp,cf",
    [(2.5, 1000.0, 1.0, 5.0), (1.7208, 606.53, 3.0, 20.0), (3.5, 9000.0, 8000.0, 30000.0), (1.2, 12000.0, 1.0, 50.0)],
)
def test_optimal_age_agrees_with_direct_numeric_minimization(shape, scale, cp, cf):
    costs = JobCosts(cp, cf)
    opt = optimal_age(shape, scale, costs)
    # reference: bounded scalar minimization of C(T) itself (scipy.optimize.minimize_scalar), not the
    # first-order condition the module solves
    res = optimize.minimize_scalar(lambda lt: float(cost_rate(math.exp(lt), shape, scale, costs)),
                                   bounds=(math.log(scale) - 12, math.log(scale) + 3), method="bounded",
                                   options={"xatol": 1e-10})
    assert opt.age_hours == pytest.approx(math.exp(res.x), rel=1e-4)
    assert opt.cost_per_hour == pytest.approx(res.fun, rel=1e-8)
    assert opt.cost_per_hour < opt.run_to_failure_cost_per_hour
    # run to failure: Cf over the mean life scale * Gamma(1 + 1/k)
    assert opt.run_to_failure_cost_per_hour == pytest.approx(cf / (scale * math.gamma(1 + 1 / shape)))


@pytest.mark.slow
def test_optimal_age_agrees_with_the_reliability_package():
    # general-purpose reliability package (PyPI `reliability`, Reliability_systems.optimal_replacement_time,
    # as-good-as-new replacement q=0); it searches a grid, so agreement to its grid step (~0.1 %)
    for shape, scale, cp, cf in [(2.5, 1000.0, 1.0, 5.0), (3.0, 8000.0, 6000.0, 25000.0), (1.6, 20000.0, 2.0, 9.0)]:
        theirs = optimal_replacement_time(cost_PM=cp, cost_CM=cf, weibull_alpha=scale, weibull_beta=shape,
                                                      q=0, show_time_plot=False, show_ratio_plot=False,
                                                      print_results=False)
        ours = optimal_age(shape, scale, JobCosts(cp, cf))
        assert ours.age_hours == pytest.approx(theirs.ORT, rel=2e-3)
        assert ours.cost_per_hour == pytest.approx(theirs.min_cost, rel=1e-4)


def test_optimal_age_published_example():
    # Worked example of the reliability package's documentation (Cost_PM = 1, Cost_CM = 5, Weibull
    # alpha = 1000, beta = 2.5): optimal replacement time 493.19, minimum cost per unit time 0.0035
    # (values recalled from memory of that documentation; the previous test confirms them by running it).
    opt = optimal_age(2.5, 1000.0, JobCosts(1.0, 5.0))
    assert opt.age_hours == pytest.approx(493.19, abs=0.6)
    assert round(opt.cost_per_hour, 4) == 0.0035


def test_no_finite_optimum_without_wear_out_or_when_failure_is_cheap():
    flat = optimal_age(1.0, 5000.0, JobCosts(1.0, 10.0))
    assert flat.age_hours is None and "shape" in flat.reason
    early = optimal_age(0.7, 5000.0, JobCosts(1.0, 10.0))
    assert early.age_hours is None
    cheap = optimal_age(3.0, 5000.0, JobCosts(10.0, 8.0))
    assert cheap.age_hours is None and "run to failure" in cheap.reason
    assert cheap.cost_per_hour == pytest.approx(8.0 / (5000.0 * math.gamma(1 + 1 / 3.0)))


def test_optimal_age_rejects_a_meaningless_weibull():
    with pytest.raises(ValueError, match="shape"):
        optimal_age(0.0, 100.0, JobCosts(1.0, 2.0))
    with pytest.raises(ValueError, match="scale"):
        optimal_age(2.0, float("nan"), JobCosts(1.0, 2.0))


def test_downtime_enters_both_costs():
    costs = JobCosts.with_downtime(4000.0, 15000.0, downtime_cost_per_hour=120.0, planned_hours=8.0, failure_hours=40.0)
    assert costs.planned == 4000.0 + 960.0
    assert costs.failure == 15000.0 + 4800.0


def test_month_costs_against_exponential_life():
    # Exponential crossing time with rate lam per day: P(T <= t) = 1 - exp(-lam t) and
    # E[(T - d)+] = exp(-lam d) / lam (memorylessness; any probability text).
    lam = 1 / 200.0
    chance = lambda days: 1.0 - np.exp(-lam * np.asarray(days, dtype=float))  # noqa: E731
    costs = JobCosts(1000.0, 6000.0)
    days = [0, 30, 61, 91, 400]
    out = month_costs(chance, days, costs, cost_per_operating_hour=2.0, hours_per_day=10.0, tail_days=20000)
    for d, left, failed, value in zip(days, out.hours_given_up, out.chance_failed, out.expected):
        assert left == pytest.approx(10.0 * math.exp(-lam * d) / lam, rel=1e-3)
        assert failed == pytest.approx(1 - math.exp(-lam * d))
        assert value == pytest.approx(failed * 6000 + (1 - failed) * 1000 + 2.0 * left, rel=1e-3)


def test_month_costs_trade_off_has_an_interior_best_month():
    # a pump whose crossing is most likely in about 4 months: pulling it today throws life away,
    # waiting a year risks the failure cost; the cheapest month lies between
    chance = split_lognormal_chance(60.0, 120.0, 240.0)
    days = [0, 31, 61, 92, 122, 153, 183, 365]
    out = month_costs(chance, days, JobCosts(1000.0, 9000.0), cost_per_operating_hour=0.5, hours_per_day=12.0)
    assert 0 < out.best < len(days) - 1
    assert out.expected[0] > min(out.expected) and out.expected[-1] > min(out.expected)


def test_split_lognormal_chance_reproduces_its_quantiles():
    chance = split_lognormal_chance(40.0, 100.0, 300.0)
    assert chance(np.array([40.0, 100.0, 300.0])) == pytest.approx([0.1, 0.5, 0.9])


@pytest.mark.parametrize("quantiles", [(40.0, 100.0, 300.0), (10.0, 90.0, 120.0), (200.0, 210.0, None)])
def test_split_lognormal_days_left_in_closed_form_matches_the_integral(quantiles):
    # reference: E[(T - d)+] = integral_d^inf (1 - F(t)) dt by scipy.integrate.quad
    from logbook.economics import SplitLognormal

    dist = SplitLognormal.through(*quantiles)
    for d in (0.0, 5.0, 60.0, 100.0, 150.0, 400.0):
        expected, _ = integrate.quad(lambda t: 1.0 - float(dist.cdf(np.array([t]))[0]), d, np.inf, limit=400)
        assert float(dist.days_left(np.array([d]))[0]) == pytest.approx(expected, rel=1e-5, abs=1e-6)
