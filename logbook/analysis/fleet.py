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
from logbook.analysis.fit import B_JUMP, B_OUTLIER, B_POOLED, B_STEP, PATH_NAMES, BatchFit, FitOptions, fit_batch
from logbook.analysis.forecast import O_CROSSING, O_NO_CROSSING, O_NO_DATA, O_TOO_FEW, forecast_batch
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
from logbook.analysis.status import StatusThresholds, pump_status
from logbook.analysis.utilisation import machine_points, utilisation
from logbook.model import ALL_KINDS, Fleet, PumpHistory, PumpModel

DEFAULT_HORIZON_HOURS = 20_000.0
_OUTCOMES = [Outcome.NO_DATA, Outcome.NO_LIMIT, Outcome.PAST_LIMIT, Outcome.TOO_FEW, Outcome.CROSSING, Outcome.NO_CROSSING]
_FLAGS = ((B_OUTLIER, FLAG_OUTLIER), (B_STEP, FLAG_STEP), (B_POOLED, FLAG_POOLED), (B_JUMP, FLAG_JUMP))
_FLAG_SETS = [frozenset(name for bit, name in _FLAGS if bits & bit) for bits in range(16)]


def _fleet_pack(fleet: Fleet, today: date) -> tuple[list[str], list[PumpModel], FleetPack]:
    """Pumps to forecast (fitted now, or unfitted with readings; by serial), their models and the packed batch."""
    arrays = FleetArrays(fleet.fitments, fleet.readings, fleet.events)
    current = np.fromiter((r.superseded_by is None for r in fleet.readings), dtype=bool, count=len(fleet.readings))
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
    n_rows = batch.size
    outcome = fc.outcome.astype(np.int64)
    count = np.diff(pk.bounds)
    outcome = np.where((outcome == O_NO_DATA) & (pk.before > 0), O_TOO_FEW, outcome)
    detail = (fit.path != 0) & np.isfinite(fit.b)
    spans = (outcome == O_CROSSING) | (outcome == O_NO_CROSSING)
    rem = np.where(spans[:, None] & np.isfinite(fc.remaining), fc.remaining, np.nan)
    rem_list = [[None if v != v else v for v in col] for col in rem.T.tolist()]
    day_lists = [_dates(today, col, pk.per_day) for col in rem.T]
    with np.errstate(invalid="ignore"):
        rate = np.where(detail & np.isfinite(fc.rate_per_hour), fc.rate_per_hour * 1000.0, np.nan).tolist()
    has = count > 0
    last = np.maximum(pk.bounds[1:] - 1, 0)
    latest_y = np.where(has, pk.y[last], np.nan).tolist() if len(pk.y) else [None] * n_rows
    latest_raw = np.where(has, pk.raw[last], np.nan).tolist() if len(pk.y) else [None] * n_rows
    latest_day = np.where(has, pk.day[last], 0).tolist() if len(pk.y) else [0] * n_rows
    fits = _details(pk, fit, detail)
    flags = [_FLAG_SETS[b] for b in (fit.flags & 15).tolist()]
    path = [PATH_NAMES[c] if d else "none" for c, d in zip(fit.path.tolist(), detail.tolist())]
    x_now = batch.x_now.tolist()
    out = []
    for p, serial in enumerate(serials):
        kinds = []
        for k, kind in enumerate(ALL_KINDS):
            i = 3 * p + k
            seen = bool(has[i])
            kinds.append(KindForecast(
                serial=serial, kind=kind, limit=pk.limits[i], outcome=_OUTCOMES[outcome[i]],
                latest_value=latest_y[i] if seen else None, latest_raw=latest_raw[i] if seen else None,
                latest_on=date.fromordinal(latest_day[i]) if seen else None, n_readings=int(count[i]),
                segment_start=pk.start_on[i], hours_in_segment=x_now[i], path=path[i],
                p10_hours=rem_list[0][i], p50_hours=rem_list[1][i], p90_hours=rem_list[2][i],
                p10_date=day_lists[0][i], p50_date=day_lists[1][i], p90_date=day_lists[2][i],
                flags=flags[i], fit=fits[i], rate_per_1000h=None if rate[i] != rate[i] else rate[i],
            ))  # fmt: skip
        kinds = tuple(kinds)
        cur = pk.pump_current[p]
        pf = PumpForecast(
            serial=serial, model=models[p].code, machine=cur.machine if cur else None,
            position=cur.position if cur else None, site=sites.get(cur.machine) if cur else None,
            hours_since_overhaul=pk.since_overhaul[p], hours_per_day=pk.per_day[p], kinds=kinds,
            worst=_worst(kinds), last_reading_on=pk.last_on[p],
        )  # fmt: skip
        out.append(replace(pf, status=pump_status(pf, today, thresholds)))
    return out


