"""Robust wear-path fits for a whole batch of series at once.

Per series: detect a step change (breakage) and keep only the readings after it;
drop a single wild reading (externally studentized residual, Bonferroni test; Cook and
Weisberg, Residuals and Influence in Regression, 1982); fit a linear and an
exponential (log-linear) path and choose by AICc on the scale of the readings (the
log fit's likelihood carries the Jacobian -sum(log y)); then shrink the slope toward
the pump model's fleet (``pooling``). Steps and outliers are screened on the linear
path for every row and confirmed on the log path only for the few candidate rows.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy import stats

from logbook.analysis.batch import LineStats, TrendBatch, ols_rows
from logbook.analysis.pooling import group_prior, shrink_slope

NONE, LINEAR, EXPONENTIAL = 0, 1, 2
PATH_NAMES = {NONE: "none", LINEAR: "linear", EXPONENTIAL: "exponential"}
# bit flags per row
B_OUTLIER, B_STEP, B_POOLED, B_JUMP = 1, 2, 4, 8


@dataclass
class FitOptions:
    """Tuning of the batch fit; the defaults are ours (see docstrings in this module)."""

    alpha_outlier: float = 0.01  # family-wise level of the wild-reading test
    max_drops: int = 1  # readings that may be dropped as wild per series
    min_outlier_points: int = 5
    alpha_step: float = 0.001  # family-wise level of the step test
    step_min_sigma: float = 4.0  # a step must also be this many residual sd
    min_step_side: int = 2  # readings needed on each side of a step
    min_points: int = 3  # readings for a forecast of a pump's own
    aicc_margin: float = 0.0  # the exponential path must beat linear by this much
    exponential: bool = True  # consider the exponential path at all
    pool: bool = True
    pool_min_series: int = 3
    pool_flag_weight: float = 0.2  # prior weight above which FLAG_POOLED is raised
    tau_floor_rel: float = 0.1


@dataclass
class BatchFit:
    """Chosen path and its parameters per row, on the fitted scale (log y for exponential)."""

    path: np.ndarray  # (S,) NONE / LINEAR / EXPONENTIAL
    a: np.ndarray
    b: np.ndarray
    c00: np.ndarray  # covariance of (a, b)
    c01: np.ndarray
    c11: np.ndarray
    sigma: np.ndarray  # residual sd
    dof: np.ndarray
    used: np.ndarray  # (S, N) bool
    n_used: np.ndarray
    flags: np.ndarray  # (S,) bit flags
    step_at: np.ndarray  # (S,) column of the first reading after a step, -1 for none
    prior_weight: np.ndarray  # weight of the fleet prior on the slope (0 = own data only)
    forecastable: np.ndarray  # (S,) bool: enough to forecast (own readings or a pooled prior)
    lin: "PathParams"  # both paths, for the model-averaged forecast
    exp: "PathParams"
    w_exp: np.ndarray  # (S,) Akaike weight of the exponential path (0 where it is not available)


@dataclass
class PathParams:
    """One path's (a, b), their covariance, residual variance and dof per row."""

    a: np.ndarray
    b: np.ndarray
    c00: np.ndarray
    c01: np.ndarray
    c11: np.ndarray
    sigma2: np.ndarray
    dof: np.ndarray
    prior_weight: np.ndarray
    ok: np.ndarray  # usable for a forecast

    @classmethod
    def choose(cls, mask: np.ndarray, yes: "PathParams", no: "PathParams") -> "PathParams":
        return cls(**{k: np.where(mask, getattr(yes, k), getattr(no, k)) for k in cls.__dataclass_fields__})


@lru_cache(maxsize=64)
def _crit_tables(width: int, alpha_out: float, alpha_step: float, side: int) -> tuple[np.ndarray, np.ndarray]:
    """Critical t^2 (outlier) and F (step) by number of points n = 0..width."""
    n = np.arange(width + 1, dtype=float)
    dof = np.maximum(n - 3, 1)
    with np.errstate(invalid="ignore", divide="ignore"):
        t2 = stats.t.isf(alpha_out / (2 * np.maximum(n, 1)), dof) ** 2
        cand = np.maximum(n - 2 * side + 1, 1)
        f = stats.f.isf(alpha_step / cand, 1, dof)
    return t2, f


def _outlier_scan(st: LineStats, w: np.ndarray, crit_t2: np.ndarray, min_n: int):
    """Most extreme reading per row and whether it fails the Bonferroni outlier test."""
    with np.errstate(invalid="ignore", divide="ignore"):
        h = st.dx * st.dx
        h /= np.where(st.sxx > 0, st.sxx, np.inf)[:, None]
        h += (1.0 / np.maximum(st.n, 1))[:, None]
        np.subtract(1.0, h, out=h)
        u = st.r * st.r
        u /= np.maximum(h, 1e-12)
        u *= w
        j = u.argmax(axis=1)
        umax = u[np.arange(u.shape[0]), j]
        dof = st.n - 3
        t2 = umax * dof / np.maximum(st.rss - umax, 1e-300)
        n_int = st.n.astype(int)
        found = (st.n >= min_n) & (t2 > crit_t2[n_int]) & (umax > 0)
    return found, j


