"""Last step of the engine: the fitted and forecast batch turned into the result records.

One KindForecast per row, one PumpForecast per pump (with its worst kind and status);
the fitted line of each row with a path as a FitDetail. Remaining hours are reported
only for a crossing or no crossing within the horizon; a quantile beyond the horizon is
None, and so is its date; dates come from the machine's utilisation (``utilisation``).
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date

import numpy as np

from logbook.analysis import paths
from logbook.analysis.fit import B_JUMP, B_OUTLIER, B_POOLED, B_STEP, PATH_NAMES, BatchFit
from logbook.analysis.forecast import (
    O_CROSSING,
    O_NO_CROSSING,
    O_NO_DATA,
    O_NO_LIMIT,
    O_PAST_LIMIT,
    O_TOO_FEW,
    BatchForecast,
)
from logbook.analysis.results import (
    FLAG_JUMP,
    FLAG_OUTLIER,
    FLAG_POOLED,
    FLAG_STEP,
    FitDetail,
    KindForecast,
    Outcome,
    PumpForecast,
)
from logbook.analysis.series import FleetPack
from logbook.analysis.status import StatusThresholds, pump_statuses, worst_kinds
from logbook.analysis.timeline import floats
from logbook.analysis.utilisation import dates_ahead, days_ahead, seasonal_days
from logbook.model import ALL_KINDS, PumpModel

#: Outcome of each forecast.O_* code, and the flag name of each fit.B_* bit.
OUTCOMES = [Outcome.NO_DATA, Outcome.NO_LIMIT, Outcome.PAST_LIMIT, Outcome.TOO_FEW, Outcome.CROSSING, Outcome.NO_CROSSING]
FLAGS = ((B_OUTLIER, FLAG_OUTLIER), (B_STEP, FLAG_STEP), (B_POOLED, FLAG_POOLED), (B_JUMP, FLAG_JUMP))
_FLAG_SETS = [frozenset(name for bit, name in FLAGS if bits & bit) for bits in range(16)]
KINDS = len(ALL_KINDS)


@dataclass(slots=True)
class RowFigures:
    """Per row (pump x kind), the figures of the records as arrays and lists."""

    code: np.ndarray  # outcome code, too few where readings came only before the segment
    remaining: np.ndarray  # (S, 3) P10/P50/P90 remaining hours, NaN where none
    days: np.ndarray  # (S, 3) days from today to each, -1 for no date
    detail: np.ndarray  # a fitted line to show

    @classmethod
    def of(cls, pk: FleetPack, fit: BatchFit, fc: BatchForecast) -> "RowFigures":
        code = np.where((fc.outcome == O_NO_DATA) & (pk.before > 0), O_TOO_FEW, fc.outcome)
        spans = (code == O_CROSSING) | (code == O_NO_CROSSING)
        remaining = np.where(spans[:, None] & np.isfinite(fc.remaining), fc.remaining, np.nan)
        days = _dates_ahead(pk, remaining)
        return cls(code, remaining, days, shown_fit(fit))


def _dates_ahead(pk: FleetPack, remaining: np.ndarray) -> np.ndarray:
    """Days ahead of each row's P10/P50/P90, with the machine's utilisation spread (``utilisation.dates_ahead``)."""
    rate = np.repeat(floats(pk.per_day), KINDS)
    if not pk.spread or remaining.shape[1] != 3:
        days = days_ahead(remaining, rate)
    else:
        v, length, span, _ = (np.repeat(a, KINDS) for a in pk.spread)
        days = dates_ahead(remaining, rate, v, length, span)
    if pk.months is None or pk.today is None:
        return days
    return seasonal_days(days, rate, np.repeat(pk.months, KINDS, axis=0), pk.today)  # machines run by season


def kind_records(serials: list[str], pk: FleetPack, fit: BatchFit, fc: BatchForecast, rows: RowFigures,
                 today: date) -> list[KindForecast]:  # fmt: skip
    """One KindForecast per row."""
    base = today.toordinal()
    when = [_dates([base + d if d >= 0 else -1 for d in col]) for col in rows.days.T.tolist()]
    hours = [[None if v != v else v for v in col] for col in rows.remaining.T.tolist()]
    with np.errstate(invalid="ignore"):
        rate = np.where(rows.detail & np.isfinite(fc.rate_per_hour), fc.rate_per_hour * 1000.0, np.nan).tolist()
    count = np.diff(pk.bounds)
    seen, counts = (count > 0).tolist(), count.tolist()
    last = np.maximum(pk.bounds[1:] - 1, 0)
    latest_y, latest_raw, latest_day = ([None] * len(seen),) * 3 if not len(pk.y) else (
        pk.y[last].tolist(), pk.raw[last].tolist(), pk.day[last].tolist())  # fmt: skip
    latest_on = _dates([d if s else -1 for d, s in zip(latest_day, seen)])
    details = fit_details(pk, fit, rows.detail, fc)
    flags = [_FLAG_SETS[b] for b in (fit.flags & 15).tolist()]
    path, share = _path_words(fc, rows)
    theo = _percent_of_theoretical(pk, latest_y, seen)
    calibrated = (fc.calibrated_on if fc.calibrated_on is not None else np.zeros(len(rows.code), dtype=int)).tolist()
    outcome = [OUTCOMES[c] for c in rows.code.tolist()]
    x_now = pk.batch.x_now.tolist()
    return [
        KindForecast(
            serial=serial, kind=ALL_KINDS[i % KINDS], limit=pk.limits[i], outcome=outcome[i],
            latest_value=latest_y[i] if seen[i] else None, latest_raw=latest_raw[i] if seen[i] else None,
            latest_on=latest_on[i] if seen[i] else None, n_readings=counts[i],
            segment_start=pk.start_on[i], hours_in_segment=x_now[i], path=path[i],
            p10_hours=hours[0][i], p50_hours=hours[1][i], p90_hours=hours[2][i],
            p10_date=when[0][i], p50_date=when[1][i], p90_date=when[2][i], flags=flags[i],
            fit=details[i], rate_per_1000h=None if rate[i] != rate[i] else rate[i],
            path_share=share[i], calibrated_on=int(calibrated[i]), percent_of_theoretical=theo[i],
            not_used=pk.not_used.get(i, ()),
        )
        for i, serial in enumerate(serial for serial in serials for _ in range(KINDS))
    ]  # fmt: skip


def _percent_of_theoretical(pk: FleetPack, latest: list, seen: list) -> list[float | None]:
    """Per row: the case drain row's latest normalized value as a percentage of the pump's theoretical
    flow at its model's test speed (Q_th = Vg n / 1000); None for the other kinds and without readings."""
    out: list[float | None] = [None] * len(seen)
    if pk.theoretical_lpm is None:
        return out
    for p, q in enumerate(pk.theoretical_lpm.tolist()):
        r = KINDS * p  # case drain is the first kind of each pump
        if seen[r] and q > 0 and latest[r] is not None:
            out[r] = 100.0 * latest[r] / q
    return out


