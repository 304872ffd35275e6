"""The backtest's computations against outside references: the PIT of a later reading against
scipy.stats (the classical least-squares prediction distribution of a new observation), the
Kaplan-Meier tail against lifelines, the split-conformal quantile rule of Lei et al. (2018),
origin dates against dateutil, and the later readings against a plain count on the demo fleet."""

from __future__ import annotations

import math
from datetime import date

import numpy as np
import pytest
from scipy import stats

from logbook.analysis import backtest as bt
from logbook.analysis import paths


def _one_series(x, y, lambdas, direction=1):
    """A mixture of one series on its own (no fleet group): each path is the plain least-squares line."""
    x, y = np.asarray([x], dtype=float), np.asarray([y], dtype=float)
    return paths.PathMixture(x, y, np.ones_like(x), np.array([100.0]), np.array([direction]), np.array([-1]),
                             lambdas=lambdas)


def _prediction_t(x, z, x_new):
    """Location and scale of the predictive t (n - 2 dof) of a new observation at x_new from the
    least-squares line (Draper and Smith, Applied Regression Analysis, 3rd ed., section 3.1), slope
    and intercept from scipy.stats.linregress."""
    fit = stats.linregress(x, z)
    n = len(x)
    resid = np.asarray(z) - (fit.intercept + fit.slope * np.asarray(x))
    s = math.sqrt(np.sum(resid**2) / (n - 2))
    sxx = np.sum((np.asarray(x) - np.mean(x)) ** 2)
    scale = s * np.sqrt(1 + 1 / n + (x_new - np.mean(x)) ** 2 / sxx)
    return fit.intercept + fit.slope * x_new, scale, n - 2


X = [100.0, 400.0, 900.0, 1500.0, 2100.0, 2800.0, 3300.0]
Y = [2.1, 2.3, 2.2, 2.6, 2.9, 2.8, 3.2]


def test_pit_of_a_straight_path_is_the_student_t_prediction_cdf():
    mix = _one_series(X, Y, lambdas=(1.0,))
    x_new = np.array([3600.0, 4200.0, 5000.0, 5000.0])
    y_new = np.array([3.3, 2.9, 4.1, 3.4])
    loc, scale, dof = _prediction_t(X, Y, x_new)
    expected = stats.t.cdf(y_new, df=dof, loc=loc, scale=scale)
    got = bt.reading_cdf(mix, np.zeros(4, dtype=int), x_new, y_new)
    assert got == pytest.approx(expected, abs=1e-9)


def test_pit_of_an_exponential_path_is_the_t_cdf_of_the_log():
    y = np.exp(np.array([0.2, 0.35, 0.4, 0.6, 0.75, 0.8, 1.0]))
    mix = _one_series(X, y, lambdas=(0.0,))
    x_new = np.array([3600.0, 4500.0])
    y_new = np.array([2.9, 3.6])
    loc, scale, dof = _prediction_t(X, np.log(y), x_new)
    expected = stats.t.cdf(np.log(y_new), df=dof, loc=loc, scale=scale)  # log is increasing: P(Y <= y) = P(log Y <= log y)
    assert bt.reading_cdf(mix, np.zeros(2, dtype=int), x_new, y_new) == pytest.approx(expected, abs=1e-9)
    assert bt.reading_cdf(mix, np.zeros(1, dtype=int), np.array([3600.0]), np.array([-1.0]))[0] == 0.0  # below any positive value


def test_spread_factors_widen_each_side_apart():
    mix = _one_series(X, Y, lambdas=(1.0,))
    mix.spread = (np.array([2.0]), np.array([0.5]))  # toward wear (rising) twice, the other side half
    line = mix.lines[paths.LAMBDAS.index(1.0)]
    x_new = 4000.0
    loc = line.z0[0] + line.b[0] * (x_new - line.xbar[0])
    path_var = line.var_a[0] + (x_new - line.xbar[0]) ** 2 * line.var_b[0]
    for y, f in ((3.6, 2.0), (2.8, 0.5)):  # y - 1 on the z scale of lam = 1
        z = y - 1.0
        expected = stats.t.cdf(z, df=line.nu[0], loc=loc, scale=math.sqrt(f * f * path_var + line.s2[0]))
        assert bt.reading_cdf(mix, np.array([0]), np.array([x_new]), np.array([y]))[0] == pytest.approx(expected, abs=1e-9)