def _step_scan(st: LineStats, w: np.ndarray, crit_f: np.ndarray, opt: FitOptions):
    """Best single level shift per row (Frisch-Waugh on prefix sums) and whether it is a real step."""
    s = w.shape[0]
    with np.errstate(invalid="ignore", divide="ignore"):
        cw = np.cumsum(w, axis=1)
        cr = np.cumsum(st.r, axis=1)
        cdx = np.cumsum(st.dx, axis=1)
        n = st.n[:, None]
        ede = cw - cw * cw / n
        cdx *= cdx
        cdx /= np.where(st.sxx > 0, st.sxx, np.inf)[:, None]
        ede -= cdx
        red = cr * cr
        red /= ede
        side = opt.min_step_side
        ok = (cw >= side) & (cw <= n - side) & (w > 0) & (ede > 1e-9)
        red[~ok] = 0.0
        j = red.argmax(axis=1)
        rows = np.arange(s)
        rmax = red[rows, j]
        dof1 = st.n - 3
        rss1 = np.maximum(st.rss - rmax, 1e-300)
        fstat = rmax * dof1 / rss1
        size = -cr[rows, j] / ede[rows, j]
        big = np.abs(size) > opt.step_min_sigma * np.sqrt(rss1 / np.maximum(dof1, 1))
        n_int = st.n.astype(int)
        found = (st.n >= 2 * side + 2) & (fstat > crit_f[n_int]) & big & (rmax > 0)
    return found, j + 1


def _sub(st: LineStats, rows: np.ndarray) -> LineStats:
    """The ``rows`` of a LineStats."""
    return LineStats(*(None if v is None else v[rows] for v in (st.n, st.xbar, st.ybar, st.sxx, st.a, st.b, st.rss, st.dx, st.r)))


def _confirm_log(rows, ly, x0, w, scan, *args):
    """Rerun a scan on the log scale for candidate ``rows`` (all y > 0); returns (found, column)."""
    st = ols_rows(x0[rows], ly[rows], w[rows])
    return scan(st, w[rows], *args)


