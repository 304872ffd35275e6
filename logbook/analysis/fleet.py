"""Forecast a whole fleet in one batch: series packed into (S, N) arrays, fitted at once.

Packing (``packing``, ``utilisation``) and the fit and forecast (``fit.fit_batch``,
``forecast.forecast_batch``) are array steps over the whole fleet; the one loop over
pumps builds the result records. A remaining-hours quantile beyond the horizon is
reported as None (no date).
"""

from __future__ import annotations

from dataclasses import replace
from datetime import date

import numpy as np

from logbook.analysis.arrays import NEVER, floats
from logbook.analysis.batch import TrendBatch
from logbook.analysis.calendar import hours_per_day, machine_hour_points
from logbook.analysis.fit import (
    B_JUMP,
    B_OUTLIER,
    B_POOLED,
    B_STEP,
    PATH_NAMES,
    BatchFit,
    FitOptions,
    fit_batch,
)
from logbook.analysis.forecast import (
    O_CROSSING,
    O_NO_CROSSING,
    O_NO_DATA,
    O_NO_LIMIT,
    O_PAST_LIMIT,
    O_TOO_FEW,
    forecast_batch,
)
from logbook.analysis.packing import FleetArrays, FleetPack, pack
from logbook.analysis.results import (
    FLAG_JUMP,
    FLAG_OUTLIER,
    FLAG_POOLED,
    FLAG_STEP,
    FitDetail,
    FleetForecast,
    KindForecast,
    Outcome,
    PumpForecast,
)
from logbook.analysis.status import StatusThresholds, pump_statuses
from logbook.analysis.utilisation import machine_points, utilisation
from logbook.model import ALL_KINDS, Fleet, PumpHistory, PumpModel

DEFAULT_HORIZON_HOURS = 20_000.0
_OUTCOMES = [Outcome.NO_DATA, Outcome.NO_LIMIT, Outcome.PAST_LIMIT, Outcome.TOO_FEW, Outcome.CROSSING, Outcome.NO_CROSSING]
_FLAGS = ((B_OUTLIER, FLAG_OUTLIER), (B_STEP, FLAG_STEP), (B_POOLED, FLAG_POOLED), (B_JUMP, FLAG_JUMP))
_FLAG_SETS = [frozenset(name for bit, name in _FLAGS if bits & bit) for bits in range(16)]


def _fleet_pack(fleet: Fleet, today: date) -> tuple[list[str], list[PumpModel], FleetPack]:
    """Pumps to forecast (fitted now, or unfitted with readings; by serial), their models and the packed batch."""
    arrays = FleetArrays(fleet.fitments, fleet.readings, fleet.events)
    current = arrays.latest
    fits = arrays.fits
    known = set(np.unique(arrays.serial[current]).tolist()) | set(fits.serial[fits.removed == NEVER].tolist())
    index = arrays.serial_index
    serials = [s for s in sorted(fleet.pumps) if index.get(s, -1) in known]
    models = [fleet.models[fleet.pumps[s].model] for s in serials]
    now_at = [i for i in fits.current([index[s] for s in serials]) if i >= 0]
    wanted = sorted(set(fits.machine[now_at].tolist()))
    points = machine_points(fits, arrays.meters, fleet.events, arrays.machine_index, arrays.fit, arrays.day,
                            arrays.meter, arrays.cont)  # fmt: skip
    per_day = utilisation(*points, wanted, today)
    names = {c: m for m, c in arrays.machine_index.items()}
    util = {names[c]: v for c, v in per_day.items()}
    return serials, models, pack(arrays, serials, models, util, today, use=current)


def fleet_batch(fleet: Fleet, today: date) -> TrendBatch | None:
    """The batch that ``forecast_fleet`` fits (for benchmarks); None for a fleet with nothing to forecast."""
    serials, _, pk = _fleet_pack(fleet, today)
    return pk.batch if serials else None