def _dates(today: date, remaining: np.ndarray, per_day: list[float | None]) -> list[date | None]:
    """``calendar.date_after_hours`` for a column of remaining hours (NaN = none) at each pump's rate."""
    rate = np.repeat(floats(per_day), 3)
    with np.errstate(invalid="ignore", divide="ignore"):
        days = remaining / rate
        ok = np.isfinite(remaining) & (rate > 0) & ~(days > 366 * 200)
        step = np.ceil(np.where(ok, days, 0.0) - 1e-9).astype(np.int64)
    base = today.toordinal()
    return [date.fromordinal(base + d) if k else None for d, k in zip(step.tolist(), ok.tolist())]


def _details(pk: FleetPack, fit: BatchFit, detail: np.ndarray) -> list[FitDetail | None]:
    """The chosen path of each row with a fitted line as a FitDetail (None elsewhere), as ``fit_detail`` builds it."""
    rows = np.flatnonzero(detail)
    out: list[FitDetail | None] = [None] * len(detail)
    if not rows.size:
        return out
    xs, ys = pk.x.tolist(), pk.y.tolist()
    used = (fit.weights[np.repeat(np.arange(len(detail)), np.diff(pk.bounds)), pk.rank] > 0).tolist()
    bounds = pk.bounds.tolist()
    sigma = np.where(np.isfinite(fit.sigma), fit.sigma, 0.0)
    dof = np.minimum(fit.dof, 10**6).astype(np.int64)
    cols = [v[rows].tolist() for v in (fit.path, fit.a, fit.b, fit.c00, fit.c01, fit.c11, sigma, dof)]
    for r, code, a, b, c00, c01, c11, s, d in zip(rows.tolist(), *cols):
        lo, hi = bounds[r], bounds[r + 1]
        out[r] = FitDetail(x_hours=tuple(xs[lo:hi]), y_value=tuple(ys[lo:hi]), used=tuple(used[lo:hi]),
                           path=PATH_NAMES[code], params=(a, b), cov=((c00, c01), (c01, c11)), sigma=s, dof=d)  # fmt: skip
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


def _worst(kinds: tuple[KindForecast, ...]) -> KindForecast | None:
    """Past limit first, then the earliest P50 (date, else hours), then the nearest to its limit."""

    def key(k: KindForecast):
        if k.outcome is Outcome.PAST_LIMIT:
            return (0, 0.0, 0.0)
        if k.outcome is Outcome.CROSSING:
            d = k.p50_date.toordinal() if k.p50_date else float("inf")
            return (1, d, k.p50_hours or 0.0)
        progress = 0.0
        if k.limit is not None and k.latest_value:
            ratio = k.latest_value / k.limit.value if k.limit.value else 0.0
            progress = ratio if k.limit.direction != "below" else (1 / ratio if ratio else 0.0)
        return (2, -progress, 0.0)

    cands = [k for k in kinds if k.limit is not None and k.outcome not in (Outcome.NO_DATA, Outcome.NO_LIMIT)]
    return min(cands, key=key) if cands else None


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