def test_pit_of_draws_from_the_predictive_is_uniform():
    """u = F(y) of draws from F itself is uniform on [0, 1] (Dawid 1984): Kolmogorov-Smirnov against
    scipy.stats.uniform, and the histogram close to flat."""
    mix = _one_series(X, Y, lambdas=(1.0,))
    x_new = np.full(4000, 4200.0)
    loc, scale, dof = _prediction_t(X, Y, 4200.0)
    draws = stats.t.rvs(df=dof, loc=loc, scale=scale, size=x_new.size, random_state=np.random.default_rng(7))
    u = bt.reading_cdf(mix, np.zeros(x_new.size, dtype=int), x_new, draws)
    assert stats.kstest(u, stats.uniform.cdf).pvalue > 0.01
    f = bt.figures_of(u, np.zeros(0), np.zeros(0), np.zeros(0, dtype=bool), np.zeros(0))
    assert f.below_p10 == pytest.approx(0.1, abs=0.015) and f.above_p90 == pytest.approx(0.1, abs=0.015)


def test_reading_median_is_where_the_cdf_is_one_half():
    mix = _one_series(X, Y, lambdas=(1.0,))
    loc, _, _ = _prediction_t(X, Y, np.array([4000.0]))
    med = bt.reading_median(mix, np.array([0]), np.array([4000.0]), np.array([3.0]))
    assert med[0] == pytest.approx(loc[0], rel=1e-3)  # the t is symmetric: its median is its location


def test_kaplan_meier_tail_matches_lifelines():
    lifelines = pytest.importorskip("lifelines")
    rng = np.random.default_rng(3)
    u = rng.uniform(size=300)
    censor = rng.uniform(0.2, 1.2, size=300)
    seen = u <= censor
    t = np.minimum(u, censor)
    km = lifelines.KaplanMeierFitter().fit(t, event_observed=seen)
    for at in (0.1, 0.5, 0.9):
        assert bt.kaplan_meier(t, seen, at) == pytest.approx(1.0 - float(km.survival_function_at_times(at).iloc[0]), abs=1e-12)
    assert bt.kaplan_meier(t, seen, 0.9, min_at_risk=10_000) is None


def test_split_conformal_quantile_is_the_ceil_n_plus_1_rank():
    """Lei, G'Sell, Rinaldo, Tibshirani and Wasserman, JASA 113 (2018), split conformal (their Algorithm 2):
    with n calibration scores the band's half-width is the k-th smallest, k = ceil((n + 1)(1 - alpha)).
    ``paths._leave_out_quantile`` takes it over everyone else's scores (each row's own left out)."""
    rng = np.random.default_rng(11)
    scores = rng.gamma(2.0, size=60)
    owner = np.repeat(np.arange(12), 5)  # 12 series, 5 scores each
    q, n = paths._leave_out_quantile(scores, owner, np.arange(12), 0.9)
    for row in range(12):
        others = np.sort(scores[owner != row])
        k = math.ceil((others.size + 1) * 0.9)  # 55 others: the 51st smallest
        assert n[row] == 55 and k == 51
        assert q[row] == others[k - 1]


def test_split_conformal_coverage_is_between_its_bounds():
    """Exchangeable continuous scores: coverage of the new score is >= 1 - alpha and <= 1 - alpha + 1/(n + 1)
    (Lei et al. 2018, Theorem 2.2); 4,000 trials of n = 39 others (k = 36), so within 3 standard errors."""
    rng = np.random.default_rng(5)
    trials, n = 4000, 39
    hits = 0
    for _ in range(trials):
        scores = rng.standard_normal(n + 1) ** 2
        q, counted = paths._leave_out_quantile(scores, np.arange(n + 1), np.array([n]), 0.9)
        assert counted[0] == n
        hits += scores[n] <= q[0]
    se = math.sqrt(0.9 * 0.1 / trials)
    assert 0.9 - 3 * se <= hits / trials <= 0.9 + 1 / (n + 1) + 3 * se


def test_below_the_minimum_the_factor_stays_one():
    scores = np.linspace(0.5, 3.0, paths.MIN_SCORES)  # MIN_SCORES scores, one left out: too few
    q, n = paths._leave_out_quantile(scores, np.arange(scores.size), np.array([0]), 0.9)
    assert q[0] == 1.0 and n[0] == 0