def forecast_histories(
    histories: list[PumpHistory],
    today: date,
    utilisation: dict[str, float | None],
    *,
    horizon_hours: float = DEFAULT_HORIZON_HOURS,
    options: FitOptions | None = None,
    thresholds: StatusThresholds | None = None,
    with_noise: bool = False,
) -> list[PumpForecast]:
    """Forecast the given pumps together (pooling within each pump model and kind)."""
    if not histories:
        return []
    events, seen = [], set()
    for h in histories:
        for e in h.events:
            if id(e) not in seen:
                seen.add(id(e))
                events.append(e)
    arrays = FleetArrays([f for h in histories for f in h.fitments], [r for h in histories for r in h.readings], events)
    serials, models = [h.pump.serial for h in histories], [h.model for h in histories]
    pk = pack(arrays, serials, models, utilisation, today)
    return _forecasts(serials, models, pk, today, {}, horizon_hours, options, thresholds, with_noise)


def _forecasts(serials, models, pk: FleetPack, today, sites, horizon_hours, options, thresholds, with_noise):
    """Fit and forecast the packed batch, then one PumpForecast per pump (the only loop over pumps)."""
    batch = pk.batch
    fit = fit_batch(batch, options)
    fc = forecast_batch(batch, fit, horizon_hours=horizon_hours, with_noise=with_noise)
    n_pumps = len(serials)
    count = np.diff(pk.bounds)
    code = np.where((fc.outcome == O_NO_DATA) & (pk.before > 0), O_TOO_FEW, fc.outcome)
    outcome = [_OUTCOMES[c] for c in code.tolist()]
    detail = (fit.path != 0) & np.isfinite(fit.b)
    spans = (code == O_CROSSING) | (code == O_NO_CROSSING)
    rem = np.where(spans[:, None] & np.isfinite(fc.remaining), fc.remaining, np.nan)
    rate_rows = np.repeat(floats(pk.per_day), 3)
    days = _days_ahead(rem, rate_rows)  # (S, 3) days from today, -1 for no date
    base = today.toordinal()
    when = [[date.fromordinal(base + d) if d >= 0 else None for d in col] for col in days.T.tolist()]
    hours = [[None if v != v else v for v in col] for col in rem.T.tolist()]
    with np.errstate(invalid="ignore"):
        rate = np.where(detail & np.isfinite(fc.rate_per_hour), fc.rate_per_hour * 1000.0, np.nan).tolist()
    has = (count > 0).tolist()
    last = np.maximum(pk.bounds[1:] - 1, 0)
    empty = not len(pk.y)
    latest_y = [None] * len(has) if empty else pk.y[last].tolist()
    latest_raw = [None] * len(has) if empty else pk.raw[last].tolist()
    latest_day = [0] * len(has) if empty else pk.day[last].tolist()
    fits = _details(pk, fit, detail)
    flags = [_FLAG_SETS[b] for b in (fit.flags & 15).tolist()]
    path = [PATH_NAMES[c] if d else "none" for c, d in zip(fit.path.tolist(), detail.tolist())]
    x_now, counts = batch.x_now.tolist(), count.tolist()
    kind_rows = []
    for i, serial in enumerate(np.repeat(serials, 3).tolist() if n_pumps else []):
        seen = has[i]
        kind_rows.append(KindForecast(**{
            "serial": serial, "kind": ALL_KINDS[i % 3], "limit": pk.limits[i], "outcome": outcome[i],
            "latest_value": latest_y[i] if seen else None, "latest_raw": latest_raw[i] if seen else None,
            "latest_on": date.fromordinal(latest_day[i]) if seen else None, "n_readings": counts[i],
            "segment_start": pk.start_on[i], "hours_in_segment": x_now[i], "path": path[i],
            "p10_hours": hours[0][i], "p50_hours": hours[1][i], "p90_hours": hours[2][i],
            "p10_date": when[0][i], "p50_date": when[1][i], "p90_date": when[2][i], "flags": flags[i],
            "fit": fits[i], "rate_per_1000h": None if rate[i] != rate[i] else rate[i],
        }))  # fmt: skip
    worst = _worst_rows(pk, code, rem, days, n_pumps)
    status = pump_statuses(
        np.array([o.value for o in outcome], dtype=object).reshape(n_pumps, 3), (fit.flags & B_STEP).astype(bool).reshape(n_pumps, 3),
        np.where(days >= 0, days + base, np.nan)[:, 0].reshape(n_pumps, 3),
        np.where(days >= 0, days + base, np.nan)[:, 1].reshape(n_pumps, 3),
        rem[:, 0].reshape(n_pumps, 3), rem[:, 1].reshape(n_pumps, 3), floats(pk.per_day), today, thresholds,
    ) if n_pumps else []  # fmt: skip
    out = []
    for p, serial in enumerate(serials):
        cur = pk.pump_current[p]
        kinds = tuple(kind_rows[3 * p : 3 * p + 3])
        out.append(PumpForecast(**{
            "serial": serial, "model": models[p].code, "machine": cur.machine if cur else None,
            "position": cur.position if cur else None, "site": sites.get(cur.machine) if cur else None,
            "hours_since_overhaul": pk.since_overhaul[p], "hours_per_day": pk.per_day[p], "kinds": kinds,
            "worst": kinds[worst[p]] if worst[p] >= 0 else None, "status": status[p], "last_reading_on": pk.last_on[p],
        }))  # fmt: skip
    return out


