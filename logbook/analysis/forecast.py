"""When does each pump's true condition reach its limit: P10/P50/P90 operating hours, for a whole batch.

The readings the fit kept (``BatchFit.weights``: wild readings dropped, readings before
a step left out) go to ``paths.PathMixture``: a family of wear paths (straight, power
law, exponential, runaway) mixed per pump by how well each predicts its model's fleet's
later readings. P_q is the first hour at which the mixture gives probability q that the
pump's true condition (not one noisy reading) is past the limit. The path spread is
widened or narrowed by the split-conformal factors of ``paths.calibrate``: forecasts of
the fleet's own series from earlier origins, scored on their later readings, each pump
left out of its own (``calibration=False`` gives the raw bands). ``with_noise`` adds the
reading-to-reading noise: the crossing of one future reading rather than of the condition.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from logbook.analysis import paths
from logbook.analysis.batch import TrendBatch
from logbook.analysis.fit import B_JUMP, EXPONENTIAL, BatchFit

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
    path: np.ndarray | None = None  # (S,) index into paths.LAMBDAS of the heaviest path, -1 for none
    calibrated_on: np.ndarray | None = None  # (S,) later readings the row's spread factors rest on (0: none)
    mixture: "paths.PathMixture | None" = None


def forecast_batch(
    batch: TrendBatch,
    fit: BatchFit,
    *,
    horizon_hours: float = 20_000.0,
    quantiles: tuple[float, ...] = DEFAULT_QUANTILES,
    with_noise: bool = False,
    calibration: bool = True,
) -> BatchForecast:
    """Crossing quantiles and outcome codes for every row of a fitted batch (see the module docstring).
    Remaining hours beyond ``horizon_hours`` come back as inf."""
    lim = batch.limit
    sign = batch.direction.astype(float)
    x_now = np.maximum(batch.x_now, 0.0)
    w = fit.weights.astype(float)
    group = batch.group if fit.pooled else np.full(batch.size, -1)  # each pump on its own: nothing from the fleet
    lambdas = paths.LAMBDAS if fit.exponential else (1.0,)
    on_scales = paths.scales(np.nan_to_num(batch.y, nan=1.0))  # every path's scale, once for the batch
    cal = paths.calibrate(batch.x, batch.y, w, lim, batch.direction, group, lambdas=lambdas, on_scales=on_scales) \
        if calibration else paths.Calibration.none(batch.size)
    mixture = paths.PathMixture(batch.x, batch.y, w, lim, batch.direction, group, spread=(cal.fast, cal.slow),
                                noise=with_noise, lambdas=lambdas, on_scales=on_scales)
    go = mixture.ok & (fit.n_used > 0)  # a path of its own, or one slope borrowed from its fleet
    cross = np.where(go[:, None], mixture.crossing_hours(x_now, quantiles, horizon_hours), np.inf)
    rem = cross - x_now[:, None]
    rem[rem > horizon_hours] = np.inf
    expo = fit.path == EXPONENTIAL

    # newest reading and the slope of the fitted path today; a newest reading set aside as wild
    # (B_JUMP) does not by itself put the row past its limit: the pump is to be tested again
    # (status.RETEST), and a second reading that agrees with it is wear (fit._confirmed)
    latest = fit.latest
    jumped = (fit.flags & B_JUMP) != 0
    judged = np.where(jumped, _newest_used(batch.y, w), latest)
    with np.errstate(invalid="ignore", over="ignore"):
        rate = np.where(expo, fit.b * np.exp(fit.a + fit.b * x_now), fit.b)
    mid = rem[:, quantiles.index(0.5)] if 0.5 in quantiles else rem[:, len(quantiles) // 2]
    outcome = _outcomes(fit.n_valid > 0, lim, sign * (judged - lim) >= 0, go, mid)
    return BatchForecast(remaining=rem, outcome=outcome.astype(np.int8), latest=latest, rate_per_hour=rate,
                         path=np.where(go, mixture.dominant(), -1), calibrated_on=cal.n_scores, mixture=mixture)


def _newest_used(y: np.ndarray, w: np.ndarray) -> np.ndarray:
    """Per row, the newest reading the fit kept (columns are in hours order); NaN for none."""
    col = w.shape[1] - 1 - np.argmax(w[:, ::-1] > 0, axis=1)
    got = y[np.arange(len(y)), col]
    return np.where((w > 0).any(axis=1), got, np.nan)


def _outcomes(has_data, lim, past, go, mid):
    """Outcome code per row: no data, no limit, past the limit, too few for a path, crossing or not."""
    return np.where(
        ~has_data, O_NO_DATA,
        np.where(~np.isfinite(lim), O_NO_LIMIT,
                 np.where(past, O_PAST_LIMIT,
                          np.where(~go, O_TOO_FEW,
                                   np.where(np.isfinite(mid), O_CROSSING, O_NO_CROSSING)))),
    )  # fmt: skip

