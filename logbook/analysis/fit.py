"""Robust wear-path fits for a whole batch of series at once.

Per series: detect a step change (breakage: a level shift of at least 4 residual sd,
significant after Bonferroni over the split points, not resting on one reading and
not explained by the exponential path) and keep only the readings after it; drop a
single wild reading (externally studentized residual, Bonferroni test; Cook and
Weisberg, Residuals and Influence in Regression, 1982); fit a linear and an
exponential (log-linear) path and weigh them by AICc on the readings' own scale (the
log fit's likelihood carries the Jacobian -sum(log y)); then shrink each path's slope
toward the pump model's fleet (``pooling``). For a falling kind (servo pressure) the
exponential path is a proportional decay, y = exp(a + b x) with b < 0. Steps and
wild readings are screened on the linear path for every row and confirmed on the log
path only for the few candidate rows.
"""
from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy import special

from logbook.analysis.batch import LineStats, TrendBatch, _rowdot, ols_rows
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
    block_rows: int = 2048  # rows per block in the readings stage (cache-sized; results do not depend on it)


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
    weights: np.ndarray  # (S, N) 1.0 where a reading is used in the fit, 0.0 otherwise
    n_used: np.ndarray
    flags: np.ndarray  # (S,) bit flags
    step_at: np.ndarray  # (S,) column of the first reading after a step, -1 for none
    prior_weight: np.ndarray  # weight of the fleet prior on the slope (0 = own data only)
    forecastable: np.ndarray  # (S,) bool: enough to forecast (own readings or a pooled prior)
    lin: "PathParams"  # both paths, for the model-averaged forecast
    exp: "PathParams"
    w_exp: np.ndarray  # (S,) Akaike weight of the exponential path (0 where it is not available)
    n_valid: np.ndarray  # (S,) readings in the series, used or not
    latest: np.ndarray  # (S,) newest reading, even if dropped as wild (NaN without one)
    pooled: bool = True  # do the forecast's paths borrow from the pump model's fleet (FitOptions.pool)
    exponential: bool = True  # may the forecast use curved paths, or only the straight one (FitOptions.exponential)

    @property
    def used(self) -> np.ndarray:
        """(S, N) bool: readings used in the fit (False for dropped, stepped-over and padding)."""
        return self.weights > 0


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
        # upper quantiles as scipy.stats computes them: t.isf(q, v) = -stdtrit(v, q) (squared here),
        # f.isf(q, 1, v) = fdtri(1, v, 1 - q); scipy.special alone imports in a third of the time
        t2 = special.stdtrit(dof, alpha_out / (2 * np.maximum(n, 1))) ** 2
        cand = np.maximum(n - 2 * side + 1, 1)
        f = special.fdtri(1, dof, 1.0 - alpha_step / cand)
    return t2, f


def _outlier_scan(st: LineStats, crit_t2: np.ndarray, min_n: int):
    """Most extreme reading per row (largest r^2 / (1 - h)) and whether it fails the Bonferroni test."""
    with np.errstate(invalid="ignore", divide="ignore"):
        inv_sxx = np.where(st.sxx > 0, 1.0 / st.sxx, 0.0)[:, None]
        h = st.dx * st.dx
        h *= inv_sxx
        h += (1.0 / np.maximum(st.n, 1))[:, None]
        np.subtract(1.0, h, out=h)  # 1 - leverage (unused readings: r = 0, so u = 0)
        u = st.r * st.r
        u /= h
        j = u.argmax(axis=1)
        umax = u[np.arange(u.shape[0]), j]
        dof = st.n - 3
        t2 = umax * dof / np.maximum(st.rss - umax, 1e-300)
        n_int = st.n.astype(int)
        found = (st.n >= min_n) & (t2 > crit_t2[n_int]) & (umax > 0) & np.isfinite(umax)
    return found, j


def _rowsum(a: np.ndarray) -> np.ndarray:
    return np.einsum("ij->i", a)


