"""Wear paths as a family of straight lines on Box-Cox scales, mixed by how well each predicts.

A path is a straight line in z = (y^lam - 1) / lam (log y at lam = 0; Box and Cox,
"An analysis of transformations", JRSS B 26, 1964) against operating hours:
- lam = 1: steady wear, a straight line;
- lam = 1/2 and 1/3: convex power laws. Laminar leakage through a clearance grows with
  the cube of the gap (Q = pi D c^3 dp / (12 mu L), Hagen-Poiseuille annulus), so a gap
  opening at a steady rate gives Q = Q0 (1 + h/tau)^3, a straight line in Q^(1/3);
- lam = 0: exponential growth (or proportional decay);
- lam < 0 (-1/2, -1, -3/2): faster than exponential, running away at a finite age, as crack growth under
  the Paris law does (da/dN = C dK^m, dK ~ sqrt(a): a^(1 - m/2) falls linearly, so
  lam = 1 - m/2; Paris and Erdogan, J. Basic Eng. 85, 1963; Lu and Meeker,
  Technometrics 35, 1993). Rising readings use lam in RISING, falling ones in FALLING.

Per path and series: the least-squares line with its posterior spread (flat prior; the
residual variance combined with the model fleet's median at PRIOR_DOF readings' worth,
so that two or three readings lying almost on a line cannot claim a tiny spread; the
fleet's slope, its median and robust spread, where a series has none of its own or one less
sure than that spread: two readings a few hundred hours apart, as after an overhaul, say
little more than their noise).

The paths are mixed per pump model's fleet (a pooling group): weights that maximize the
summed log predictive density of its series' later readings, each path's line fitted on
the readings before an origin, from the origins ORIGINS (40 to 85 % of each series; the
calibration's too; leave-future-out over a long horizon, the one a crossing forecast
extrapolates over; Buerkner, Gabry and Vehtari, J. Stat. Comput. Simul. 90, 2020), found
by stacking (Yao, Vehtari, Simpson and Gelman, "Using stacking to average Bayesian
predictive distributions", Bayesian Analysis 13, 2018), with a floor so that no
path is ever ruled out. Every series of the group takes its group's weights: one series'
own record of a few readings cannot tell the shapes apart (the near-term predictions of
a cube law, an exponential and a runaway path differ by less than the noise), and
letting it choose (Bayes' rule on the path from one-step-ahead scores, the rule before)
put the runaway paths' weight on shapes that cross the limit far later
(tests/bench/bench_calibration.py: runaway pumps before P10 54 % -> 33 %).

The crossing of the limit by the true condition is the first hour at which the mixture
puts the path past the limit: P(T <= x) = sum_k w_k P(line_k(x) past z_k(limit)), each
term a Student t probability (a line crosses a level at most once, so the event "past
the limit at x" is the event "crossed by x").
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy import special

from logbook.analysis.batch import ols_rows

RISING = (1.0, 0.5, 1.0 / 3.0, 0.0, -0.5, -1.0, -1.5)
FALLING = (1.0, 0.0, 2.0)
LAMBDAS = (2.0, 1.0, 0.5, 1.0 / 3.0, 0.0, -0.5, -1.0, -1.5)  # every path, in a fixed order
PATH_WORDS = {2.0: "falling faster", 1.0: "linear", 0.5: "square-law", 1.0 / 3.0: "cube-law",
              0.0: "exponential", -0.5: "runaway", -1.0: "runaway fast", -1.5: "runaway faster"}
PRIOR_DOF = 4.0  # readings' worth of the fleet's residual variance in each series' own
WEIGHT_FLOOR = 0.02  # share of a series' mixture spread evenly over its allowed paths
MIN_STACK_SERIES = 3  # series with a predictive record a group needs for weights of its own


def box_cox(y: np.ndarray, lam: float) -> np.ndarray:
    """(y^lam - 1) / lam, log y at lam = 0; NaN where y <= 0 (lam != 1)."""
    if lam == 1.0:
        return y - 1.0
    with np.errstate(invalid="ignore", divide="ignore"):
        pos = np.where(y > 0, y, np.nan)
        return np.log(pos) if lam == 0.0 else (np.power(pos, lam) - 1.0) / lam


def scales(y: np.ndarray, lams=LAMBDAS) -> dict[float, np.ndarray]:
    """``box_cox(y, lam)`` for every path: the readings on each path's scale, computed once for a batch
    and sliced by rows wherever its series are fitted or scored again (the same numbers)."""
    return {lam: box_cox(y, lam) for lam in lams}


def _rows_of(on_scales: dict[float, np.ndarray] | None, rows) -> dict[float, np.ndarray] | None:
    """``scales`` of some rows (or cells) only; None stays None."""
    return None if on_scales is None else {lam: v[rows] for lam, v in on_scales.items()}


def log_jacobian(y: np.ndarray, lam: float) -> np.ndarray:
    """log |dz/dy| = (lam - 1) log y: puts densities on z scales back on the reading's scale."""
    if lam == 1.0:
        return np.zeros_like(y)
    with np.errstate(invalid="ignore", divide="ignore"):
        return (lam - 1.0) * np.log(np.where(y > 0, y, np.nan))


def t_cdf(t: np.ndarray, dof: np.ndarray) -> np.ndarray:
    """Student t CDF by Wallace's normal approximation z = (8v + 1)/(8v + 3) sqrt(v ln(1 + t^2/v))
    (Wallace, Annals of Mathematical Statistics 30, 1959): absolute error under 1e-3 for v >= 3, and
    a fraction of the time of the exact incomplete beta (it runs inside every bisection here)."""
    return _TDof(dof).cdf(t)