def _path_words(fc: BatchForecast, rows: RowFigures) -> tuple[list[str], list[float | None]]:
    """Per row, words for the mixture's heaviest path and its weight; "none" where no path carries
    the forecast (no data, no limit, too few readings)."""
    n = len(rows.code)
    spans = (rows.code == O_CROSSING) | (rows.code == O_NO_CROSSING) | (rows.code == O_PAST_LIMIT)
    if fc.path is None or fc.mixture is None:
        return ["none"] * n, [None] * n
    has = spans & (fc.path >= 0)
    idx = np.maximum(fc.path, 0)
    share = np.where(has, fc.mixture.weights[np.arange(n), idx], np.nan).tolist()
    words = [paths.PATH_WORDS[lam] for lam in paths.LAMBDAS]
    return ([words[k] if h else "none" for k, h in zip(idx.tolist(), has.tolist())],
            [None if v != v else v for v in share])


def _dates(ordinals: list[int]) -> list[date | None]:
    """The date of each day ordinal (None for -1), one date object per distinct day."""
    made: dict[int, date | None] = {-1: None}
    return [made[d] if d in made else made.setdefault(d, date.fromordinal(d)) for d in ordinals]


def pump_records(serials: list[str], models: list[PumpModel], pk: FleetPack, fit: BatchFit, rows: RowFigures,
                 kinds: list[KindForecast], today: date, sites: dict[str, str],
                 thresholds: StatusThresholds | None) -> list[PumpForecast]:  # fmt: skip
    """One PumpForecast per pump: where it sits, its kinds, the worst of them and its status."""
    worst = _worst(pk, rows, len(serials))
    status = _statuses(pk, fit, rows, len(serials), today, thresholds)
    out = []
    for p, serial in enumerate(serials):
        cur = pk.pump_current[p]
        mine = tuple(kinds[KINDS * p : KINDS * p + KINDS])
        out.append(PumpForecast(
            serial=serial, model=models[p].code, machine=cur.machine if cur else None,
            position=cur.position if cur else None, site=sites.get(cur.machine) if cur else None,
            hours_since_overhaul=pk.since_overhaul[p], hours_per_day=pk.per_day[p], kinds=mine,
            worst=mine[worst[p]] if worst[p] >= 0 else None, status=status[p], last_reading_on=pk.last_on[p],
            utilisation_basis=pk.basis[p] if pk.basis else "",
        ))  # fmt: skip
    return out


