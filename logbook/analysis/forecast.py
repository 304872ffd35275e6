"""When does each fitted wear path reach its limit: P10/P50/P90 operating hours, for a whole batch.

The crossing is where the fitted mean path meets the limit. Its quantiles come from
inverting the pointwise confidence band of the mean path (Fieller's method, as in
inverse regression / calibration: Draper and Smith, Applied Regression Analysis):
P_q is the first hour at which the one-sided level-q band touches the limit, with
Student t quantiles on the fit's degrees of freedom. The limit applies to the pump's
wear state, so the reading-to-reading noise is left out by default; ``with_noise``
widens the band to a prediction band (one future reading beyond the limit).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import numpy as np
from scipy import special

from logbook.analysis.batch import TrendBatch
from logbook.analysis.fit import EXPONENTIAL, BatchFit

# outcome codes (map to results.Outcome in fleet.py)
O_NO_DATA, O_NO_LIMIT, O_PAST_LIMIT, O_TOO_FEW, O_CROSSING, O_NO_CROSSING = range(6)
DEFAULT_QUANTILES = (0.1, 0.5, 0.9)


@dataclass
class BatchForecast:
    """Remaining operating hours from ``x_now`` to the limit per row and quantile (inf = never / beyond horizon)."""

    remaining: np.ndarray  # (S, Q)
    outcome: np.ndarray  # (S,) O_* codes
    latest: np.ndarray  # (S,) newest reading (even one dropped as wild: past the limit is reported)
    rate_per_hour: np.ndarray  # (S,) slope of the fitted path at x_now, reading units per hour


_T_TABLE_MAX = 2000


@lru_cache(maxsize=16)
def _t_table(q: float) -> np.ndarray:
    """Student t quantile q for 1..2000 degrees of freedom (index = dof), and the normal one at 0."""
    with np.errstate(invalid="ignore"):  # dof 0 is no t distribution: the normal one goes there
        table = special.stdtrit(np.arange(_T_TABLE_MAX + 1, dtype=float), q)  # = scipy.stats.t.ppf(q, dof)
    table[0] = special.ndtri(q)  # = scipy.stats.norm.ppf(q)
    return table


def _t_quantiles(q: float, dof: np.ndarray) -> np.ndarray:
    """Student t quantiles by table (dof rounded down; above 2000 the normal quantile, within 1e-3)."""
    d = np.nan_to_num(dof, nan=1.0)
    idx = np.where(d > _T_TABLE_MAX, 0, np.clip(d, 1, _T_TABLE_MAX)).astype(np.int64)
    return _t_table(float(q))[idx]


def crossing_hours(
    a, b, c00, c01, c11, sigma2, limit_t, sign, x_now, z
) -> np.ndarray:  # fmt: skip
    """First x >= x_now where sign*(a + b x - L) = z * se(x); x_now if already there, inf if never.

    se(x)^2 = c00 + 2 c01 x + c11 x^2 + sigma2 (sigma2 = 0 for the band of the mean).
    """
    d = a - limit_t
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        z2 = z * z
        qa = b * b - z2 * c11
        qb = 2.0 * (b * d - z2 * c01)
        qc = d * d - z2 * (c00 + sigma2)
        disc = qb * qb - 4 * qa * qc
        sq = np.sqrt(np.maximum(disc, 0.0))
        qq = -0.5 * (qb + np.where(qb >= 0, sq, -sq))
        r1 = np.where(qa != 0, qq / qa, -qc / qb)
        r2 = np.where(qq != 0, qc / qq, np.inf)
        real = disc >= 0

        def g(x):
            return sign * (a + b * x - limit_t)

        def se(x):
            return np.sqrt(np.maximum(c00 + 2 * c01 * x + c11 * x * x + sigma2, 0.0))

        tol = 1e-9 * (np.abs(d) + np.abs(b) * np.abs(x_now) + 1e-12)
        best = np.full(np.shape(a), np.inf)
        for r in (r1, r2):
            gr = g(r)
            right_side = np.where(z >= 0, gr >= -tol, gr <= tol)
            ok = real & np.isfinite(r) & (r > x_now) & right_side
            best = np.where(ok & (r < best), r, best)
        already = g(x_now) >= z * se(x_now)
        # z = 0 is the median: the mean path itself, solved exactly
        root = np.where(b != 0, (limit_t - a) / b, np.inf)
        median = np.where((sign * b > 0) & (root > x_now), root, np.inf)
        best = np.where(z == 0, median, best)
        return np.where(already, x_now, best)


class _PathCdf:
    """P(mean path beyond the limit at hours x), and its density, for flat (row, quantile) items of one path.

    Parameters sit in one (7, M) array so that dropping converged items is a single copy.
    """

    def __init__(self, pp, rows, limit_t, sign, with_noise):
        dof = np.clip(pp.dof[rows], 1.0, 1e6)
        sgn = sign[rows]
        c00 = pp.c00[rows] + (pp.sigma2[rows] if with_noise else 0.0)
        # sign folded into the path: g(x) = sa + sb x is the (signed) distance short of the limit
        self.p = np.stack([sgn * (pp.a[rows] - limit_t[rows]), sgn * pp.b[rows], c00, pp.c01[rows], pp.c11[rows],
                           1.0 / dof, (8 * dof + 1) / (8 * dof + 3)])  # fmt: skip

    def take(self, keep: np.ndarray) -> None:
        """Keep only the items ``keep`` (index or mask)."""
        self.p = self.p[:, keep]

    def subset(self, keep: np.ndarray) -> "_PathCdf":
        new = object.__new__(_PathCdf)
        new.p = self.p[:, keep]
        return new

    def __call__(self, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(CDF, dCDF/dx) at hours x, through the normal approximation of ``t_cdf_fast``."""
        sa, sb, c00, c01, c11, inv_dof, k = self.p
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            slope_var = c01 + c11 * x
            var = np.maximum(c00 + x * (c01 + slope_var), 1e-300)
            sd = np.sqrt(var)
            gap = sa + sb * x
            t = gap / sd
            dt = (sb * var - gap * slope_var) / (var * sd)
            u = t * t * inv_dof
            r = np.sqrt(np.log1p(u) / inv_dof)
            z = np.copysign(k * r, t)
            dz = np.where(r > 1e-12, k * np.abs(t) / ((1 + u) * r), k)
            return special.ndtr(z), np.exp(-0.5 * z * z) * _INV_SQRT_2PI * dz * dt