class _TDof:
    """The degrees of freedom of ``t_cdf`` with Wallace's constants worked out once, for a bisection
    that asks the CDF of the same lines at many points."""

    def __init__(self, dof: np.ndarray):
        self.v = np.clip(dof, 1.0, 1e6)
        self.c = (8 * self.v + 1) / (8 * self.v + 3)

    def cdf(self, t: np.ndarray) -> np.ndarray:
        """The CDF at ``t``; NaN counts as 0 (probability 1/2)."""
        return self.cdf_finite(np.where(np.isnan(t), 0.0, t))

    def cdf_finite(self, t: np.ndarray) -> np.ndarray:
        """The CDF at ``t`` without NaN (infinite t give 0 and 1), computed in place on its temporaries."""
        with np.errstate(invalid="ignore", over="ignore"):
            root = t * t
            root /= self.v
            np.log1p(root, out=root)
            root *= self.v
            np.sqrt(root, out=root)
            z = np.sign(t)
            z *= self.c
            z *= root
        return special.ndtr(z, out=z)


def _sorted_groups(values: np.ndarray, ok: np.ndarray, group: np.ndarray, n_groups: int):
    """The ``ok`` values of each group (group >= 0) sorted: (sorted values, start of each group, count)."""
    sel = ok & (group >= 0)
    g, v = group[sel], values[sel]
    order = np.lexsort((v, g))
    count = np.bincount(g, minlength=n_groups)[:n_groups]
    return v[order], np.r_[0, np.cumsum(count)[:-1]].astype(np.int64), count