def _step_scan(st: LineStats, w: np.ndarray, crit_f: np.ndarray, opt: FitOptions, left_aligned: bool = False):
    """Best single level shift per row (Frisch-Waugh on prefix sums) and whether it is a real step.

    Splitting after column j: the reduction in RSS is (sum of residuals up to j)^2 / e_j, with
    e_j = m - m^2/n - (sum of centred x up to j)^2 / Sxx and m the readings up to j.
    """
    s, width = w.shape
    side = opt.min_step_side
    with np.errstate(invalid="ignore", divide="ignore"):
        # (a product with a triangle of ones would be faster, but multithreaded BLAS stalls on a busy machine)
        cw = np.arange(1.0, width + 1.0)[None, :] if left_aligned else np.cumsum(w, axis=1)
        cdx = np.cumsum(st.dx, axis=1)
        red = np.cumsum(st.r, axis=1)
        inv_n = (1.0 / np.maximum(st.n, 1))[:, None]
        ede = cw * cw * inv_n
        np.subtract(cw, ede, out=ede)
        cdx *= cdx
        cdx *= np.where(st.sxx > 0, 1.0 / st.sxx, 0.0)[:, None]
        ede -= cdx
        red *= red
        red /= ede
        bad = cw > (st.n - side)[:, None]
        if not left_aligned:
            bad |= (cw < side) | (w == 0)
        np.copyto(red, 0.0, where=bad)  # also clears 0/0 at the ends
        red[:, : side - 1] = 0.0
        j = red.argmax(axis=1)
        rows = np.arange(s)
        rmax, e_j = red[rows, j], ede[rows, j]
        dof1 = st.n - 3
        rss1 = np.maximum(st.rss - rmax, 1e-300)
        fstat = rmax * dof1 / rss1
        size = np.sqrt(rmax / e_j)  # |level shift|
        big = size > opt.step_min_sigma * np.sqrt(rss1 / np.maximum(dof1, 1))
        n_int = st.n.astype(int)
        found = (st.n >= 2 * side + 2) & (fstat > crit_f[n_int]) & big & (rmax > 0) & (e_j > 1e-9)
    return found, j + 1


def _sub(st: LineStats, rows: np.ndarray) -> LineStats:
    """The ``rows`` of a LineStats."""
    return LineStats(*(None if v is None else v[rows] for v in (st.n, st.xbar, st.ybar, st.sxx, st.a, st.b, st.rss, st.dx, st.r)))


def _confirm_log(rows, ly, x0, w, scan, *args, **kwargs):
    """Rerun a scan on the log scale for candidate ``rows`` (all y > 0); returns (found, column)."""
    st = ols_rows(x0[rows], ly[rows], w[rows])
    return (scan(st, *args) if scan is _outlier_scan else scan(st, w[rows], *args, **kwargs))


def _log_line(x0, ly, lin: LineStats) -> LineStats:
    """Least-squares line of log y from raw moments (x0, ly zero where unused; x moments from ``lin``)."""
    n = lin.n
    with np.errstate(invalid="ignore", divide="ignore"):
        nn = np.maximum(n, 1)
        lbar = _rowsum(ly) / nn
        sxy = _rowdot(x0, ly) - n * lin.xbar * lbar
        syy = _rowdot(ly, ly) - n * lbar * lbar
        b = np.where(lin.sxx > 0, sxy / lin.sxx, np.nan)
        rss = np.maximum(syy - b * sxy, 0.0)
    return LineStats(n, lin.xbar, lbar, lin.sxx, lbar - b * lin.xbar, b, rss)


@dataclass
class _RowFits:
    """Per-row results of the readings stage (steps, wild readings, both lines)."""

    lin: LineStats
    lg: LineStats
    weights: np.ndarray
    flags: np.ndarray
    step_at: np.ndarray
    n_valid: np.ndarray
    all_pos: np.ndarray
    latest: np.ndarray


