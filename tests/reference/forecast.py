"""Reference forecast of a fleet, one pump at a time: the specification of the engine's array steps.

One ``PumpHistory`` per pump, ``segments.build_series`` per pump and kind, the batch
fit and forecast of the engine (``TrendBatch.pack``, ``fit_batch``, ``forecast_batch``:
the core both share), then one ``KindForecast`` at a time with this package's
utilisation, dates, worst kind and status. ``tests/unit/test_fleet_equivalence.py``
checks the engine against it.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from datetime import date, timedelta

import numpy as np

from logbook.analysis import paths
from logbook.analysis.batch import FALLING, RISING, TrendBatch
from logbook.analysis.fit import (
    PATH_NAMES,
    BatchFit,
    FitOptions,
    fit_batch,
)
from logbook.analysis.fleet import DEFAULT_HORIZON_HOURS
from logbook.analysis.forecast import BatchForecast, forecast_batch
from logbook.analysis.records import FLAGS, OUTCOMES  # tables of names for the batch's codes, not rules
from logbook.analysis.results import (
    FitDetail,
    FleetForecast,
    KindForecast,
    Outcome,
    PumpForecast,
)
from logbook.analysis.status import StatusThresholds
from logbook.model import ALL_KINDS, Fleet, Kind, Limit, PumpHistory
from tests.reference.calendar import (
    dates_with_spread,
    fleet_spreads,
    hours_per_day,
    is_pattern,
    machine_hour_points,
    meter_standstills,
    month_rates,
    parked_spans,
    pattern_months,
    rate_spread,
    running_day,
    seasonal_date,
    standstill_spans,
    whole_year_rate,
    year_average,
)
from tests.reference.segments import Series, build_series, reading_pump_hours
from tests.reference.status import pump_status


@dataclass
class _Row:
    history: PumpHistory
    series: Series
    limit: Limit | None
    x_now: float


def _histories(fleet: Fleet, model: str | None = None) -> list[PumpHistory]:
    """Histories of pumps fitted now, plus unfitted pumps that have readings; only pumps
    of ``model`` when given."""
    serials = [s for s, p in sorted(fleet.pumps.items()) if model is None or p.model == model]
    return [h for h in fleet.histories(serials) if h.readings or any(f.removed_on is None for f in h.fitments)]


def _direction(kind: Kind, limit: Limit | None) -> int:
    """Toward a lower limit the value falls; without a limit servo pressure falls, the others rise."""
    if limit is not None:
        return FALLING if limit.direction == "below" else RISING
    return FALLING if kind is Kind.SERVO_PRESSURE else RISING


@dataclass(frozen=True)
class Use:
    """How a machine's hours run ahead: hours a day, parked since, month rates, the forecast's words."""

    per_day: float | None
    parked_on: date | None = None
    months: tuple[float, ...] | None = None
    words: str = ""
    rate_spans: tuple = ()  # the spans its rates leave out: parked and (unless a pattern) stood still


_MONTHS = ("Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec")


def machine_use(points, spans, today: date) -> Use:
    """A machine parked now is assumed to restart tomorrow at its rate on running days; a machine run by
    season (and with a positive rate) runs at its month rates, its hours a day their year average; days the
    meter shows it stood still are not running days, unless it stood still in two different years: then
    (without month rates) its hours a day are its average over whole years."""
    spans = tuple(spans)
    found = meter_standstills(points, today, spans)
    pattern = is_pattern(found)
    rate_spans = spans + (() if pattern else tuple(standstill_spans(found)))
    rate = hours_per_day(points, today, spans=rate_spans)
    months = month_rates(points, today) if rate else None
    by_years = False
    if pattern and months is None and rate is not None:
        whole = whole_year_rate(points, today)
        if whole is not None:
            rate, by_years = whole, True
            if whole > 0:
                months = pattern_months(found, whole)
    per_day = year_average(months) if months is not None else rate
    parked = next((start for start, end in spans if start <= today and (end is None or today < end)), None)
    words = []
    if parked is not None:
        restart = f"at {per_day:.1f} h a day" if per_day else "(no hours a day known)"
        words.append(f"parked since {parked.isoformat()}: no hours counted since; dates assume it restarts tomorrow "
                     f"{restart}")
    if by_years:
        spells = ", ".join(f"{a.isoformat()} to {b.isoformat()}" for a, b, _ in found[-2:])
        if len(found) > 2:
            spells = f"{len(found)} spells, the last {spells}"
        words.append(f"its hour meter stood nearly still in more than one year ({spells}): taken as its pattern, "
                     f"dates count each month at its share of those spells, {per_day:.1f} h a day over whole years")
    if not pattern and months is None:
        for a, b, lost in found:
            if b.toordinal() > today.toordinal() - 365:
                words.append(f"stood still about {lost} of the {(b - a).days} days from {a.isoformat()} to "
                             f"{b.isoformat()} by its hour meter: not counted in its hours a day")
    if months is not None and not by_years:
        low = [_MONTHS[i] for i, r in enumerate(months) if r < 0.2 * (per_day or 0.0)]
        words.append(f"runs by season (near-zero use in {', '.join(low)} each year): dates count each month at its "
                     f"own rate, {per_day:.1f} h a day over the year")
    return Use(per_day, parked, months, "; ".join(words), rate_spans)


def reference_uses(fleet_or_points, events, today: date) -> dict[str, Use]:
    spans = parked_spans(events)
    return {m: machine_use(p, spans.get(m, ()), today) for m, p in fleet_or_points.items()}


def reference_pack(histories: list[PumpHistory], today: date, utilisation: dict[str, float | None],
                   uses: dict[str, Use] | None = None):
    """(rows, pump_info, batch) of the given pumps, packed one pump at a time; batch None without rows."""
    rows: list[_Row] = []
    groups: dict[tuple[str, Kind], int] = {}
    pump_info = []
    events = list({id(e): e for h in histories for e in h.events}.values())
    spans = parked_spans(events)
    for h in histories:
        hours_of = {i: reading_pump_hours(r, h) for i, r in enumerate(h.readings)}
        current = next((f for f in h.fitments if f.removed_on is None), None)
        per_day = utilisation.get(current.machine) if current is not None else None
        last_on = h.readings[-1].taken_on if h.readings else None
        use = (uses or {}).get(current.machine) if current is not None else None
        pump_now = _pump_hours_today(h, hours_of, current, per_day, today,
                                     spans.get(current.machine, ()) if current is not None else (), use)
        pump_info.append((h, current, per_day, last_on, pump_now))
        for kind in ALL_KINDS:
            s = build_series(h, kind, hours_of)
            x_now = (pump_now - s.start_hours) if pump_now is not None else (s.x_hours[-1] if s.x_hours else 0.0)
            rows.append(_Row(h, s, h.model.limit(kind), max(x_now, s.x_hours[-1] if s.x_hours else 0.0)))
            groups.setdefault((h.model.code, kind), len(groups))
    if not rows:
        return rows, pump_info, None
    batch = TrendBatch.pack(
        [(r.series.x_hours, r.series.y_value) for r in rows],
        limit=[r.limit.value if r.limit is not None else np.nan for r in rows],
        direction=[_direction(r.series.kind, r.limit) for r in rows],
        group=[groups[(r.history.model.code, r.series.kind)] for r in rows],
        x_now=[r.x_now for r in rows],
    )
    return rows, pump_info, batch


def reference_utilisation(fleet: Fleet, today: date) -> dict[str, float | None]:
    """Hours per day of every machine, one machine at a time (parked days left out, seasons' year average)."""
    points = machine_hour_points(fleet.fitments, fleet.readings, fleet.events)
    return {m: u.per_day for m, u in reference_uses(points, fleet.events, today).items()}


def reference_fleet_batch(fleet: Fleet, today: date) -> TrendBatch | None:
    """The batch that ``reference_forecast_fleet`` fits (for the benchmark's core timing)."""
    return reference_pack(_histories(fleet), today, reference_utilisation(fleet, today))[2]


def reference_forecast_histories(
    histories: list[PumpHistory],
    today: date,
    utilisation: dict[str, float | None],
    *,
    horizon_hours: float = DEFAULT_HORIZON_HOURS,
    options: FitOptions | None = None,
    thresholds: StatusThresholds | None = None,
    with_noise: bool = False,
    points: dict | None = None,
    uses: dict[str, Use] | None = None,
) -> list[PumpForecast]:
    """Forecast the given pumps together (pooling within each pump model and kind); ``points``: the
    machines' (date, continuous hours) points, from the histories' own records when not given."""
    rows, pump_info, batch = reference_pack(histories, today, utilisation, uses)
    events = list({id(e): e for h in histories for e in h.events}.values())
    if points is None:
        points = machine_hour_points([f for h in histories for f in h.fitments],
                                     [r for h in histories for r in h.readings], events)
    machines = {info[1].machine for info in pump_info if info[1] is not None}
    spans = parked_spans(events)
    uses = uses or {}
    spreads = fleet_spreads({m: rate_spread(points.get(m, ()), utilisation.get(m), today,
                                            spans=uses[m].rate_spans if m in uses else spans.get(m, ()),
                                            months=uses[m].months if m in uses else None) for m in sorted(machines)})
    if batch is None:
        return []
    fit = fit_batch(batch, options)
    fc = forecast_batch(batch, fit, horizon_hours=horizon_hours, with_noise=with_noise)
    out = []
    for p, (h, current, per_day, last_on, pump_now) in enumerate(pump_info):
        spread = spreads.get(current.machine) if current is not None else None
        use = uses.get(current.machine) if current is not None else None
        kinds = tuple(_kind_forecast(rows[3 * p + k], 3 * p + k, batch, fit, fc, today, per_day, spread,
                                     use.months if use is not None else None) for k in range(3))
        pf = PumpForecast(
            serial=h.pump.serial,
            model=h.model.code,
            machine=current.machine if current else None,
            position=current.position if current else None,
            site=None,
            hours_since_overhaul=None if pump_now is None else pump_now - _last_overhaul_hours(rows[3 * p]),
            hours_per_day=per_day,
            kinds=kinds,
            worst=_worst(kinds),
            last_reading_on=last_on,
            utilisation_basis=use.words if use is not None else "",
        )
        out.append(_with_status(pf, today, thresholds))
    return out


def _pump_hours_today(h, hours_of, current, per_day, today, spans=(), use: Use | None = None) -> float | None:
    """The newest reading's hours plus the machine's: its running days since at its rate (parked days
    count none), or for a machine run by season the month rates of each day since."""
    if not h.readings:
        return current.pump_hours_at_fit if current is not None else None
    last = max(hours_of.values())
    last_on = max(r.taken_on for r in h.readings)
    if current is None or per_day is None:
        return last
    if today <= last_on:
        return last + per_day * 0
    if spans:
        return last + per_day * (running_day(today, spans) - running_day(last_on, spans))
    if use is not None and use.months is not None and per_day > 0:
        days = [last_on + timedelta(i) for i in range((today - last_on).days)]
        return last + per_day * (sum(use.months[d.month - 1] for d in days) / per_day)
    return last + per_day * max((today - last_on).days, 0)


def _last_overhaul_hours(row: _Row) -> float:
    """Pump hours at the last overhaul/exchange (0 for a pump never overhauled)."""
    s = row.series  # case drain resets only at overhaul/exchange
    return s.start_hours if s.start is not None else 0.0


def _kind_forecast(row: _Row, i: int, batch: TrendBatch, fit: BatchFit, fc: BatchForecast, today, per_day, spread,
                   months=None):
    s = row.series
    outcome = OUTCOMES[int(fc.outcome[i])]
    if outcome is Outcome.NO_DATA and s.readings_before:
        outcome = Outcome.TOO_FEW
    flags = frozenset(name for bit, name in FLAGS if fit.flags[i] & bit)
    rem = [None if not np.isfinite(v) else float(v) for v in fc.remaining[i]]
    if outcome not in (Outcome.CROSSING, Outcome.NO_CROSSING):
        rem = [None, None, None]
    detail = _detail(s, i, fit)
    path_words = _path(i, fc, outcome)
    when = [seasonal_date(today, d, per_day, months) for d in dates_with_spread(today, rem, per_day, spread)]
    rate = float(fc.rate_per_hour[i]) * 1000.0 if detail is not None and np.isfinite(fc.rate_per_hour[i]) else None
    return KindForecast(
        serial=row.history.pump.serial,
        kind=s.kind,
        limit=row.limit,
        outcome=outcome,
        latest_value=s.y_value[-1] if s.y_value else None,
        latest_raw=s.raw[-1] if s.raw else None,
        latest_on=s.dates[-1] if s.dates else None,
        n_readings=len(s.x_hours),
        segment_start=s.start_on,
        hours_in_segment=float(batch.x_now[i]),
        path=path_words[0],
        p10_hours=rem[0],
        p50_hours=rem[1],
        p90_hours=rem[2],
        p10_date=when[0],
        p50_date=when[1],
        p90_date=when[2],
        flags=flags,
        fit=detail,
        rate_per_1000h=rate,
        path_share=path_words[1],
        calibrated_on=int(fc.calibrated_on[i]),
        percent_of_theoretical=_percent(row, s),
        not_used=s.not_used,
    )


def _percent(row: _Row, s: Series) -> float | None:
    """Case drain as % of theoretical flow, Q_th [L/min] = Vg [cm3/rev] x n [rpm] / 1000."""
    if s.kind is not Kind.CASE_DRAIN or not s.y_value:
        return None
    m = row.history.model
    return 100.0 * s.y_value[-1] / (m.displacement_cc * m.test_speed_rpm / 1000.0)


def _path(i: int, fc: BatchForecast, outcome: Outcome) -> tuple[str, float | None]:
    """Words for the heaviest path of the row's mixture and its weight, where a forecast was made."""
    k = int(fc.path[i])
    if outcome not in (Outcome.CROSSING, Outcome.NO_CROSSING, Outcome.PAST_LIMIT) or k < 0:
        return "none", None
    return paths.PATH_WORDS[paths.LAMBDAS[k]], float(fc.mixture.weights[i, k])


def _detail(s: Series, i: int, fit: BatchFit) -> FitDetail | None:
    return fit_detail(fit, i, s.x_hours, s.y_value)


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
    """Past limit first, then the earliest P10 (date, else hours: the plan schedules by it), then the
    nearest to its limit."""

    def key(k: KindForecast):
        if k.outcome is Outcome.PAST_LIMIT:
            return (0, 0.0, 0.0)
        if k.outcome is Outcome.CROSSING:
            d = k.p10_date.toordinal() if k.p10_date else float("inf")
            return (1, d, k.p10_hours or 0.0)
        progress = 0.0
        if k.limit is not None and k.latest_value:
            ratio = k.latest_value / k.limit.value if k.limit.value else 0.0
            progress = ratio if k.limit.direction != "below" else (1 / ratio if ratio else 0.0)
        return (2, -progress, 0.0)

    cands = [k for k in kinds if k.limit is not None and k.outcome not in (Outcome.NO_DATA, Outcome.NO_LIMIT)]
    return min(cands, key=key) if cands else None


def _with_status(pf: PumpForecast, today: date, thresholds) -> PumpForecast:
    return replace(pf, status=pump_status(pf, today, thresholds))


def reference_forecast_fleet(
    fleet: Fleet,
    today: date,
    horizon_hours: float = DEFAULT_HORIZON_HOURS,
    *,
    options: FitOptions | None = None,
    thresholds: StatusThresholds | None = None,
    with_noise: bool = False,
) -> FleetForecast:
    """Forecast every pump in service (and unfitted pumps with readings), worst kind and status per pump."""
    points = machine_hour_points(fleet.fitments, fleet.readings, fleet.events)
    uses = reference_uses(points, fleet.events, today)
    util = {m: u.per_day for m, u in uses.items()}
    pumps = reference_forecast_histories(
        _histories(fleet), today, util, horizon_hours=horizon_hours, options=options,
        thresholds=thresholds, with_noise=with_noise, points=points, uses=uses,
    )  # fmt: skip
    pumps = [
        p if p.machine is None or p.machine not in fleet.machines else _site(p, fleet.machines[p.machine].site)
        for p in pumps
    ]
    notes = (f"horizon {horizon_hours:,.0f} operating hours; quantiles beyond it are left blank",
             "dates assume each machine keeps the hours a day its hour meter showed over the last year (days it "
             "stood still left out); the P10 and P90 dates widen by how unevenly it ran between meter readings "
             "(a machine parked since its last reading, with no parked event, moves every date later)")
    said = {p.machine: p.utilisation_basis for p in pumps if p.machine is not None and p.utilisation_basis}
    notes += tuple(f"{m} {words}" for m, words in sorted(said.items()))
    notes += tuple(f"{p.serial} {k.kind.label} reading of {r} - not used in the trend"
                   for p in pumps for k in p.kinds for r in k.not_used)
    return FleetForecast(today=today, pumps=tuple(pumps), source=fleet.source, notes=notes)


def _site(pf: PumpForecast, site: str) -> PumpForecast:
    return replace(pf, site=site)


__all__ = ["fit_detail", "reference_fleet_batch", "reference_forecast_fleet", "reference_forecast_histories", "reference_pack", "reference_utilisation"]