def _median_of_sorted(v: np.ndarray, start: np.ndarray, count: np.ndarray) -> np.ndarray:
    """Per group: the median as ``np.median`` gives it (the middle value, or the mean of the middle two)."""
    has = count > 0
    lo = np.where(has, start + (count - 1) // 2, 0)
    hi = np.where(has, start + count // 2, 0)
    if not v.size:
        return np.full(count.shape, np.nan)
    return np.where(has, np.where(count % 2 == 1, v[lo], (v[lo] + v[hi]) / 2), np.nan)


def _percentile_of_sorted(v: np.ndarray, start: np.ndarray, count: np.ndarray, q: float) -> np.ndarray:
    """Per group: ``np.percentile(values, q)`` (the default linear method, with numpy's own index and
    interpolation arithmetic, so that the numbers are the same)."""
    has = count > 0
    if not v.size:
        return np.full(count.shape, np.nan)
    quantile = np.true_divide(q, 100)
    n = count.astype(float)
    virtual = (n - 1) * quantile  # numpy's linear method
    below = np.floor(virtual)
    gamma = virtual - below
    i = np.clip(below, 0, np.maximum(n - 1, 0)).astype(np.int64)
    j = np.clip(below + 1, 0, np.maximum(n - 1, 0)).astype(np.int64)
    a, b = v[np.where(has, start + i, 0)], v[np.where(has, start + j, 0)]
    diff = b - a
    out = a + diff * gamma
    out = np.where(gamma >= 0.5, b - diff * (1 - gamma), out)
    return np.where(has, out, np.nan)


def _group_median(values: np.ndarray, ok: np.ndarray, group: np.ndarray, n_groups: int, min_count: int) -> np.ndarray:
    v, start, count = _sorted_groups(values, ok, group, n_groups)
    return np.where(count >= min_count, _median_of_sorted(v, start, count), np.nan)


def _slope_prior(b: np.ndarray, ok: np.ndarray, group: np.ndarray, n_groups: int) -> tuple[np.ndarray, np.ndarray]:
    """Per group: median slope and a robust spread (the larger of the MAD and the 10-90 % range / 2.563)."""
    v, start, count = _sorted_groups(b, ok, group, n_groups)
    enough = count >= 3
    mu = np.where(enough, _median_of_sorted(v, start, count), np.nan)
    lo, hi = _percentile_of_sorted(v, start, count, 10), _percentile_of_sorted(v, start, count, 90)
    sel = ok & (group >= 0)
    dev, d_start, d_count = _sorted_groups(np.abs(b - _per_row(mu, group)), sel, group, n_groups)
    mad = _median_of_sorted(dev, d_start, d_count)
    spread = np.maximum(np.maximum(1.4826 * mad, (hi - lo) / 2.563), 0.1 * np.abs(mu))
    squared = np.array([v**2 for v in spread.tolist()])  # C pow per group, as a scalar square is taken (an
    # array's ** 2 multiplies, which can differ in the last digit)
    return mu, np.where(enough, squared, np.nan)


def _per_row(values: np.ndarray, group: np.ndarray) -> np.ndarray:
    """A per-group value for each series (NaN outside any group)."""
    if values.size == 0:
        return np.full(group.shape, np.nan)
    return np.where(group >= 0, values[np.clip(group, 0, values.size - 1)], np.nan)


@dataclass
class PathLine:
    """One path's line per series on its z scale: z(x) ~ t_nu(z0 + b (x - xbar), sqrt(var_a + (x - xbar)^2 var_b))."""

    lam: float
    xbar: np.ndarray
    z0: np.ndarray
    b: np.ndarray
    var_a: np.ndarray
    var_b: np.ndarray
    s2: np.ndarray  # residual (reading-to-reading) variance on the z scale
    nu: np.ndarray  # degrees of freedom of s2
    ok: np.ndarray  # the path exists for the series (every used reading on its scale, a spread)

    @classmethod
    def fit(cls, x: np.ndarray, y: np.ndarray, w: np.ndarray, group: np.ndarray, n_groups: int, lam: float,
            z: np.ndarray | None = None) -> "PathLine":
        """``z``: ``box_cox(y, lam)`` when the caller has it already (the same numbers)."""
        z = box_cox(y, lam) if z is None else z
        on_scale = (np.isfinite(z) | (w <= 0)).all(axis=1)
        ww = np.where(np.isfinite(z), w, 0.0)
        st = ols_rows(np.where(ww > 0, x, 0.0), np.where(ww > 0, z, 0.0), ww, keep=False)
        own = st.n - 2
        with np.errstate(invalid="ignore", divide="ignore"):
            s2_own = np.where(own > 0, st.rss / np.maximum(own, 1), np.nan)
        s2_fleet = _per_row(_group_median(s2_own, own >= 1, group, n_groups, 2), group)
        has_fleet = np.isfinite(s2_fleet)
        nu = np.maximum(own, 0) + np.where(has_fleet, PRIOR_DOF, 0.0)
        with np.errstate(invalid="ignore", divide="ignore"):
            s2 = (np.where(own > 0, st.rss, 0.0) + np.where(has_fleet, PRIOR_DOF * s2_fleet, 0.0)) / nu
        has_slope = (st.sxx > 0) & np.isfinite(st.b)
        mu, tau2 = _slope_prior(st.b, has_slope & (st.n >= 3), group, n_groups)
        mu_r, tau2_r = _per_row(mu, group), _per_row(tau2, group)
        with np.errstate(invalid="ignore", divide="ignore"):
            own_var = s2 / st.sxx
            # a slope of its own where it is surer than the fleet's spread of slopes; else the fleet's
            use_own = has_slope & ~(own_var > tau2_r)
            b = np.where(use_own, st.b, mu_r)
            var_b = np.where(use_own, own_var, tau2_r)
            var_a = s2 / np.maximum(st.n, 1)
        ok = on_scale & (st.n >= 1) & (nu >= 1) & np.isfinite(s2) & np.isfinite(b) & np.isfinite(var_b)
        return cls(lam, st.xbar, st.ybar, b, var_a, var_b, s2, nu, ok)

    def at(self, x: np.ndarray, rows) -> tuple[np.ndarray, np.ndarray]:
        """Location and scale of the line at hours ``x`` ((R, k) for the R ``rows``)."""
        d = x - self.xbar[rows][:, None]
        loc = self.z0[rows][:, None] + self.b[rows][:, None] * d
        return loc, np.sqrt(self.var_a[rows][:, None] + d * d * self.var_b[rows][:, None])


def _prefix(values: np.ndarray) -> np.ndarray:
    """Sums over the columns before each column (exclusive prefix sums along rows)."""
    out = np.zeros_like(values)
    np.cumsum(values[:, :-1], axis=1, out=out[:, 1:])
    return out


@lru_cache(maxsize=8)
def _t_log_norm(width: int) -> np.ndarray:
    """log of the Student t density's constant, Gamma((v+1)/2) / (Gamma(v/2) sqrt(v pi)), for v = 0..width."""
    v = np.arange(width + 1, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        return special.gammaln((v + 1) / 2) - special.gammaln(v / 2) - 0.5 * np.log(v * np.pi)


def _x_sums(x: np.ndarray, used: np.ndarray):
    """Prefix sums of the hours of the used readings, shifted to each row's first (the digits stay)."""
    first = np.argmax(used, axis=1)
    xs = np.where(used, x - x[np.arange(x.shape[0]), first][:, None], 0.0)
    u = used.astype(float)
    n, sx, sxx = _prefix(u), _prefix(xs), _prefix(xs * xs)
    with np.errstate(invalid="ignore", divide="ignore"):
        cxx = sxx - sx * sx / n
        dx = xs - sx / n
    return first, xs, n, sx, cxx, dx


#: Series scored together in one_step_scores: its two dozen (series x readings) temporaries stay small
#: (the scores of a series never depend on another's, so the blocks give the same numbers).
SCORE_BLOCK = 4096


def one_step_scores(x: np.ndarray, y: np.ndarray, w: np.ndarray, lams=LAMBDAS, min_fit: int = 3,
                    block: int = SCORE_BLOCK, on_scales: dict[float, np.ndarray] | None = None):
    """(S, K) per series and path: summed log predictive density (reading scale) of each used reading
    from a line through the used readings before it (at least ``min_fit``), and how many were scored.
    Computed ``block`` series at a time (the peak memory of a block, not of the fleet); ``on_scales``:
    ``scales(y)`` when the caller has it."""
    if x.shape[0] <= block:
        return _one_step_block(x, y, w, lams, min_fit, on_scales)
    parts = [_one_step_block(x[i:i + block], y[i:i + block], w[i:i + block], lams, min_fit,
                             _rows_of(on_scales, slice(i, i + block))) for i in range(0, x.shape[0], block)]
    return np.concatenate([p[0] for p in parts]), np.concatenate([p[1] for p in parts])


def _one_step_block(x: np.ndarray, y: np.ndarray, w: np.ndarray, lams, min_fit: int,
                    on_scales: dict[float, np.ndarray] | None = None):
    log_y = np.log(np.where(y > 0, y, np.nan))
    masks = {True: (w > 0), False: (w > 0) & (y > 0)}  # the straight path takes any value, the others y > 0
    sums = {straight: _x_sums(x, m) for straight, m in masks.items()}
    norm = _t_log_norm(x.shape[1])
    rows = np.arange(x.shape[0])
    scores, counted = np.zeros((x.shape[0], len(lams))), np.zeros((x.shape[0], len(lams)), dtype=np.int64)
    for k, lam in enumerate(lams):
        used = masks[lam == 1.0]
        first, xs, n, sx, cxx, dx = sums[lam == 1.0]
        z = box_cox(y, lam) if on_scales is None else on_scales[lam]
        zs = np.where(used, z - np.nan_to_num(z[rows, first])[:, None], 0.0)
        sz, sxz, szz = _prefix(zs), _prefix(xs * zs), _prefix(zs * zs)
        with np.errstate(invalid="ignore", divide="ignore"):
            cxz, czz = sxz - sx * sz / n, szz - sz * sz / n
            b = cxz / cxx
            dof = n - 2
            s2 = (czz - b * cxz) / dof
            var = s2 * (1.0 + 1.0 / n + dx * dx / cxx)
            t2 = (zs - sz / n - b * dx) ** 2 / var
            dens = norm[np.clip(dof, 0, x.shape[1]).astype(np.int64)] - 0.5 * np.log(var) - (dof + 1) / 2 * np.log1p(t2 / dof)
            if lam != 1.0:
                dens += (lam - 1.0) * log_y  # the Jacobian back to the reading's scale
        scored = used & (n >= min_fit) & (cxx > 0) & (s2 > 0)
        good = np.isfinite(dens)
        scores[:, k] = np.where((scored & ~good).any(axis=1), -np.inf, np.where(scored & good, dens, 0.0).sum(axis=1))
        counted[:, k] = scored.sum(axis=1)
    return scores, counted


ORIGINS = (0.4, 0.55, 0.7, 0.85)  # forecast origins, as shares of each series' used readings: the path
# weights are stacked on the later readings from each, and the calibration forecasts from each
LATER_SHARE = 0.5  # the one origin of a forecast made at a calibration origin (its series already cut short)
LATER_MIN_AHEAD = 2  # later readings a series needs to be scored


def later_scores(x: np.ndarray, y: np.ndarray, w: np.ndarray, group: np.ndarray, n_groups: int, lams=LAMBDAS,
                 shares: tuple[float, ...] = ORIGINS, on_scales: dict[float, np.ndarray] | None = None,
                 ) -> tuple[np.ndarray, np.ndarray]:
    """(S, K) per series and path: summed log predictive density (reading scale) of the later readings
    of the series from each path's line fitted on its first ``share`` of used readings (at least 3)
    for each origin ``share``,
    as the forecast would have extrapolated it then: Student t, location the line, variance its path
    variance plus the reading noise; summed over the origins ``shares`` (leave-future-out from several
    origins over a long horizon, the one a crossing forecast needs: Buerkner, Gabry and Vehtari,
    J. Stat. Comput. Simul. 90, 2020); and how many were scored (a series with under 3 + LATER_MIN_AHEAD
    readings after an origin is not scored from it). ``on_scales``: ``scales(y)`` when the caller has
    it (the forecast does: every scale of the batch then in memory at once, 8 arrays of the batch's
    size, 77 MB at 10,000 pumps of 40 readings); else one scale at a time."""
    n_used = (w > 0).sum(axis=1)
    cuts = [np.maximum(np.floor(share * n_used), 3) for share in shares]
    scores, counted = np.zeros((x.shape[0], len(lams))), np.zeros((x.shape[0], len(lams)), dtype=np.int64)
    for k, cut in enumerate(cuts):  # a series short enough that two origins cut it alike is scored once
        fresh = ~np.any([cut == earlier for earlier in cuts[:k]], axis=0) if k else np.ones(x.shape[0], dtype=bool)
        more = _later_scores_from(x, y, w, group, n_groups, lams, cut, on_scales, fresh)
        scores, counted = scores + more[0], counted + more[1]
    return scores, counted


def _later_scores_from(x: np.ndarray, y: np.ndarray, w: np.ndarray, group: np.ndarray, n_groups: int, lams,
                       cut: np.ndarray, on_scales: dict[float, np.ndarray] | None,
                       scored_rows: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``later_scores`` from one origin: each series' first ``cut`` used readings, the rest scored
    (only ``scored_rows``; every series' first readings still fit the fleet's lines as before)."""
    used = w > 0
    n_used = used.sum(axis=1)
    position = np.cumsum(used, axis=1)
    train = used & (position <= cut[:, None])
    later = used & (position > cut[:, None]) & ((n_used - cut >= LATER_MIN_AHEAD) & scored_rows)[:, None]
    log_y = np.log(np.where(y > 0, y, np.nan))
    scores, counted = np.zeros((x.shape[0], len(lams))), np.zeros((x.shape[0], len(lams)), dtype=np.int64)
    for k, lam in enumerate(lams):
        z = box_cox(y, lam) if on_scales is None else on_scales[lam]
        line = PathLine.fit(x, y, train.astype(float), group, n_groups, lam, z)
        rows = np.arange(x.shape[0])
        loc, scale = line.at(x, rows)
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            var = scale * scale + line.s2[:, None]
            nu = np.clip(line.nu, 1.0, 1e6)[:, None]
            t2 = (z - loc) ** 2 / var
            dens = (special.gammaln((nu + 1) / 2) - special.gammaln(nu / 2) - 0.5 * np.log(nu * np.pi)
                    - 0.5 * np.log(var) - (nu + 1) / 2 * np.log1p(t2 / nu))  # fmt: skip
            if lam != 1.0:
                dens = dens + (lam - 1.0) * log_y
        scored = later & line.ok[:, None]
        good = np.isfinite(dens)
        scores[:, k] = np.where((scored & ~good).any(axis=1), -np.inf, np.where(scored & good, dens, 0.0).sum(axis=1))
        counted[:, k] = scored.sum(axis=1)
    return scores, counted


def _stacked(comparable: np.ndarray, group: np.ndarray, n_groups: int) -> np.ndarray:
    """(G,) whether a group has enough series with a predictive record for weights of its own."""
    sel = comparable & (group >= 0)
    return np.bincount(group[sel], minlength=max(n_groups, 1))[: max(n_groups, 1)] >= MIN_STACK_SERIES


def stacking_weights(scores: np.ndarray, comparable: np.ndarray, group: np.ndarray, n_groups: int,
                     iterations: int = 500, tol: float = 1e-7) -> np.ndarray:
    """(G, K) weights per group maximizing sum_series log sum_k w_k exp(score_k): EM for mixture weights
    (each series' predictive density under path k is exp(score_k)), every group at once; uniform for
    groups with fewer than MIN_STACK_SERIES series with a predictive record."""
    k = scores.shape[1]
    weights = np.full((max(n_groups, 1), k), 1.0 / k)
    if n_groups == 0:
        return weights
    sel = comparable & (group >= 0)
    counts = np.bincount(group[sel], minlength=n_groups)
    enough = counts >= MIN_STACK_SERIES
    sel &= enough[np.maximum(group, 0)]
    if not sel.any():
        return weights
    order = np.argsort(group[sel], kind="stable")
    g = group[sel][order]
    dens = scores[sel][order]
    dens = np.exp(dens - dens.max(axis=1, keepdims=True))  # exp(-inf) = 0: a path not allowed
    starts = np.flatnonzero(np.r_[True, g[1:] != g[:-1]])
    present = g[starts]
    for _ in range(iterations):  # each group iterates until its own weights settle
        r = dens * weights[g]
        r /= r.sum(axis=1, keepdims=True)
        new = np.add.reduceat(r, starts, axis=0) / counts[present][:, None]
        active = np.abs(new - weights[present]).max(axis=1) >= tol  # a group's result never depends on the others
        weights[present] = new
        if not active.all():  # the settled groups' series leave the iteration
            if not active.any():
                break
            rows = np.repeat(active, np.diff(np.r_[starts, g.size]))
            dens, g, present = dens[rows], g[rows], present[active]
            starts = np.flatnonzero(np.r_[True, g[1:] != g[:-1]])
    return weights


def series_weights(scores: np.ndarray, allowed: np.ndarray, group_weights: np.ndarray, group: np.ndarray) -> np.ndarray:
    """(S, K): the group's weights updated by the series' own predictive record, floored, on allowed paths."""
    prior = np.where(allowed, group_weights[np.maximum(group, 0)], 0.0)
    prior = np.where((group >= 0)[:, None], prior, allowed.astype(float))
    with np.errstate(divide="ignore", invalid="ignore"):
        logw = np.where(allowed & (prior > 0), np.log(prior) + np.where(np.isfinite(scores), scores, -np.inf), -np.inf)
        top = np.max(logw, axis=1, keepdims=True)
        w = np.where(np.isfinite(logw), np.exp(logw - np.where(np.isfinite(top), top, 0.0)), 0.0)
    total = w.sum(axis=1, keepdims=True)
    w = np.where(total > 0, w / np.where(total > 0, total, 1.0), prior / np.maximum(prior.sum(axis=1, keepdims=True), 1e-300))
    n_allowed = np.maximum(allowed.sum(axis=1, keepdims=True), 1)
    return np.where(allowed, (1 - WEIGHT_FLOOR) * w + WEIGHT_FLOOR / n_allowed, 0.0)


#: Series of one group that calibration forecasts at most, and whose later readings the path weights
#: are stacked on (evenly spaced among the group's series when it has more): the factors are a 90 %
#: quantile of tens of thousands of later-reading scores and the weights a handful of shares, as
#: steady from 500 series as from 5,000, and the work grows with the series scored.
CALIBRATION_SERIES = 500


def calibration_rows(group: np.ndarray, most: int = CALIBRATION_SERIES) -> np.ndarray:
    """The series calibration forecasts: those of a group (series without one are never calibrated),
    all of a group of up to ``most``, else ``most`` of them evenly spaced in the batch's order."""
    grouped = np.flatnonzero(group >= 0)
    order = grouped[np.argsort(group[grouped], kind="stable")]  # by group, the batch's order within
    keys = group[order]
    starts = np.flatnonzero(np.r_[True, keys[1:] != keys[:-1]]) if keys.size else np.zeros(0, dtype=np.int64)
    sizes = np.diff(np.r_[starts, keys.size])
    picked = [order[a:a + n] if n <= most else order[a + np.unique(np.round(np.linspace(0, n - 1, most)).astype(np.int64))]
              for a, n in zip(starts, sizes)]
    return np.sort(np.concatenate(picked)) if picked else np.zeros(0, dtype=np.int64)


class _Crossing:
    """``PathMixture.crossed_by`` for fixed ``rows``, each path's coefficients picked out once (a
    bisection asks it at many hours): per path with weight, P(line past its limit), spread toward
    faster wear by the fast factor and toward slower by the slow one, Student t of the line's
    degrees of freedom (``t_cdf``; infinite t give 0 and 1)."""

    def __init__(self, mix: "PathMixture", rows: np.ndarray):
        sign = mix.sign[rows][:, None]
        self.fast, self.slow = mix.spread[0][rows][:, None], mix.spread[1][rows][:, None]
        self.noise = mix.noise
        self.parts = []
        for k, line in enumerate(mix.lines):
            wk = mix.weights[rows, k][:, None]
            if not wk.any():
                continue
            self.parts.append((wk, line.xbar[rows][:, None], line.z0[rows][:, None], line.b[rows][:, None],
                               line.var_a[rows][:, None], line.var_b[rows][:, None], mix.limit_z[rows, k][:, None],
                               line.s2[rows][:, None], _TDof(line.nu[rows][:, None]), sign))

    def __call__(self, x: np.ndarray) -> np.ndarray:
        out = np.zeros(np.shape(x))
        for wk, xbar, z0, b, var_a, var_b, limit_z, s2, nu, sign in self.parts:
            d = x - xbar
            loc = z0 + b * d
            scale = np.sqrt(var_a + d * d * var_b)
            gap = sign * (loc - limit_z)  # < 0: the line is short of the limit
            scale = scale * np.where(gap < 0, self.fast, self.slow)
            if self.noise:
                scale = np.sqrt(scale * scale + s2)
            with np.errstate(invalid="ignore", divide="ignore"):
                t = gap / scale
            out += np.where(wk > 0, wk * nu.cdf_finite(np.nan_to_num(t, nan=-np.inf, posinf=np.inf, neginf=-np.inf)), 0.0)
        return out


class PathMixture:
    """The mixture of paths per series, and the crossing distribution of the true condition."""

    def __init__(self, x: np.ndarray, y: np.ndarray, w: np.ndarray, limit: np.ndarray, direction: np.ndarray,
                 group: np.ndarray, spread: tuple[np.ndarray, np.ndarray] | None = None, noise: bool = False,
                 lambdas: tuple[float, ...] = LAMBDAS, scoring: str = "later", own_update: bool = False,
                 on_scales: dict[float, np.ndarray] | None = None, stack_shares: tuple[float, ...] = ORIGINS):
        """``scoring``: "later" (the default: each series' later readings predicted from its earlier ones, see
        ``later_scores``) or "one_step" (``one_step_scores``, the rule before; for comparison);
        ``own_update``: whether a series' own scores update its group's weights (off by default);
        ``on_scales``: ``scales`` of the readings (NaN read as 1.0, as here) when the caller has them;
        ``stack_shares``: the origins the path weights are stacked from (``later_scores``)."""
        s = x.shape[0]
        n_groups = int(group.max(initial=-1)) + 1
        x, y = np.nan_to_num(x), np.nan_to_num(y, nan=1.0)
        self.sign = np.where(direction < 0, -1.0, 1.0)
        on_scales = scales(y) if on_scales is None else on_scales
        self.lines = [PathLine.fit(x, y, w, group, n_groups, lam, on_scales[lam]) for lam in LAMBDAS]
        family = np.array([[lam in (RISING if d > 0 else FALLING) and lam in lambdas for lam in LAMBDAS] for d in (1, -1)])
        allowed = family[np.where(self.sign > 0, 0, 1)] & np.stack([p.ok for p in self.lines], axis=1)
        if scoring == "later":  # group weights from at most CALIBRATION_SERIES series of a group, each
            # ungrouped series its own: the scores of the others are used by no one (own_update aside)
            scored = np.arange(s) if own_update else np.union1d(calibration_rows(group), np.flatnonzero(group < 0))
            raw_scores, raw_counted = np.full((s, len(LAMBDAS)), -np.inf), np.zeros((s, len(LAMBDAS)), dtype=np.int64)
            if scored.size == s:
                raw_scores, raw_counted = later_scores(x, y, w, group, n_groups, shares=stack_shares, on_scales=on_scales)
            elif scored.size:
                raw_scores[scored], raw_counted[scored] = later_scores(
                    x[scored], y[scored], w[scored], group[scored], n_groups, shares=stack_shares,
                    on_scales=_rows_of(on_scales, scored))
        else:
            raw_scores, raw_counted = one_step_scores(x, y, w, on_scales=on_scales)
        scores = np.where(allowed, raw_scores, -np.inf)
        counted = np.where(allowed, raw_counted, 0)
        top = counted.max(axis=1)
        comparable = (top > 0) & (np.where(allowed, counted, top[:, None]) == top[:, None]).all(axis=1)
        comparable &= np.isfinite(np.where(allowed, scores, 0.0)).all(axis=1)
        group_w, has_w = stacking_weights(scores, comparable, group, n_groups), _stacked(comparable, group, n_groups)
        if scoring == "later":  # groups without later halves to score (short series) stack one-step-ahead
            # scored only where used: the series of groups without weights, and any whose own record counts
            need = np.ones(s, dtype=bool) if own_update else ~has_w[np.maximum(group, 0)] | (group < 0)
            one_s, one_c = np.full((s, len(LAMBDAS)), -np.inf), np.zeros((s, len(LAMBDAS)), dtype=np.int64)
            if need.any():
                one_s[need], one_c[need] = one_step_scores(x[need], y[need], w[need], on_scales=_rows_of(on_scales, need))
            one_s, one_c = np.where(allowed, one_s, -np.inf), np.where(allowed, one_c, 0)
            top1 = one_c.max(axis=1)
            comp1 = (top1 > 0) & (np.where(allowed, one_c, top1[:, None]) == top1[:, None]).all(axis=1)
            comp1 &= np.isfinite(np.where(allowed, one_s, 0.0)).all(axis=1)
            if need.any():
                group_w = np.where(has_w[:, None], group_w, stacking_weights(one_s, comp1, group, n_groups))
            has_w |= _stacked(comp1, group, n_groups)
            scores, comparable = one_s, comp1  # a series' own record, where its group has no weights
        alone = ~has_w[np.maximum(group, 0)] | (group < 0)  # no group weights: the series' own record decides
        own = np.where((comparable & (alone | own_update))[:, None], scores, 0.0)
        self.weights = series_weights(own, allowed, group_w, group)
        self.limit_z = np.stack([box_cox(limit, lam) for lam in LAMBDAS], axis=1)
        self.ok = allowed.any(axis=1) & np.isfinite(limit)
        self.spread = spread if spread is not None else (np.ones(s), np.ones(s))
        self.noise = noise  # add the reading-to-reading noise: the crossing of one future reading
        self.size = s

    def dominant(self) -> np.ndarray:
        """Index into LAMBDAS of each series' heaviest path."""
        return np.argmax(self.weights, axis=1)

    def crossed_by(self, x: np.ndarray, rows: np.ndarray) -> np.ndarray:
        """P(the true condition is past the limit at hours ``x``) for ``rows`` (x shaped (R, k))."""
        return _Crossing(self, rows)(x)

    def crossing_hours(self, x_now: np.ndarray, quantiles, horizon: float, iterations: int = 28) -> np.ndarray:
        """(S, Q) hours since the segment start at which P(crossed) reaches each quantile: x_now when it
        already does, inf when not within ``horizon`` hours; NaN for series without a path."""
        rows = np.flatnonzero(self.ok)
        q = np.asarray(quantiles, dtype=float)[None, :]
        now = np.repeat(np.maximum(x_now[rows], 0.0)[:, None], q.shape[1], axis=1)
        crossed_by = _Crossing(self, rows)
        at_now, at_end = crossed_by(now), crossed_by(now + horizon)
        # only rows with a quantile reached inside the horizon and not yet are searched (each row on its own)
        open_rows = ((at_now < q) & (at_end >= q)).any(axis=1)
        ahead = np.zeros_like(now)
        if open_rows.any():
            crossed_by, start = _Crossing(self, rows[open_rows]), now[open_rows]
            lo, hi = np.zeros_like(start), np.full_like(start, np.log1p(horizon))
            for _ in range(iterations):  # bisection on log(1 + hours ahead)
                mid = 0.5 * (lo + hi)
                up = crossed_by(start + np.expm1(mid)) >= q
                hi, lo = np.where(up, mid, hi), np.where(up, lo, mid)
            ahead[open_rows] = np.expm1(0.5 * (lo + hi))
        ahead = np.where(at_now >= q, 0.0, ahead)
        ahead = np.where(at_end < q, np.inf, ahead)
        out = np.full((self.size, q.shape[1]), np.nan)
        out[rows] = now + ahead
        return out

    def value_bands(self, x: np.ndarray, rows: np.ndarray, quantiles=(0.1, 0.5, 0.9), iterations: int = 40) -> np.ndarray:
        """(R, k, Q) quantiles of the true condition's value at hours ``x`` ((R, k)), on the reading's scale:
        what a chart draws as the mixture's path and band."""
        lo_y = np.full(np.shape(x), 1e-9)
        hi_y = np.full(np.shape(x), 1.0)
        while True:  # an upper bracket per point: the value below which the mixture puts almost everything
            need = (self._value_cdf(hi_y, x, rows) < 0.999) & (hi_y <= 1e9)  # each point on its own: rows batch
            if not need.any():
                break
            hi_y = np.where(need, hi_y * 4.0, hi_y)
        out = np.empty(np.shape(x) + (len(quantiles),))
        for j, qq in enumerate(quantiles):
            lo, hi = np.log(lo_y), np.log(hi_y)
            for _ in range(iterations):
                mid = 0.5 * (lo + hi)
                up = self._value_cdf(np.exp(mid), x, rows) >= qq
                hi, lo = np.where(up, mid, hi), np.where(up, lo, mid)
            out[..., j] = np.exp(0.5 * (lo + hi))
        return out

    def _value_cdf(self, value: np.ndarray, x: np.ndarray, rows: np.ndarray) -> np.ndarray:
        out = np.zeros(np.shape(x))
        for k, line in enumerate(self.lines):
            wk = self.weights[rows, k][:, None]
            if not wk.any():
                continue
            loc, scale = line.at(x, rows)
            with np.errstate(invalid="ignore", divide="ignore"):
                gap = box_cox(value, line.lam) - loc
                toward = self.sign[rows][:, None] * gap > 0  # the side of faster wear: the fast spread factor
                scale = scale * np.where(toward, self.spread[0][rows][:, None], self.spread[1][rows][:, None])
                t = gap / scale
            out += np.where(wk > 0, wk * t_cdf(np.nan_to_num(t), line.nu[rows][:, None]), 0.0)
        return out

    def band_of(self, row: int, x: np.ndarray, coverage: float = 0.8) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """(lower, median, upper) of the true condition of one series at hours ``x``: the chart's band."""
        xs = np.atleast_1d(np.asarray(x, dtype=float))[None, :]
        q = (0.5 - coverage / 2, 0.5, 0.5 + coverage / 2)
        got = self.value_bands(xs, np.array([row]), quantiles=q)[0]
        return got[:, 0], got[:, 1], got[:, 2]


# ------------------------------------------------------------------ calibration on the fleet's own later readings

GROUP_BLOCK = 4096  # series calibrated together: whole groups (a group's series share their fleet's paths)
MIN_SCORES = 30  # later readings a group needs before its bands are calibrated
SPREAD_RANGE = (0.2, 50.0)


@dataclass
class Calibration:
    """Spread factors per series for the path uncertainty toward faster wear and toward slower wear,
    and how many later readings of its group (its own left out) they rest on (0: uncalibrated, factor 1)."""

    fast: np.ndarray
    slow: np.ndarray
    n_scores: np.ndarray

    @classmethod
    def none(cls, size: int) -> "Calibration":
        return cls(np.ones(size), np.ones(size), np.zeros(size, dtype=np.int64))


class _LaterReadings:
    """The later readings of one calibration origin, as each path of the mixture predicts them."""

    def __init__(self, mix: PathMixture, rows: np.ndarray, x: np.ndarray, y: np.ndarray,
                 on_scales: dict[float, np.ndarray] | None = None):
        """``on_scales``: ``scales(y)`` of these readings when the caller has them."""
        self.mix, self.rows, self.x, self.y, self.on_scales = mix, rows, x, y, on_scales
        self.worn_sign = mix.sign[rows]
        self.parts = []  # per path with weight: (weight, z - location, path variance, noise variance, dof)
        for k, line in enumerate(mix.lines):
            wk = mix.weights[rows, k]
            if not wk.any():
                continue
            d = x - line.xbar[rows]
            with np.errstate(invalid="ignore"):
                z = box_cox(y, line.lam) if on_scales is None else on_scales[line.lam]
                gap = z - line.z0[rows] - line.b[rows] * d
            self.parts.append((wk, np.nan_to_num(gap), line.var_a[rows] + d * d * line.var_b[rows], line.s2[rows],
                               _TDof(line.nu[rows])))

    def take(self, cells: np.ndarray) -> "_LaterReadings":
        """The same predictions for ``cells`` (indices) only."""
        return _LaterReadings(self.mix, self.rows[cells], self.x[cells], self.y[cells], _rows_of(self.on_scales, cells))

    def cdf(self, factor: np.ndarray) -> np.ndarray:
        """P(a new reading <= the one observed) with the path spread times ``factor``, plus the noise: per
        path the Student t of the line's degrees of freedom, as the forecast itself spreads it
        (``PathMixture.crossed_by``, ``t_cdf``), so the factors fitted here mean the same there."""
        out = np.zeros(self.worn_sign.size)
        f2 = factor * factor
        for wk, gap, var_path, s2, nu in self.parts:
            with np.errstate(invalid="ignore", divide="ignore"):
                t = f2 * var_path
                t += s2
                np.sqrt(t, out=t)
                np.divide(gap, t, out=t)
                out += wk * nu.cdf_finite(np.nan_to_num(t, copy=False))
        return out


def _required_spread(later: _LaterReadings, tail: float, iterations: int = 16) -> tuple[np.ndarray, np.ndarray]:
    """Per later reading: whether it lies toward wear of the mixture's median, and the smallest spread
    factor that puts it inside the central band of the mixture's predictive (its conformity score)."""
    sign = later.worn_sign
    p = later.cdf(np.ones(sign.size))
    worn = np.where(sign > 0, p > 0.5, p < 0.5)

    def inside(cells: _LaterReadings, worn_cells: np.ndarray, log_factor: np.ndarray) -> np.ndarray:
        q = cells.cdf(np.exp(log_factor))
        less_worn = np.where(cells.worn_sign > 0, q, 1 - q)  # P(a reading less worn than this one)
        return np.where(worn_cells, less_worn <= 1 - tail, less_worn >= tail)

    # readings inside at the smallest factor score it; only the others are bisected (each on its own)
    score = np.full(sign.size, SPREAD_RANGE[0])
    rest = np.flatnonzero(~inside(later, worn, np.full(sign.size, np.log(SPREAD_RANGE[0]))))
    cells, worn_cells = later.take(rest), worn[rest]
    lo, hi = np.full(rest.size, np.log(SPREAD_RANGE[0])), np.full(rest.size, np.log(SPREAD_RANGE[1]))
    for _ in range(iterations):
        mid = 0.5 * (lo + hi)
        ok = inside(cells, worn_cells, mid)
        hi, lo = np.where(ok, mid, hi), np.where(ok, lo, mid)
    score[rest] = np.exp(hi)
    return worn, score


def _leave_out_quantile(scores: np.ndarray, owner: np.ndarray, rows: np.ndarray, level: float) -> tuple[np.ndarray, np.ndarray]:
    """For each of ``rows``: the split-conformal quantile, the ceil((n + 1) level)-th smallest of the n
    scores of everyone else (Vovk, Gammerman and Shafer, Algorithmic Learning in a Random World, 2005;
    Lei et al., JASA 113, 2018), and n. Among the sorted scores, the k-th smallest that is not the
    row's own lies at the first index j >= k - 1 where j + 1 - (own scores up to j) reaches k."""
    order = np.argsort(scores, kind="stable")
    ranked = scores[order]
    position = np.empty(order.size, dtype=np.int64)
    position[order] = np.arange(order.size)
    by_owner = np.lexsort((position, owner))
    owners_sorted, positions_sorted = owner[by_owner], position[by_owner]
    starts = np.searchsorted(owners_sorted, rows, side="left")
    ends = np.searchsorted(owners_sorted, rows, side="right")
    out, counts = np.ones(rows.size), np.zeros(rows.size, dtype=np.int64)
    k_all = int(np.ceil((ranked.size + 1) * level))  # rows without scores of their own: everyone's quantile
    if ranked.size >= MIN_SCORES and k_all <= ranked.size:
        bare = starts == ends
        out[bare], counts[bare] = ranked[k_all - 1], ranked.size
    for i in np.flatnonzero(starts < ends):
        own = positions_sorted[starts[i]:ends[i]]
        n = ranked.size - own.size
        k = int(np.ceil((n + 1) * level))
        if n < MIN_SCORES or k > n:
            continue
        candidates = k - 1 + np.arange(own.size + 1)
        reached = candidates + 1 - np.searchsorted(own, candidates, side="right") >= k
        out[i], counts[i] = ranked[candidates[np.argmax(reached)]], n
    return out, counts


def _group_blocks(rows: np.ndarray, group: np.ndarray, block: int):
    """``rows`` in blocks of whole groups (a series without a group alone counts as one), each block
    at most ``block`` series unless one group is larger: the mixture never looks across groups."""
    if rows.size <= block:
        if rows.size:
            yield rows
        return
    key = np.where(group[rows] >= 0, group[rows], -1 - rows)  # ungrouped series: a group of their own
    order = np.argsort(key, kind="stable")
    keys = key[order]
    starts = np.flatnonzero(np.r_[True, keys[1:] != keys[:-1]])
    ends = np.r_[starts[1:], keys.size]
    taken = 0
    for a, b in zip(starts, ends):
        if b - taken > block and a > taken:  # this group would overflow the block: close it before
            yield np.sort(rows[order[taken:a]])
            taken = int(a)
    if taken < keys.size:
        yield np.sort(rows[order[taken:]])


def calibrate(x: np.ndarray, y: np.ndarray, w: np.ndarray, limit: np.ndarray, direction: np.ndarray,
              group: np.ndarray, tail: float = 0.1, lambdas: tuple[float, ...] = LAMBDAS,
              block: int = GROUP_BLOCK, most: int = CALIBRATION_SERIES,
              on_scales: dict[float, np.ndarray] | None = None) -> Calibration:
    """Spread factors from forecasts of each series made at earlier origins of its own readings and
    scored on its later ones, per group, each side apart, the series itself left out; on at most
    ``most`` series of each group (``calibration_rows``). The mixtures of an origin are fitted
    ``block`` series at a time, whole groups each (the same numbers, a smaller peak of memory).
    ``on_scales``: ``scales`` of the readings (NaN read as 1.0) when the caller has them: every origin
    slices them."""
    x, y = np.nan_to_num(x), np.nan_to_num(y, nan=1.0)
    on_scales = scales(y) if on_scales is None else on_scales
    chosen = np.zeros(x.shape[0], dtype=bool)
    chosen[calibration_rows(group, most)] = True
    used = w > 0
    n_used = used.sum(axis=1)
    position = np.cumsum(used, axis=1)
    cells = []  # (row, worn side, score)
    for share in ORIGINS:
        cut = np.maximum(np.floor(share * n_used), 3)
        train = used & (position <= cut[:, None])
        later = used & (position > cut[:, None])
        for rows in _group_blocks(np.flatnonzero(chosen & later.any(axis=1) & (cut < n_used)), group, block):
            block_scales = _rows_of(on_scales, rows)
            # a forecast made at this origin, its weights stacked on its own later half only: its series
            # are already cut to a share of their readings (and one origin costs a quarter of four)
            mix = PathMixture(x[rows], y[rows], train[rows].astype(float), limit[rows], direction[rows], group[rows],
                              lambdas=lambdas, on_scales=block_scales, stack_shares=(LATER_SHARE,))
            r_local, cols = np.nonzero(later[rows] & mix.ok[:, None])
            if not r_local.size:
                continue
            readings = _LaterReadings(mix, r_local, x[rows][r_local, cols], y[rows][r_local, cols],
                                      _rows_of(block_scales, (r_local, cols)))
            worn, score = _required_spread(readings, tail)
            cells.append((rows[r_local], worn, score))
    cal = Calibration.none(x.shape[0])
    if not cells:
        return cal
    owner = np.concatenate([c[0] for c in cells])
    worn = np.concatenate([c[1] for c in cells])
    score = np.concatenate([c[2] for c in cells])
    for g in np.unique(group[group >= 0]):
        members = np.flatnonzero(group == g)
        in_group = group[owner] == g
        for side, is_worn in (("fast", True), ("slow", False)):
            side_score = np.where(worn[in_group] == is_worn, score[in_group], SPREAD_RANGE[0])
            factor, n = _leave_out_quantile(side_score, owner[in_group], members, 1 - tail)
            getattr(cal, side)[members] = factor
            cal.n_scores[members] = n
    return cal