_INV_SQRT_2PI = 1.0 / np.sqrt(2.0 * np.pi)


def _mixture_quantiles(fit, mix, q_lin, q_exp, lim, log_lim, sign, x_now, horizon, with_noise, quantiles, tol_hours=0.5):
    """Quantiles of the Akaike-weighted mixture of both paths' crossing distributions.

    Each quantile lies between the two paths' own quantiles, which bracket the root;
    Newton steps from their weighted mean, falling back to bisection inside the bracket.
    """
    nq = len(quantiles)
    rows = np.repeat(mix, nq)  # flat (row, quantile) items
    q = np.tile(np.asarray(quantiles, dtype=float), mix.size)
    w_exp = fit.w_exp[rows]
    lo = np.minimum(q_lin, q_exp).ravel()
    cap = np.repeat(x_now[mix] + horizon * 1.001 + 1.0, nq)
    hi = np.minimum(np.maximum(q_lin, q_exp).ravel(), cap)
    f_lin = _PathCdf(fit.lin, rows, lim, sign, with_noise)
    f_exp = _PathCdf(fit.exp, rows, log_lim, sign, with_noise)
    out, f_lo, f_hi = _bracket_ends(f_lin, f_exp, w_exp, q, lo, hi, cap, np.repeat(x_now[mix], nq))
    # accuracy of the t approximation: a CDF error of 1e-3 is worth about 1e-3 of the bracket
    tol = np.maximum(tol_hours, 2e-3 * np.where(np.isfinite(hi - lo), hi - lo, 0.0))
    active = np.flatnonzero((f_lo < 0) & (f_hi >= 0) & (hi - lo > tol))
    x = (1 - w_exp[active]) * np.ravel(q_lin)[active] + w_exp[active] * np.ravel(q_exp)[active]
    _newton(out, active, x, lo, hi, q, w_exp, tol, f_lin, f_exp)
    out = np.where(out >= cap, np.inf, out)
    return out.reshape(mix.size, nq)