@dataclass
class _Block:
    """A block of rows in the readings stage: the readings (0 for padding), their logs, the weights
    and flags as the stage sets them, and the linear fit of what is still used."""

    x0: np.ndarray
    y0: np.ndarray
    ly: np.ndarray  # log y: 0 for padding; -inf / NaN where a reading is not positive
    w: np.ndarray
    all_pos: np.ndarray  # the exponential path needs every reading above 0
    flags: np.ndarray
    step_at: np.ndarray
    changed: np.ndarray
    lin: LineStats | None = None

    @classmethod
    def of(cls, x: np.ndarray, y: np.ndarray) -> "_Block":
        s = x.shape[0]
        valid = ~np.isnan(y)
        w = valid.astype(float)
        y0, x0 = np.where(valid, y, 0.0), np.where(valid, x, 0.0)
        with np.errstate(invalid="ignore", divide="ignore"):
            ly = 1.0 - w
            ly += y0
            np.log(ly, out=ly)
        block = cls(x0, y0, ly, w, np.isfinite(_rowsum(ly)), np.zeros(s, dtype=np.int64), np.full(s, -1, dtype=np.int64),
                    np.zeros(s, dtype=bool))  # fmt: skip
        block.lin = ols_rows(x0, y0, w)
        return block

    def refit(self, rows: np.ndarray) -> None:
        self.changed[rows] = True
        self.lin.put(rows, ols_rows(self.x0[rows], self.y0[rows], self.w[rows]))


def _fit_rows(x: np.ndarray, y: np.ndarray, opt: FitOptions) -> _RowFits:
    """Steps, wild readings and the two least-squares lines for a block of rows."""
    block = _Block.of(x, y)
    n_valid = _rowsum(block.w)
    crit_t2, crit_f = _crit_tables(x.shape[1], opt.alpha_outlier, opt.alpha_step, opt.min_step_side)
    _drop_before_step(block, crit_t2, crit_f, opt)
    last_col = n_valid.astype(np.int64) - 1
    _drop_wild(block, crit_t2, last_col, opt)
    lg = _both_paths(block)
    return _RowFits(block.lin, lg, block.w, block.flags, block.step_at, n_valid, block.all_pos, _latest(y, last_col))


def _drop_before_step(block: _Block, crit_t2: np.ndarray, crit_f: np.ndarray, opt: FitOptions) -> None:
    """1. A step change: keep only the readings after it."""
    lin, w, x0, y0 = block.lin, block.w, block.x0, block.y0
    found, col = _step_scan(lin, w, crit_f, opt, left_aligned=True)
    cand = np.flatnonzero(found & block.all_pos)
    if cand.size:  # not a step if the exponential path explains it
        f_log, c_log = _confirm_log(cand, block.ly, x0, w, _step_scan, crit_f, opt, left_aligned=True)  # w untouched yet
        found[cand] = f_log & (np.abs(c_log - col[cand]) <= 1)
    cand = np.flatnonzero(found)
    if cand.size:  # nor if it rests on one reading: drop the most extreme one and look again
        _, worst = _outlier_scan(_sub(lin, cand), crit_t2, 0)
        w_less = w[cand].copy()
        w_less[np.arange(cand.size), worst] = 0.0
        f_rob, c_rob = _step_scan(ols_rows(x0[cand], y0[cand], w_less), w_less, crit_f, opt)
        found[cand] = f_rob & (np.abs(c_rob - col[cand]) <= 1)
    rows = np.flatnonzero(found)
    if rows.size:
        block.step_at[rows] = col[rows]
        block.flags[rows] |= B_STEP
        w[rows] = w[rows] * (np.arange(w.shape[1])[None, :] >= col[rows][:, None])
        block.refit(rows)


def _drop_wild(block: _Block, crit_t2: np.ndarray, last_col: np.ndarray, opt: FitOptions) -> None:
    """2. Wild readings: drop the worst one if it fails the test on both scales (up to ``max_drops``)."""
    w, x0, y0 = block.w, block.x0, block.y0
    check = np.arange(len(w))
    for _ in range(opt.max_drops):
        sub = block.lin if _ == 0 else ols_rows(x0[check], y0[check], w[check])
        found, col = _outlier_scan(sub, crit_t2, opt.min_outlier_points)
        cand = np.flatnonzero(found & block.all_pos[check])
        if cand.size:
            f_log, c_log = _confirm_log(check[cand], block.ly, x0, w, _outlier_scan, crit_t2, opt.min_outlier_points)
            found[cand] = f_log & (c_log == col[cand])
        found &= ~_confirmed(sub, col, last_col[check])
        check, col = check[found], col[found]
        if not check.size:
            break
        w[check, col] = 0.0
        block.flags[check] |= B_OUTLIER
        block.flags[check[col == last_col[check]]] |= B_JUMP
        block.refit(check)