def _statuses(pk: FleetPack, fit: BatchFit, rows: RowFigures, n_pumps: int, today: date, thresholds) -> list[str]:
    if not n_pumps:
        return []
    day = np.where(rows.days >= 0, rows.days + today.toordinal(), np.nan)
    shape = (n_pumps, KINDS)
    outcome = np.array([OUTCOMES[c].value for c in rows.code.tolist()], dtype=object).reshape(shape)
    return pump_statuses(outcome, (fit.flags & B_STEP).astype(bool).reshape(shape),
                         (fit.flags & B_JUMP).astype(bool).reshape(shape), day[:, 0].reshape(shape),
                         rows.remaining[:, 0].reshape(shape), floats(pk.per_day), today, thresholds)  # fmt: skip


def _worst(pk: FleetPack, rows: RowFigures, n_pumps: int) -> list[int]:
    """Per pump, the kind ``status.worst_kinds`` picks; progress = latest value over the limit."""
    limit = floats([np.nan if lim is None else lim.value for lim in pk.limits])
    below = np.array([lim is not None and lim.direction == "below" for lim in pk.limits], dtype=bool)
    has_limit = np.array([lim is not None for lim in pk.limits], dtype=bool)
    last = np.maximum(pk.bounds[1:] - 1, 0)
    latest = np.where(np.diff(pk.bounds) > 0, pk.y[last] if len(pk.y) else 0.0, 0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = np.where(limit != 0, latest / np.where(limit != 0, limit, 1.0), 0.0)
        progress = np.where(below, np.where(ratio != 0, 1.0 / np.where(ratio != 0, ratio, 1.0), 0.0), ratio)
    progress = np.where(latest != 0, progress, 0.0)
    candidate = has_limit & (rows.code != O_NO_DATA) & (rows.code != O_NO_LIMIT)
    shape = (n_pumps, KINDS)
    return worst_kinds(rows.code.reshape(shape), candidate.reshape(shape), progress.reshape(shape),
                       rows.days[:, 0].reshape(shape), rows.remaining[:, 0].reshape(shape), O_PAST_LIMIT,
                       O_CROSSING)  # fmt: skip


def shown_fit(fit: BatchFit) -> np.ndarray:
    """Per row, whether it has a fitted line to show (a ``FitDetail``): a chosen path with a finite slope."""
    return (fit.path != 0) & np.isfinite(fit.b)


def fit_details(pk: FleetPack, fit: BatchFit, detail: np.ndarray, fc: BatchForecast | None = None) -> list[FitDetail | None]:
    """The chosen path of each row with a fitted line as a FitDetail (None elsewhere): its points in
    reading order, which the fit used, the parameters and their covariance on the fitted scale."""
    rows = np.flatnonzero(detail)
    out: list[FitDetail | None] = [None] * len(detail)
    if not rows.size:
        return out
    count = np.diff(pk.bounds)
    take = np.repeat(detail, count)  # entries of the rows with a detail
    entry_row = np.repeat(np.arange(len(detail)), count)[take]
    xs, ys = pk.x[take].tolist(), pk.y[take].tolist()
    used = (fit.weights[entry_row, pk.rank[take]] > 0).tolist()
    bounds = np.r_[0, np.cumsum(count[rows])]
    spans = list(map(slice, bounds[:-1].tolist(), bounds[1:].tolist()))
    days = pk.day[take].tolist()
    x_t, y_t, used_t, d_t = (list(map(tuple, map(v.__getitem__, spans))) for v in (xs, ys, used, days))
    sigma = np.where(np.isfinite(fit.sigma), fit.sigma, 0.0)
    dof = np.minimum(fit.dof, 10**6).astype(np.int64)
    cols = [v[rows].tolist() for v in (fit.a, fit.b, fit.c00, fit.c01, fit.c11, sigma, dof)]
    names = [PATH_NAMES[c] for c in fit.path[rows].tolist()]
    mixture = fc.mixture if fc is not None else None
    for r, x, y, u, days_r, name, a, b, c00, c01, c11, s, d in zip(rows.tolist(), x_t, y_t, used_t, d_t, names, *cols):
        keep = mixture is not None and fc is not None and fc.path is not None and bool(mixture.ok[r]) and fc.path[r] >= 0
        out[r] = FitDetail(x_hours=x, y_value=y, used=u, path=name, params=(a, b), cov=((c00, c01), (c01, c11)),
                           sigma=s, dof=d, mixture=mixture if keep else None, row=r if keep else -1, x_days=days_r)  # fmt: skip
    return out