def _days_ahead(remaining: np.ndarray, per_day: np.ndarray) -> np.ndarray:
    """``calendar.date_after_hours`` as whole days from today for (S, Q) remaining hours (NaN = none); -1 for no date."""
    with np.errstate(invalid="ignore", divide="ignore"):
        days = remaining / per_day[:, None]
        ok = np.isfinite(remaining) & (per_day[:, None] > 0) & ~(days > 366 * 200)
        step = np.ceil(np.where(ok, days, 0.0) - 1e-9)
    return np.where(ok, step, -1).astype(np.int64)


def _worst_rows(pk: FleetPack, code: np.ndarray, rem: np.ndarray, days: np.ndarray, n_pumps: int) -> list[int]:
    """Per pump, the kind ``_worst`` picks (-1 for none): past limit first, then the earliest P50 (date,
    else hours), then the nearest to its limit; the first such kind on a tie."""
    limit = floats([np.nan if lim is None else lim.value for lim in pk.limits])
    below = np.array([lim is not None and lim.direction == "below" for lim in pk.limits], dtype=bool)
    has_limit = np.array([lim is not None for lim in pk.limits], dtype=bool)
    last = np.maximum(pk.bounds[1:] - 1, 0)
    latest = np.where(np.diff(pk.bounds) > 0, pk.y[last] if len(pk.y) else 0.0, 0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = np.where(limit != 0, latest / np.where(limit != 0, limit, 1.0), 0.0)
        progress = np.where(below, np.where(ratio != 0, 1.0 / np.where(ratio != 0, ratio, 1.0), 0.0), ratio)
    progress = np.where(latest != 0, progress, 0.0)
    past, crossing = code == O_PAST_LIMIT, code == O_CROSSING
    k0 = np.where(past, 0, np.where(crossing, 1, 2)).astype(float).reshape(n_pumps, 3)
    k1 = np.where(past, 0.0, np.where(crossing, np.where(days[:, 1] >= 0, days[:, 1], np.inf), -progress))
    k2 = np.where(crossing, np.nan_to_num(rem[:, 1], nan=0.0), 0.0)
    k1, k2 = k1.reshape(n_pumps, 3), k2.reshape(n_pumps, 3)
    cand = (has_limit & (code != O_NO_DATA) & (code != O_NO_LIMIT)).reshape(n_pumps, 3)
    best = np.where(cand[:, 0], 0, -1)
    for j in (1, 2):
        b = np.maximum(best, 0)
        rows = np.arange(n_pumps)
        b0, b1, b2 = k0[rows, b], k1[rows, b], k2[rows, b]
        less = (k0[:, j] < b0) | ((k0[:, j] == b0) & ((k1[:, j] < b1) | ((k1[:, j] == b1) & (k2[:, j] < b2))))
        best = np.where(cand[:, j] & ((best < 0) | less), j, best)
    return best.tolist()


def _details(pk: FleetPack, fit: BatchFit, detail: np.ndarray) -> list[FitDetail | None]:
    """The chosen path of each row with a fitted line as a FitDetail (None elsewhere), as ``fit_detail`` builds it."""
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
    x_t, y_t, used_t = (list(map(tuple, map(v.__getitem__, spans))) for v in (xs, ys, used))
    sigma = np.where(np.isfinite(fit.sigma), fit.sigma, 0.0)
    dof = np.minimum(fit.dof, 10**6).astype(np.int64)
    cols = [v[rows].tolist() for v in (fit.a, fit.b, fit.c00, fit.c01, fit.c11, sigma, dof)]
    names = [PATH_NAMES[c] for c in fit.path[rows].tolist()]
    for r, x, y, u, name, a, b, c00, c01, c11, s, d in zip(rows.tolist(), x_t, y_t, used_t, names, *cols):
        out[r] = FitDetail(**{"x_hours": x, "y_value": y, "used": u, "path": name, "params": (a, b),
                                     "cov": ((c00, c01), (c01, c11)), "sigma": s, "dof": d})  # fmt: skip
    return out


def fit_detail(fit: BatchFit, row: int, x_hours, y_value) -> FitDetail | None:
    """The chosen path of one batch row as a FitDetail (for charts); None without a fitted line."""
    if fit.path[row] == 0 or not np.isfinite(fit.b[row]):
        return None
    n = len(x_hours)
    order = np.argsort(np.asarray(x_hours, dtype=float), kind="stable")  # batch columns are in x order
    used = np.zeros(n, dtype=bool)
    used[order] = fit.used[row, :n]
    sigma = float(fit.sigma[row]) if np.isfinite(fit.sigma[row]) else 0.0
    c00, c01, c11 = float(fit.c00[row]), float(fit.c01[row]), float(fit.c11[row])
    return FitDetail(
        x_hours=tuple(float(v) for v in x_hours),
        y_value=tuple(float(v) for v in y_value),
        used=tuple(bool(u) for u in used),
        path=PATH_NAMES[int(fit.path[row])],
        params=(float(fit.a[row]), float(fit.b[row])),
        cov=((c00, c01), (c01, c11)),
        sigma=sigma,
        dof=int(min(fit.dof[row], 10**6)),
    )


def forecast_fleet(
    fleet: Fleet,
    today: date,
    horizon_hours: float = DEFAULT_HORIZON_HOURS,
    *,
    options: FitOptions | None = None,
    thresholds: StatusThresholds | None = None,
    with_noise: bool = False,
) -> FleetForecast:
    """Forecast every pump in service (and unfitted pumps with readings), worst kind and status per pump."""
    serials, models, pk = _fleet_pack(fleet, today)
    sites = {unit: m.site for unit, m in fleet.machines.items()}
    pumps = _forecasts(serials, models, pk, today, sites, horizon_hours, options, thresholds, with_noise) if serials else []
    notes = (f"horizon {horizon_hours:,.0f} operating hours; quantiles beyond it are left blank",)
    return FleetForecast(today=today, pumps=tuple(pumps), source=fleet.source, notes=notes)


def forecast_pump(
    history: PumpHistory,
    today: date,
    horizon_hours: float = DEFAULT_HORIZON_HOURS,
    *,
    hours_per_day_now: float | None = None,
    options: FitOptions | None = None,
    thresholds: StatusThresholds | None = None,
) -> PumpForecast:
    """One pump on its own (no fleet pooling), through the same batch code as the fleet."""
    current = next((f for f in history.fitments if f.removed_on is None), None)
    per_day = hours_per_day_now
    if per_day is None and current is not None:
        pts = machine_hour_points(history.fitments, history.readings, history.events).get(current.machine, [])
        per_day = hours_per_day(pts, today)
    util = {current.machine: per_day} if current is not None else {}
    opt = options or FitOptions(pool=False)
    (pf,) = forecast_histories([history], today, util, horizon_hours=horizon_hours, options=opt, thresholds=thresholds)
    return pf


def forecast_in_fleet(fleet: Fleet, serial: str, today: date, **kwargs) -> PumpForecast:
    """One pump forecast exactly as the fleet view shows it: pooled with the other pumps
    of its model (pooling never crosses models, so only they are fitted)."""
    model = fleet.pumps[serial].model
    subset = replace(fleet, pumps={s: p for s, p in fleet.pumps.items() if p.model == model or s == serial})
    forecast = forecast_fleet(subset, today, **kwargs)
    found = forecast.pump(serial)
    if found is None:  # on the shelf with no readings: forecast on its own
        return forecast_pump(fleet.history(serial), today)
    return found


__all__ = [
    "DEFAULT_HORIZON_HOURS", "fit_detail", "forecast_fleet", "forecast_histories", "forecast_in_fleet", "forecast_pump",
]