def _bracket_ends(f_lin, f_exp, w_exp, q, lo, hi, cap, x_now):
    """Start values of the mixture quantiles: ``lo`` where the mixture already reaches q there, inf where
    it does not by ``cap``, else ``hi``; and the excess (mixture CDF - q) at both ends (-1, 1 unchecked)."""
    out = np.where(np.isfinite(lo), hi, np.inf)
    # the bracket ends need checking only where they are the ends of the search range
    f_lo, f_hi = np.full(lo.size, -1.0), np.ones(lo.size)
    for f_end, end, where in ((f_lo, lo, lo <= x_now), (f_hi, hi, hi >= cap)):
        idx = np.flatnonzero(where)
        if idx.size:
            part_lin, part_exp = f_lin.subset(idx)(end[idx])[0], f_exp.subset(idx)(end[idx])[0]
            f_end[idx] = (1 - w_exp[idx]) * part_lin + w_exp[idx] * part_exp - q[idx]
    return np.where(f_lo >= 0, lo, np.where(f_hi < 0, np.inf, out)), f_lo, f_hi


def _newton(out, active, x, lo, hi, q, w_exp, tol, f_lin, f_exp):
    """Safeguarded Newton steps on the mixture CDF for the ``active`` items from ``x``, kept inside the
    bracket (lo, hi) by bisection; writes the roots into ``out``."""
    lo, hi, q, w_exp, tol = (v[active] for v in (lo, hi, q, w_exp, tol))
    f_lin.take(active)
    f_exp.take(active)
    x = np.where(np.isfinite(x) & (x > lo) & (x < hi), x, 0.5 * (lo + hi))
    for _ in range(60):
        if not active.size:
            break
        (fl, dl), (fe, de) = f_lin(x), f_exp(x)
        e, slope = (1 - w_exp) * fl + w_exp * fe - q, (1 - w_exp) * dl + w_exp * de
        up = e >= 0
        hi, lo = np.where(up, x, hi), np.where(up, lo, x)
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            nxt = x - e / slope
        nxt = np.where(np.isfinite(nxt) & (nxt > lo) & (nxt < hi), nxt, 0.5 * (lo + hi))
        done = (np.abs(nxt - x) <= tol) | (hi - lo <= tol)
        x = nxt
        out[active] = x
        if done.mean() > 0.15 or done.all():
            keep = np.flatnonzero(~done)
            active = active[keep]
            lo, hi, q, w_exp, tol, x = np.stack([lo, hi, q, w_exp, tol, x])[:, keep]
            f_lin.take(keep)
            f_exp.take(keep)


def t_cdf_fast(t, dof):
    """Student t CDF by its normal approximation z = (8v+1)/(8v+3) sqrt(v ln(1 + t^2/v)) (Wallace, 1959).

    Absolute error under 1e-3 for v >= 3 (checked against scipy.special.stdtr in the tests);
    used only inside the mixture bisection, where speed matters.
    """
    v = np.clip(dof, 1.0, 1e6)
    z = np.sign(t) * (8 * v + 1) / (8 * v + 3) * np.sqrt(v * np.log1p(t * t / v))
    return special.ndtr(z)


def _path_quantiles(pp, rows, limit_t, sign, x_now, with_noise, quantiles):
    """Crossing hours (absolute x) of one path for ``rows``, one column per quantile."""
    out = np.full((rows.size, len(quantiles)), np.inf)
    if rows.size:
        args = [arr[rows] for arr in (pp.a, pp.b, pp.c00, pp.c01, pp.c11)]
        s2 = pp.sigma2[rows] if with_noise else np.zeros(rows.size)
        lim, sgn, now = limit_t[rows], sign[rows], x_now[rows]
        for qi, q in enumerate(quantiles):
            if q == 0.5:
                out[:, qi] = median_crossing(args[0], args[1], args[2], args[3], args[4], s2, lim, sgn, now)
                continue
            z = _t_quantiles(q, pp.dof[rows])
            out[:, qi] = crossing_hours(*args, s2, lim, sgn, now, z)
    return out