def test_origin_dates_step_months_as_dateutil_does():
    from dateutil.relativedelta import relativedelta

    first = date(2025, 1, 31)
    got = bt.origin_dates(first, date(2026, 3, 1), 1, "months")
    assert got == [first + relativedelta(months=i) for i in range(14)]  # 28 February, 31 March, 30 April...
    assert bt.origin_dates(date(2025, 1, 1), date(2025, 1, 29), 14, "days") == [date(2025, 1, 1), date(2025, 1, 15),
                                                                               date(2025, 1, 29)]


# ------------------------------------------------------------------------- on the demo fleet


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    from demo_fleet.generate import load
    from logbook.store import Store

    with Store(tmp_path_factory.mktemp("bt") / "demo.db", user="tester") as store:
        load(store, date(2026, 12, 1))
        return store.fleet()


@pytest.mark.slow
def test_later_readings_are_counted_as_a_plain_loop_counts_them(demo):
    """At one origin the backtest scores exactly the readings a plain loop finds: of each series the
    forecast gives a path to, taken after the origin and before the next event restarting the kind."""
    from logbook.analysis.fleet import forecast_fleet
    from logbook.asof import Known, fleet_as_of
    from logbook.model import ALL_KINDS, SEGMENT_RESETS

    origin = date(2025, 6, 1)
    known = Known()
    result = bt.run_backtest(demo, demo, known, [origin])
    forecast = forecast_fleet(fleet_as_of(demo, known, origin), origin)
    expected = 0
    for pf in forecast.pumps:
        for kf in pf.kinds:
            if kf.outcome.value not in ("crossing", "no_crossing"):
                continue
            ends = [e.happened_on for e in demo.events if e.serial == pf.serial and e.happened_on > origin
                    and kf.kind in SEGMENT_RESETS.get(e.kind, ())]
            end = min(ends, default=date.max)
            expected += sum(1 for r in demo.readings if r.serial == pf.serial and origin < r.taken_on < end
                            and r.value(kf.kind) is not None)
    assert result.overall.readings == expected > 500
    assert sum(f.readings for f in result.groups["model"].values()) == expected
    assert sum(result.overall.pit) == expected
    assert ALL_KINDS  # every kind was looked at above


@pytest.mark.slow
def test_origins_forecast_together_equal_each_forecast_alone(demo):
    """``forecast_together`` stacks several origins' batches into one engine call, each one's pooling
    groups kept apart: every figure equals the figure of that batch forecast on its own."""
    from logbook.analysis.fit import fit_batch
    from logbook.analysis.fleet import pack_fleet
    from logbook.analysis.forecast import forecast_batch
    from logbook.asof import Known, fleet_as_of

    days = [date(2024, 9, 1), date(2025, 5, 1), date(2026, 3, 1)]
    batches = [pack_fleet(fleet_as_of(demo, Known(), d), d).pack.batch for d in days]
    assert len({b.x.shape[1] for b in batches}) > 1  # different widths: the stacked batch pads
    for batch, (fit2, fc2) in zip(batches, bt.forecast_together(batches)):
        fit = fit_batch(batch)
        fc = forecast_batch(batch, fit)
        assert np.array_equal(fit.weights, fit2.weights) and np.array_equal(fit.n_used, fit2.n_used)
        assert np.array_equal(fc.outcome, fc2.outcome) and np.array_equal(fc.calibrated_on, fc2.calibrated_on)
        assert np.array_equal(np.isfinite(fc.remaining), np.isfinite(fc2.remaining))
        finite = np.isfinite(fc.remaining)
        assert fc2.remaining[finite] == pytest.approx(fc.remaining[finite], rel=1e-6)
        assert fc2.mixture.weights == pytest.approx(fc.mixture.weights, abs=1e-9)
        assert fc2.mixture.spread[0] == pytest.approx(fc.mixture.spread[0]) and fc2.mixture.size == batch.x.shape[0]