def fit_batch(batch: TrendBatch, opt: FitOptions | None = None) -> BatchFit:
    """Fit every series of ``batch`` (see module docstring); pure array code, no per-series loop."""
    opt = opt or FitOptions()
    s, width = batch.x.shape
    valid = np.isfinite(batch.x) & np.isfinite(batch.y)
    w = valid.astype(float)
    x0 = np.where(valid, batch.x, 0.0)
    y0 = np.where(valid, batch.y, 0.0)
    pos = y0 > 0
    ly = np.log(np.where(pos, y0, 1.0))
    all_pos = pos.sum(axis=1) == w.sum(axis=1)
    crit_t2, crit_f = _crit_tables(width, opt.alpha_outlier, opt.alpha_step, opt.min_step_side)
    flags = np.zeros(s, dtype=np.int64)
    step_at = np.full(s, -1, dtype=np.int64)

    lin = ols_rows(x0, y0, w)

    # 1. step change: keep only the readings after it
    found, col = _step_scan(lin, w, crit_f, opt)
    cand = np.flatnonzero(found)
    if cand.size:  # not a step if it rests on one reading: drop the most extreme one and look again
        _, worst = _outlier_scan(_sub(lin, cand), w[cand], crit_t2, 0)
        w_less = w[cand].copy()
        w_less[np.arange(cand.size), worst] = 0.0
        f_rob, c_rob = _step_scan(ols_rows(x0[cand], y0[cand], w_less), w_less, crit_f, opt)
        found[cand] = f_rob & (np.abs(c_rob - col[cand]) <= 1)
    cand = np.flatnonzero(found & all_pos)
    if cand.size:  # nor if the exponential path explains it
        f_log, c_log = _confirm_log(cand, ly, x0, w, _step_scan, crit_f, opt)
        found[cand] = f_log & (np.abs(c_log - col[cand]) <= 1)
    rows = np.flatnonzero(found)
    if rows.size:
        step_at[rows] = col[rows]
        flags[rows] |= B_STEP
        w[rows] = w[rows] * (np.arange(width)[None, :] >= col[rows][:, None])
        lin.put(rows, ols_rows(x0[rows], y0[rows], w[rows]))

    # 2. wild readings: drop the worst one if it fails the test on both scales
    check = np.arange(s)
    last_col = valid.sum(axis=1) - 1
    for _ in range(opt.max_drops):
        sub = lin if check.size == s else ols_rows(x0[check], y0[check], w[check])
        found, col = _outlier_scan(sub, w[check], crit_t2, opt.min_outlier_points)
        cand = np.flatnonzero(found & all_pos[check])
        if cand.size:
            f_log, c_log = _confirm_log(check[cand], ly, x0, w, _outlier_scan, crit_t2, opt.min_outlier_points)
            found[cand] = f_log & (c_log == col[cand])
        check, col = check[found], col[found]
        if not check.size:
            break
        w[check, col] = 0.0
        flags[check] |= B_OUTLIER
        flags[check[col == last_col[check]]] |= B_JUMP
        lin.put(check, ols_rows(x0[check], y0[check], w[check]))

    # 3. linear and exponential paths, weighed by AICc on the readings' scale
    n = lin.n
    all_pos = (pos * w).sum(axis=1) == n
    lg = ols_rows(x0, ly, w, keep=False)
    k = 3.0
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        pen = 2 * k + 2 * k * (k + 1) / (n - k - 1)
        aicc_lin = n * np.log(2 * np.pi * np.maximum(lin.rss, 1e-300) / n) + n + pen
        aicc_exp = n * np.log(2 * np.pi * np.maximum(lg.rss, 1e-300) / n) + n + pen + 2 * n * lg.ybar
        both = all_pos & (n >= 5) & opt.exponential & np.isfinite(lg.b) & np.isfinite(aicc_exp) & np.isfinite(aicc_lin)
        delta = np.where(both, aicc_exp + opt.aicc_margin - aicc_lin, np.inf)
        w_exp = 1.0 / (1.0 + np.exp(np.clip(delta, -700, 700) / 2.0))  # Akaike weight of the exponential path
    path = np.where(n >= 2, np.where(w_exp > 0.5, EXPONENTIAL, LINEAR), NONE).astype(np.int8)

    # 4. parameters of each path, slope shrunk toward the model's fleet
    pooling = opt.pool and bool((batch.group >= 0).any())
    p_lin = _path_params(lin, batch.group, n >= opt.min_points, opt, pooling)
    p_exp = _path_params(lg, batch.group, (n >= opt.min_points) & all_pos, opt, pooling)
    p_exp.ok &= all_pos
    w_exp = np.where(p_exp.ok, w_exp, 0.0)
    chosen = PathParams.choose(path == EXPONENTIAL, p_exp, p_lin)
    flags[chosen.prior_weight > opt.pool_flag_weight] |= B_POOLED
    return BatchFit(
        path=path, a=chosen.a, b=chosen.b, c00=chosen.c00, c01=chosen.c01, c11=chosen.c11,
        sigma=np.sqrt(chosen.sigma2), dof=chosen.dof, used=w > 0, n_used=n.astype(np.int64), flags=flags,
        step_at=step_at, prior_weight=chosen.prior_weight, forecastable=chosen.ok & (path != NONE),
        lin=p_lin, exp=p_exp, w_exp=w_exp,
    )  # fmt: skip


def _path_params(st: LineStats, group: np.ndarray, eligible: np.ndarray, opt: FitOptions, pooling: bool):
    """(a, b) and covariance of one path per row; rows with under 2 dof borrow the group's residual variance."""
    n = st.n
    dof = np.maximum(n - 2, 0).astype(float)
    with np.errstate(invalid="ignore", divide="ignore"):
        sigma2 = np.where(dof > 0, st.rss / np.maximum(dof, 1), np.nan)
        slope_var = sigma2 / st.sxx
    a, b = st.a, st.b
    weight = np.zeros(n.shape)
    has_prior = np.zeros(n.shape, dtype=bool)
    if pooling:
        gp = group_prior(
            b, slope_var, group, eligible, st.rss, dof, min_series=opt.pool_min_series, tau_floor_rel=opt.tau_floor_rel
        )
        mu, pvar, s2g, dofg = gp.for_rows(group)
        thin = (dof < 2) & np.isfinite(s2g) & (dofg > 0) & (n >= 2)
        sigma2 = np.where(thin, s2g, sigma2)
        dof = np.where(thin, dofg, dof)
        with np.errstate(invalid="ignore", divide="ignore"):
            slope_var = np.where(thin, sigma2 / st.sxx, slope_var)
        b, slope_var, weight = shrink_slope(b, slope_var, mu, pvar)
        has_prior = np.isfinite(mu) & (n >= 2) & np.isfinite(b)
        a = st.ybar - b * st.xbar
    with np.errstate(invalid="ignore"):
        c00 = sigma2 / np.maximum(n, 1) + st.xbar * st.xbar * slope_var
        c01 = -st.xbar * slope_var
    ok = np.isfinite(b) & np.isfinite(slope_var) & np.isfinite(c00) & ((n >= opt.min_points) | has_prior)
    return PathParams(a=a, b=b, c00=c00, c01=c01, c11=slope_var, sigma2=sigma2, dof=dof, prior_weight=weight, ok=ok)