def median_crossing(a, b, c00, c01, c11, sigma2, limit_t, sign, x_now):
    """P50: where the fitted mean path meets the limit (x_now if it is already there, inf if never)."""
    with np.errstate(invalid="ignore", divide="ignore"):
        root = (limit_t - a) / b
        already = sign * (a + b * x_now - limit_t) >= 0
        ahead = (sign * b > 0) & (root > x_now)
    return np.where(already, x_now, np.where(ahead, root, np.inf))


def forecast_batch(
    batch: TrendBatch,
    fit: BatchFit,
    *,
    horizon_hours: float = 20_000.0,
    quantiles: tuple[float, ...] = DEFAULT_QUANTILES,
    with_noise: bool = False,
    min_weight: float = 0.01,
) -> BatchForecast:
    """Crossing quantiles and outcome codes for every row of a fitted batch.

    Where both paths carry Akaike weight above ``min_weight``, the crossing distribution
    is their weighted mixture (model averaging: Burnham and Anderson, Model Selection and
    Multimodel Inference, 2002, ch. 4), whose quantiles are solved by safeguarded Newton
    steps. Remaining hours beyond ``horizon_hours`` come back as inf.
    """
    lim = batch.limit
    sign = batch.direction.astype(float)
    x_now = np.maximum(batch.x_now, 0.0)
    cross, go = _crossings(batch, fit, x_now, horizon_hours, quantiles, with_noise, min_weight)
    rem = cross - x_now[:, None]
    rem[rem > horizon_hours] = np.inf
    expo = fit.path == EXPONENTIAL

    # newest used reading and the slope of the path today
    latest = fit.latest
    with np.errstate(invalid="ignore", over="ignore"):
        rate = np.where(expo, fit.b * np.exp(fit.a + fit.b * x_now), fit.b)
    mid = rem[:, quantiles.index(0.5)] if 0.5 in quantiles else rem[:, len(quantiles) // 2]
    outcome = _outcomes(fit.n_valid > 0, lim, sign * (latest - lim) >= 0, go, mid)
    return BatchForecast(remaining=rem, outcome=outcome.astype(np.int8), latest=latest, rate_per_hour=rate)


def _crossings(batch: TrendBatch, fit: BatchFit, x_now, horizon_hours, quantiles, with_noise, min_weight):
    """(S, Q) crossing hours (absolute x, inf for never) of the path or the mixture of both paths, and
    which rows have a path toward a limit at all."""
    lim = batch.limit
    sign = batch.direction.astype(float)
    with np.errstate(invalid="ignore", divide="ignore"):
        log_lim = np.log(np.where(lim > 0, lim, np.nan))
    w_exp = fit.w_exp
    use_lin = fit.lin.ok & np.isfinite(lim) & (w_exp < 1 - min_weight) & (fit.path != 0)
    use_exp = fit.exp.ok & np.isfinite(log_lim) & (w_exp > min_weight) & (fit.path != 0)
    lin_rows, exp_rows = np.flatnonzero(use_lin), np.flatnonzero(use_exp)
    cross = np.full((batch.size, len(quantiles)), np.inf)
    q_lin = _path_quantiles(fit.lin, lin_rows, lim, sign, x_now, with_noise, quantiles)
    q_exp = _path_quantiles(fit.exp, exp_rows, log_lim, sign, x_now, with_noise, quantiles)
    cross[lin_rows] = q_lin
    cross[exp_rows] = q_exp
    mix = np.flatnonzero(use_lin & use_exp)
    if mix.size:
        pos_l, pos_e = np.searchsorted(lin_rows, mix), np.searchsorted(exp_rows, mix)
        cross[mix] = _mixture_quantiles(
            fit, mix, q_lin[pos_l], q_exp[pos_e], lim, log_lim, sign, x_now, horizon_hours, with_noise, quantiles
        )
    return cross, use_lin | use_exp


def _outcomes(has_data, lim, past, go, mid):
    """Outcome code per row: no data, no limit, past the limit, too few for a path, crossing or not."""
    return np.where(
        ~has_data, O_NO_DATA,
        np.where(~np.isfinite(lim), O_NO_LIMIT,
                 np.where(past, O_PAST_LIMIT,
                          np.where(~go, O_TOO_FEW,
                                   np.where(np.isfinite(mid), O_CROSSING, O_NO_CROSSING)))),
    )  # fmt: skip

