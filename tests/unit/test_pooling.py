"""Fleet pooling of wear rates (random-coefficient model, empirical-Bayes shrinkage)."""

import numpy as np
import pytest
from statsmodels.stats.meta_analysis import combine_effects

from logbook.analysis.batch import RISING, TrendBatch
from logbook.analysis.fit import B_POOLED, FitOptions, fit_batch
from logbook.analysis.forecast import O_CROSSING, O_TOO_FEW, forecast_batch
from logbook.analysis.pooling import group_prior, shrink_slope


def test_method_of_moments_matches_statsmodels_dersimonian_laird():
    # statsmodels.stats.meta_analysis.combine_effects(method_re="dl"): between-study variance
    # tau^2 and the random-effects mean (DerSimonian and Laird, 1986).
    rng = np.random.default_rng(4)
    slopes = rng.normal(4e-4, 1e-4, 25)
    var = rng.uniform(0.1e-9, 2e-9, 25)
    group = np.zeros(25, dtype=int)
    gp = group_prior(slopes, var, group, np.ones(25, bool), np.ones(25), np.ones(25), tau_floor_rel=0.0)
    ref = combine_effects(slopes, var, method_re="dl")
    assert ref.tau2 > 0
    assert gp.tau2[0] == pytest.approx(ref.tau2, rel=1e-9)
    assert gp.mu[0] == pytest.approx(ref.mean_effect_re, rel=1e-9)
    assert gp.var_mu[0] == pytest.approx(ref.var_eff_w_re, rel=1e-9)


def test_negative_moment_estimate_is_truncated_at_zero():
    # DerSimonian-Laird truncates tau^2 at 0; statsmodels reports the raw (here negative) moment.
    rng = np.random.default_rng(4)
    slopes = rng.normal(4e-4, 1e-4, 25)
    var = rng.uniform(0.2e-8, 3e-8, 25)
    gp = group_prior(slopes, var, np.zeros(25, int), np.ones(25, bool), np.ones(25), np.ones(25), tau_floor_rel=0.0)
    ref = combine_effects(slopes, var, method_re="dl")
    assert ref.tau2 < 0 and gp.tau2[0] == 0.0
    # with tau^2 = 0 the random-effects mean is the fixed-effect (inverse-variance) mean
    assert gp.mu[0] == pytest.approx(ref.mean_effect_fe, rel=1e-9)


def test_shrinkage_is_the_normal_normal_posterior():
    # Conjugate normal prior and likelihood (Gelman et al., Bayesian Data Analysis, 3rd ed., sec. 2.5):
    # posterior mean = precision-weighted mean, posterior variance = 1 / summed precision.
    post, post_var, weight = shrink_slope(np.array([6.0]), np.array([4.0]), np.array([2.0]), np.array([1.0]))
    assert post[0] == pytest.approx((6 / 4 + 2 / 1) / (1 / 4 + 1))
    assert post_var[0] == pytest.approx(1 / (1 / 4 + 1))
    assert weight[0] == pytest.approx(4 / 5)


def _fleet(seed=9, pumps=40):
    """One model's pumps: most with 10 readings, one with 2 and one with 30 (last two rows)."""
    rng = np.random.default_rng(seed)
    series, rates = [], rng.lognormal(np.log(4e-4), 0.25, pumps)
    for p in range(pumps):
        n = 2 if p == pumps - 2 else (30 if p == pumps - 1 else 10)
        x = np.cumsum(rng.uniform(200, 400, n))
        series.append((x, 1.5 + rates[p] * x + rng.normal(0, 0.1, n)))
    x_now = [s[0][-1] + 100 for s in series]
    return TrendBatch.pack(series, [6.0] * pumps, [RISING] * pumps, [0] * pumps, x_now), rates


def test_two_reading_pump_gets_a_finite_wider_band():
    batch, _ = _fleet()
    fit = fit_batch(batch)
    fc = forecast_batch(batch, fit, horizon_hours=100_000)
    two, ten = batch.size - 2, 0
    assert fc.outcome[two] == O_CROSSING and fit.flags[two] & B_POOLED
    # P10 and P50 within the horizon; two readings cannot rule out a slow path, so P90 may lie beyond it
    assert np.isfinite(fc.remaining[two, :2]).all()
    width = fc.remaining[:, 2] - fc.remaining[:, 0]
    widths_ten = width[: len(width) - 2]
    assert width[two] > np.median(widths_ten)
    assert fit.prior_weight[two] > 0.5 > fit.prior_weight[ten]
    # without the fleet the same two readings are too few
    alone = fit_batch(batch, FitOptions(pool=False))
    assert forecast_batch(batch, alone).outcome[two] == O_TOO_FEW


def test_many_reading_pump_is_dominated_by_its_own_data():
    batch, _ = _fleet()
    pooled = fit_batch(batch)
    own = fit_batch(batch, FitOptions(pool=False))
    many = batch.size - 1
    assert pooled.prior_weight[many] < 0.1
    assert not pooled.flags[many] & B_POOLED
    assert pooled.b[many] == pytest.approx(own.b[many], rel=0.05)
    # a fleet outlier in wear rate keeps most of its own rate when it has 30 readings
    batch.y[many] = 1.5 + 3 * 4e-4 * batch.x[many]
    far = fit_batch(batch)
    assert far.b[many] == pytest.approx(3 * 4e-4, rel=0.1)
