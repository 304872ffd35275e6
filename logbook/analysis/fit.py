"""Robust wear-path fits for a whole batch of series at once.

Per series: detect a step change (breakage: a level shift of at least 3 noise sd,
significant after Bonferroni over the split points against the series' residual
variance blended with its model fleet's noise at the series' level (``fleet_noise``),
not resting on one reading, and explaining the readings better than every smooth wear
path of the Box-Cox family, exponential included, by a likelihood ratio) and keep only
the readings after it; drop a
single wild reading (externally studentized residual, Bonferroni test; Cook and
Weisberg, Residuals and Influence in Regression, 1982); fit a linear and an
exponential (log-linear) path and weigh them by AICc on the readings' own scale (the
log fit's likelihood carries the Jacobian -sum(log y)); then shrink each path's slope
toward the pump model's fleet (``pooling``). For a falling kind (servo pressure) the
exponential path is a proportional decay, y = exp(a + b x) with b < 0. Steps and
wild readings are screened on the linear path for every row and confirmed on the log
path only for the few candidate rows (steps: the smooth paths, for the candidates only).
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
    alpha_step: float = 0.001  # family-wise level of the step test on a series' own noise alone
    alpha_step_fleet: float = 0.01  # the same where the model fleet's noise is blended in (and its split-vs-paths test)
    step_min_sigma: float = 3.0  # a step must also be this many noise sd (our choice, no published source)
    min_step_side: int = 2  # readings needed on each side of a step
    step_fleet_dof: float = 40.0  # readings' worth of the model fleet's relative noise in the step test's variance
    step_log_veto: bool = False  # the old rule (for comparison only): found on the log scale too, scanned again
    # without the most extreme reading (with alpha_step=0.001, step_fleet_dof=0: the rule before issue 12 item 5)
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
    dx, r = st.kept()
    with np.errstate(invalid="ignore", divide="ignore"):
        inv_sxx = np.where(st.sxx > 0, 1.0 / st.sxx, 0.0)[:, None]
        h = dx * dx
        h *= inv_sxx
        h += (1.0 / np.maximum(st.n, 1))[:, None]
        np.subtract(1.0, h, out=h)  # 1 - leverage (unused readings: r = 0, so u = 0)
        u = r * r
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


def _step_scan(st: LineStats, w: np.ndarray, crit_f: np.ndarray, opt: FitOptions, left_aligned: bool = False,
               prior_s2: np.ndarray | None = None, min_n: int | None = None):
    """Best single level shift per row (Frisch-Waugh on prefix sums) and whether it is a real step.

    Splitting after column j: the reduction in RSS is (sum of residuals up to j)^2 / e_j, with
    e_j = m - m^2/n - (sum of centred x up to j)^2 / Sxx and m the readings up to j.
    With ``prior_s2`` (per row, NaN for none) the noise variance the shift is tested against is the
    row's own residual variance combined with the fleet's at ``opt.step_fleet_dof`` readings' worth
    (a scaled-inverse-chi-square prior: Gelman et al., Bayesian Data Analysis, 3rd ed., 2013,
    sec. 3.3), and the F test has those extra degrees of freedom: six readings alone leave three,
    under which no 8-sigma step can pass a family-wise test. ``min_n``: readings a row needs
    (default two sides' worth and two more).
    """
    s, width = w.shape
    side = opt.min_step_side
    dx, r = st.kept()
    with np.errstate(invalid="ignore", divide="ignore"):
        # (a product with a triangle of ones would be faster, but multithreaded BLAS stalls on a busy machine)
        cw = np.arange(1.0, width + 1.0)[None, :] if left_aligned else np.cumsum(w, axis=1)
        cdx = np.cumsum(dx, axis=1)
        red = np.cumsum(r, axis=1)
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
        n_int = st.n.astype(int)
        crit = crit_f[n_int]
        var = rss1 / np.maximum(dof1, 1)
        if prior_s2 is not None and opt.step_fleet_dof > 0:
            has = np.isfinite(prior_s2) & (prior_s2 > 0)
            d0 = np.where(has, opt.step_fleet_dof, 0.0)
            var = np.where(has, (rss1 + d0 * np.nan_to_num(prior_s2)) / np.maximum(dof1 + d0, 1), var)
            cand = np.maximum(st.n - 2 * side + 1, 1)
            crit = np.where(has, special.fdtri(1, np.maximum(dof1 + d0, 1), 1.0 - opt.alpha_step_fleet / cand), crit)
        fstat = rmax / var
        size = np.sqrt(rmax / e_j)  # |level shift|
        big = size > opt.step_min_sigma * np.sqrt(var)
        found = (st.n >= (2 * side + 2 if min_n is None else min_n)) & (fstat > crit) & big & (rmax > 0) & (e_j > 1e-9)
    return found, j + 1


def _sub(st: LineStats, rows: np.ndarray) -> LineStats:
    """The ``rows`` of a LineStats."""
    return LineStats(st.n[rows], st.xbar[rows], st.ybar[rows], st.sxx[rows], st.a[rows], st.b[rows], st.rss[rows],
                     None if st.dx is None else st.dx[rows], None if st.r is None else st.r[rows])


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
    lin: LineStats

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
        return cls(x0, y0, ly, w, np.isfinite(_rowsum(ly)), np.zeros(s, dtype=np.int64), np.full(s, -1, dtype=np.int64),
                   np.zeros(s, dtype=bool), ols_rows(x0, y0, w))  # fmt: skip

    def refit(self, rows: np.ndarray) -> None:
        self.changed[rows] = True
        self.lin.put(rows, ols_rows(self.x0[rows], self.y0[rows], self.w[rows]))


def _fit_rows(x: np.ndarray, y: np.ndarray, opt: FitOptions, prior_rel: np.ndarray | None = None) -> _RowFits:
    """Steps, wild readings and the two least-squares lines for a block of rows (``prior_rel``: the
    noise variance its fleet shows at the row's level, NaN for none; see ``fleet_noise``)."""
    block = _Block.of(x, y)
    n_valid = _rowsum(block.w)
    crit_t2, crit_f = _crit_tables(x.shape[1], opt.alpha_outlier, opt.alpha_step, opt.min_step_side)
    prior_s2 = prior_rel
    _drop_before_step(block, crit_t2, crit_f, opt, prior_s2)
    last_col = n_valid.astype(np.int64) - 1
    _drop_wild(block, crit_t2, last_col, opt)
    lg = _both_paths(block)
    return _RowFits(block.lin, lg, block.w, block.flags, block.step_at, n_valid, block.all_pos, _latest(y, last_col))


def _drop_before_step(block: _Block, crit_t2: np.ndarray, crit_f: np.ndarray, opt: FitOptions,
                      prior_s2: np.ndarray | None = None) -> None:
    """1. A step change: keep only the readings after it."""
    lin, w, x0, y0 = block.lin, block.w, block.x0, block.y0
    found, col = _step_scan(lin, w, crit_f, opt, left_aligned=True, prior_s2=prior_s2)
    if opt.step_log_veto:
        cand = np.flatnonzero(found & block.all_pos)
        if cand.size:  # (the old rule) not a step unless the log scale finds it too
            f_log, c_log = _confirm_log(cand, block.ly, x0, w, _step_scan, crit_f, opt, left_aligned=True)
            found[cand] = f_log & (np.abs(c_log - col[cand]) <= 1)
    else:
        cand = np.flatnonzero(found)
        if cand.size:  # not a step if a smooth wear path explains the readings as well as the split does
            fleet = np.zeros(cand.size, dtype=bool) if prior_s2 is None else np.isfinite(prior_s2[cand])
            alpha = np.where(fleet & (opt.step_fleet_dof > 0), opt.alpha_step_fleet, opt.alpha_step)
            found[cand] = _split_beats_paths(x0[cand], y0[cand], w[cand], col[cand], block.all_pos[cand], lin.n[cand],
                                             opt, alpha)  # fmt: skip
    cand = np.flatnonzero(found)
    if cand.size:  # nor if it rests on one reading: drop the most extreme one, and the shift at the same
        # place must keep its sign, half its size and the test's minimum size (a wild reading beside
        # the split leaves almost nothing; a real step loses little)
        _, worst = _outlier_scan(_sub(lin, cand), crit_t2, 0)
        w_less = w[cand].copy()
        w_less[np.arange(cand.size), worst] = 0.0
        if opt.step_log_veto:  # (the old rule: the whole scan again without it)
            f_rob, c_rob = _step_scan(ols_rows(x0[cand], y0[cand], w_less), w_less, crit_f, opt)
            found[cand] = f_rob & (np.abs(c_rob - col[cand]) <= 1)
        else:
            found[cand] = _shift_stands(x0[cand], y0[cand], w[cand], w_less, col[cand],
                                        None if prior_s2 is None else prior_s2[cand], opt)  # fmt: skip
    rows = np.flatnonzero(found)
    if rows.size:
        block.step_at[rows] = col[rows]
        block.flags[rows] |= B_STEP
        w[rows] = w[rows] * (np.arange(w.shape[1])[None, :] >= col[rows][:, None])
        block.refit(rows)


#: Box-Cox powers of the smooth paths a step must beat (paths.LAMBDAS: straight, power laws, exponential,
#: runaway, and the square for falling readings); written out here so the fit does not import the mixture
SMOOTH_LAMBDAS = (2.0, 1.0, 0.5, 1.0 / 3.0, 0.0, -0.5, -1.0, -1.5)


def _split_rss(x0: np.ndarray, z: np.ndarray, w: np.ndarray, col: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """RSS of the line of ``z`` on hours, and of the line plus a level shift from column ``col`` on
    (Frisch-Waugh: the shift's reduction is (sum of residuals before col)^2 / e, as in ``_step_scan``)."""
    st, e, lead = _shift_terms(x0, z, w, col)
    with np.errstate(invalid="ignore", divide="ignore"):
        red = lead**2 / e
    return st.rss, np.maximum(st.rss - np.where(e > 1e-12, red, 0.0), 1e-300)


def _shift_terms(x0: np.ndarray, z: np.ndarray, w: np.ndarray, col: np.ndarray):
    """The line's fit, and per row the shift's Frisch-Waugh denominator ``e`` and the sum of the
    line's residuals before ``col`` (the shift is -lead / e; it takes lead^2 / e off the RSS)."""
    st = ols_rows(x0, z, w)
    dx, r = st.kept()
    before = (np.arange(w.shape[1])[None, :] < col[:, None]) & (w > 0)
    with np.errstate(invalid="ignore", divide="ignore"):
        m = before.sum(axis=1).astype(float)
        sdx = np.where(before, dx, 0.0).sum(axis=1)
        e = m - m * m / np.maximum(st.n, 1) - sdx * sdx / st.sxx
    return st, e, np.where(before, r, 0.0).sum(axis=1)


def _shift_at(x0: np.ndarray, y0: np.ndarray, w: np.ndarray, col: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """The level shift (after minus before) of the line-plus-shift fit at column ``col``, and that fit's
    residual variance (Frisch-Waugh, as ``_split_rss``)."""
    st, e, lead = _shift_terms(x0, y0, w, col)
    with np.errstate(invalid="ignore", divide="ignore"):
        shift = np.where(e > 1e-12, -lead / e, 0.0)
        var = np.maximum(st.rss - np.where(e > 1e-12, lead * lead / e, 0.0), 0.0) / np.maximum(st.n - 3, 1)
    return shift, var


def _shift_stands(x0, y0, w, w_less, col, prior_s2, opt: FitOptions) -> np.ndarray:
    """Whether the shift at ``col`` survives without the most extreme reading (``w_less``): still
    ``min_step_side`` readings on each side (two newest readings that agree are wear, not a step:
    ``_confirmed``), the same sign, at least half the size, and ``step_min_sigma`` noise sd (the
    fleet's blended in)."""
    shift, _ = _shift_at(x0, y0, w, col)
    shift_less, var_less = _shift_at(x0, y0, w_less, col)
    if prior_s2 is not None and opt.step_fleet_dof > 0:
        has = np.isfinite(prior_s2) & (prior_s2 > 0)
        dof = np.maximum(_rowsum(w_less) - 3, 0)
        var_less = np.where(has, (var_less * dof + opt.step_fleet_dof * np.nan_to_num(prior_s2)) / (dof + opt.step_fleet_dof),
                            var_less)  # fmt: skip
    side = np.arange(w.shape[1])[None, :] < col[:, None]
    sides = (((w_less > 0) & side).sum(axis=1) >= opt.min_step_side) & (((w_less > 0) & ~side).sum(axis=1) >= opt.min_step_side)
    with np.errstate(invalid="ignore"):
        return sides & ((np.sign(shift_less) == np.sign(shift)) & (np.abs(shift_less) >= 0.5 * np.abs(shift))
                & (np.abs(shift_less) > opt.step_min_sigma * np.sqrt(var_less)))  # fmt: skip


def _split_beats_paths(x0, y0, w, col, all_pos, n, opt: FitOptions, alpha: np.ndarray) -> np.ndarray:
    """Whether a level shift at ``col`` explains each row better than every smooth wear path: the
    profile log likelihood on the readings' own scale (Box-Cox lines carry the Jacobian
    (lam - 1) sum log y; Box and Cox, JRSS B 26, 1964) of the best split line (straight or on the log
    scale) beats the best smooth path by more than half the chi-square(1) critical value at the step
    test's family-wise level (Bonferroni over the split points): a likelihood-ratio comparison of a
    shift against the path that explains the same rise by curvature. The exponential path alone
    no longer vetoes a step the split explains better (issue 12, item 5)."""
    ly = np.where(all_pos[:, None] & (w > 0), np.log(np.where(y0 > 0, y0, 1.0)), 0.0)
    jac = _rowsum(np.where(w > 0, ly, 0.0))
    half_n = 0.5 * n
    rss_line, rss_split = _split_rss(x0, y0, w, col)
    with np.errstate(divide="ignore", invalid="ignore"):
        ll_split = -half_n * np.log(rss_split)
        ll_smooth = -half_n * np.log(np.maximum(rss_line, 1e-300))
        _, rss_log_split = _split_rss(x0, ly, w, col)
        ll_split = np.where(all_pos, np.maximum(ll_split, -half_n * np.log(rss_log_split) - jac), ll_split)
        for lam in SMOOTH_LAMBDAS:
            if lam == 1.0:
                continue
            z = np.where(w > 0, (np.exp(lam * ly) - 1.0) / lam if lam != 0.0 else ly, 0.0)
            st = ols_rows(x0, z, w, keep=False)
            ll = -half_n * np.log(np.maximum(st.rss, 1e-300)) + (lam - 1.0) * jac
            ll_smooth = np.where(all_pos, np.maximum(ll_smooth, ll), ll_smooth)
        cand = np.maximum(n - 2 * opt.min_step_side + 1, 1)
        margin = 0.5 * special.chdtri(1, alpha / cand)
    return np.isfinite(ll_split) & (ll_split - ll_smooth > margin)


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
    r = st.kept()[1]
    second = (col == last_col - 1) & (last_col >= 1)
    r_col = r[rows, col]
    r_new = r[rows, np.maximum(last_col, 0)]
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
    prior_rel = fleet_noise(batch, opt)
    parts = [_fit_rows(batch.x[i : i + step], batch.y[i : i + step], opt, None if prior_rel is None else prior_rel[i : i + step])
             for i in range(0, s, step)]  # fmt: skip
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


def fleet_noise(batch: TrendBatch, opt: FitOptions) -> np.ndarray | None:
    """Per row, the noise variance its pooling group's readings show about their straight lines,
    at the row's level: the variance function sigma^2 = c |mean|^(2 beta) (Carroll and Ruppert,
    Transformation and Weighting in Regression, 1988, ch. 2), beta in [0, 1] fitted per group as the
    slope of log(noise) on log(level) over its series (1: noise proportional to the reading, as of
    flow and pressure gauges; 0: the same noise at every level, as of a drift read about zero).
    The noise comes from the differences of successive residuals about each series' line (a
    difference-based estimator, Rice, Annals of Statistics 12, 1984), each divided by its own sd under
    the line, sqrt(2 - h_ii - h_jj + 2 h_ij) in units of sigma (h the hat matrix: residuals of a short
    series vary less than the noise), pooled as (1.4826 median |d|)^2 (the median absolute deviation,
    Hampel, JASA 69, 1974): differences leave out the slow curvature
    of a wear path, and a step or a wild reading spoils one or two differences, not the median.
    NaN for a row outside a group or in a group of under 20 differences from 5 series; None when no
    row has a group, pooling is off or the step test does not use it."""
    if opt.step_fleet_dof <= 0 or not opt.pool or not (batch.group >= 0).any():
        return None
    valid = ~np.isnan(batch.y)
    st = ols_rows(np.where(valid, batch.x, 0.0), np.where(valid, batch.y, 0.0), valid.astype(float))
    level = np.abs(st.ybar)
    dx, r = st.kept()
    with np.errstate(invalid="ignore", divide="ignore"):  # Var(r_i+1 - r_i) = sigma^2 (2 - h_ii - h_jj + 2 h_ij)
        inv_n, inv_sxx = 1.0 / np.maximum(st.n, 1)[:, None], np.where(st.sxx > 0, 1.0 / st.sxx, 0.0)[:, None]
        h = inv_n + dx * dx * inv_sxx
        h_next = inv_n + dx[:, 1:] * dx[:, :-1] * inv_sxx
        d = np.abs(r[:, 1:] - r[:, :-1]) / np.sqrt(np.maximum(2.0 - h[:, 1:] - h[:, :-1] + 2.0 * h_next, 1e-12))
    pair = valid[:, 1:] & valid[:, :-1] & (st.n >= 4)[:, None] & (batch.group >= 0)[:, None] & (level > 0)[:, None]
    out = np.full(batch.size, np.nan)
    series = pair.any(axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        own = np.nanmedian(np.where(pair, d, np.nan)[series], axis=1) if series.any() else np.zeros(0)
    rows = np.flatnonzero(series)
    for g in np.unique(batch.group[rows]):
        mine = rows[batch.group[rows] == g]
        keep = own[batch.group[rows] == g] > 0
        if keep.sum() < 5 or pair[mine].sum() < 20:
            continue
        lx, ly = np.log(level[mine][keep]), np.log(own[batch.group[rows] == g][keep])
        beta = float(np.clip(np.polyfit(lx, ly, 1)[0], 0.0, 1.0)) if np.ptp(lx) > 0 else 1.0
        scaled = (d[mine] / level[mine][:, None] ** beta)[pair[mine]]
        c = (1.4826 * np.median(scaled)) ** 2
        members = batch.group == g
        out[members] = c * np.abs(st.ybar[members]) ** (2 * beta)
    return out


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