@pytest.mark.slow
def test_a_model_with_too_few_later_readings_is_said_to_be_uncalibrated(demo):
    """Below paths.MIN_SCORES later readings the bands are the paths' own, and the forecast says so."""
    from dataclasses import replace

    from logbook.analysis.fleet import forecast_fleet

    one = sorted(s for s, p in demo.pumps.items() if p.model == "TQ-250")[:1]  # its own later readings are left out
    small = forecast_fleet(replace(demo, pumps={s: demo.pumps[s] for s in one}), date(2026, 12, 1))
    assert all(kf.calibrated_on == 0 for pf in small.pumps for kf in pf.kinds)
    (line,) = bt.calibration_notes(small)
    assert line.startswith("TQ-250 bands uncalibrated for case drain") and f"fewer than {paths.MIN_SCORES}" in line
    whole = forecast_fleet(demo, date(2026, 12, 1))
    n = max(kf.calibrated_on for pf in whole.pumps if pf.model == "TQ-250" for kf in pf.kinds if kf.kind.label == "case drain")
    assert n >= paths.MIN_SCORES
    assert f"case drain {n:,}" in next(t for t in bt.calibration_notes(whole) if t.startswith("TQ-250"))
    assert bt.kind_calibration_words(0, "TQ-250").startswith("uncalibrated (fewer than")


def test_cutting_rows_back_never_cuts_a_forecasts_quantile_or_path_columns():
    """A stacked batch 3 readings wide: the fit's per-reading columns are cut to each batch's width, a
    forecast's three quantile columns (as wide by chance) are not."""
    from dataclasses import dataclass as dc

    @dc
    class Fit:
        weights: np.ndarray
        n_used: np.ndarray

    @dc
    class Forecast:
        remaining: np.ndarray

    fit = Fit(np.arange(15.0).reshape(5, 3), np.arange(5))
    fc = Forecast(np.arange(15.0).reshape(5, 3))
    cut_fit = bt._rows(fit, slice(1, 3), 5, (3, 2))
    assert cut_fit.weights.tolist() == [[3.0, 4.0], [6.0, 7.0]] and cut_fit.n_used.tolist() == [1, 2]
    assert bt._rows(fc, slice(1, 3), 5).remaining.tolist() == [[3.0, 4.0, 5.0], [6.0, 7.0, 8.0]]


@pytest.mark.slow
def test_path_weights_at_an_origin_depend_only_on_readings_on_or_before_it(demo):
    """The path weights are fitted on the fleet's own history (``paths.later_scores``: each series'
    later readings predicted from its earlier ones, stacked per model fleet). In the backtest they are fitted as
    of each origin, several origins in one engine call: changing every reading taken after an origin
    leaves that origin's weights exactly as they were, and moves the weights of a later origin that
    sees the changed readings (so the check can fail). Leave-future-out as in Buerkner, Gabry and
    Vehtari, J. Stat. Comput. Simul. 90 (2020): a forecast made at a time uses data up to it only."""
    from dataclasses import replace

    from logbook.analysis.fleet import pack_fleet
    from logbook.asof import Known, fleet_as_of

    origin, later_origin = date(2025, 6, 1), date(2026, 6, 1)

    def bent(r):  # every later reading grows faster, as if the pump wore twice as fast from the origin on
        if r.taken_on <= origin or r.case_drain_lpm is None:
            return r
        return replace(r, case_drain_lpm=r.case_drain_lpm * (1.0 + (r.taken_on - origin).days / 120))

    changed = replace(demo, readings=tuple(bent(r) for r in demo.readings))
    assert sum(a.case_drain_lpm != b.case_drain_lpm for a, b in zip(demo.readings, changed.readings)) > 200

    def weights(fleet):
        packed = [pack_fleet(fleet_as_of(fleet, Known(), d), d) for d in (origin, later_origin)]
        results = bt.forecast_together([p.pack.batch for p in packed])  # as run_backtest does: one call
        return [(p.serials, fc.mixture.weights, fc.mixture.ok) for p, (_, fc) in zip(packed, results)]

    (s0, w0, ok0), (s1, w1, ok1) = weights(demo)
    (t0, v0, _), (t1, v1, _) = weights(changed)
    assert s0 == t0 and s1 == t1 and ok0.sum() > 100
    assert np.array_equal(w0, v0)  # as of the origin: not one weight moved
    assert np.abs(w1 - v1)[ok1].max() > 0.05  # as of a later day the changed readings are seen