def _confirmed(st: LineStats, col: np.ndarray, last_col: np.ndarray) -> np.ndarray:
    """A far reading that the reading after it confirms is wear, not a wild reading: the candidate is
    the second newest, and the newest lies off the line on the same side by at least half as much.
    (Our rule: one reading cannot confirm itself, two in a row that agree are taken as the pump.)"""
    rows = np.arange(len(col))
    second = (col == last_col - 1) & (last_col >= 1)
    r_col = st.r[rows, col]
    r_new = st.r[rows, np.maximum(last_col, 0)]
    return second & (np.sign(r_col) == np.sign(r_new)) & (np.abs(r_new) >= 0.5 * np.abs(r_col))


def _both_paths(block: _Block) -> LineStats:
    """3. The exponential (log-linear) line beside the linear one, on the readings still used."""
    rows = np.flatnonzero(block.changed)
    if rows.size:  # zero what is no longer used, so that raw moments see only used readings
        wr = block.w[rows]
        block.x0[rows] *= wr
        with np.errstate(invalid="ignore"):  # log of a non-positive reading: that row has no log path (all_pos)
            block.ly[rows] *= wr
    lg = _log_line(block.x0, block.ly, block.lin)
    block.all_pos &= np.isfinite(lg.b)
    block.lin.dx = block.lin.r = None
    return lg


def fit_batch(batch: TrendBatch, opt: FitOptions | None = None) -> BatchFit:
    """Fit every series of ``batch`` (see module docstring); array code, no loop over series.

    Rows go through the readings stage in blocks of ``opt.block_rows`` (a loop over blocks of
    hundreds of pumps, to keep the arrays in cache), then pooling and path weights run on all
    rows at once. ``batch.x`` must be finite wherever ``batch.y`` is (``TrendBatch.pack`` sees to it).
    """
    opt = opt or FitOptions()
    s = batch.size
    step = max(int(opt.block_rows), 1)
    parts = [_fit_rows(batch.x[i : i + step], batch.y[i : i + step], opt) for i in range(0, s, step)]
    rf = parts[0] if len(parts) == 1 else _concat(parts)
    lin, lg, w, flags, step_at, n_valid, all_pos = rf.lin, rf.lg, rf.weights, rf.flags, rf.step_at, rf.n_valid, rf.all_pos
    n = lin.n
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
        sigma=np.sqrt(chosen.sigma2), dof=chosen.dof, weights=w, n_used=n.astype(np.int64), flags=flags,
        step_at=step_at, prior_weight=chosen.prior_weight, forecastable=chosen.ok & (path != NONE),
        lin=p_lin, exp=p_exp, w_exp=w_exp, n_valid=n_valid, latest=rf.latest, pooled=opt.pool,
        exponential=opt.exponential,
    )  # fmt: skip


def _concat(parts: list[_RowFits]) -> _RowFits:
    def cat_lines(name):
        lines = [getattr(p, name) for p in parts]
        return LineStats(*(np.concatenate([getattr(ln, f) for ln in lines]) for f in ("n", "xbar", "ybar", "sxx", "a", "b", "rss")))

    arrays = {f: np.concatenate([getattr(p, f) for p in parts]) for f in ("weights", "flags", "step_at", "n_valid", "all_pos", "latest")}
    return _RowFits(lin=cat_lines("lin"), lg=cat_lines("lg"), **arrays)


def _latest(y: np.ndarray, last_col: np.ndarray) -> np.ndarray:
    """Newest reading per row (readings are left-aligned in x order)."""
    got = y[np.arange(y.shape[0]), np.maximum(last_col, 0)]
    return np.where(last_col >= 0, got, np.nan)


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
    # Readings that all sit at (nearly) the same operating hours say nothing about a rate.
    with np.errstate(invalid="ignore"):
        spread = st.sxx > 1e-9 * np.maximum(n, 1) * np.maximum(st.xbar * st.xbar, 1.0)
    ok = spread & np.isfinite(b) & np.isfinite(slope_var) & np.isfinite(c00) & ((n >= opt.min_points) | has_prior)
    return PathParams(a=a, b=b, c00=c00, c01=c01, c11=slope_var, sigma2=sigma2, dof=dof, prior_weight=weight, ok=ok)
