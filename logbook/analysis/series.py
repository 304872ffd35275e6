"""Step of the engine: the series to fit, one row per (pump, reading kind), packed as one TrendBatch.

Rows are 3 per pump, kinds in ``ALL_KINDS`` order. A row's entries are the pump's
readings of that kind in the current segment (``segments``), in reading order, with
x = pump hours since the segment's origin and y = the trended value (``normalize``);
the batch holds them in x order. The pump's hours today are its highest reading hours
plus its machine's utilisation times the days since its newest reading (while it is
fitted), or its hours at fitting when it has no readings.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from datetime import date

import numpy as np

from logbook.analysis.batch import FALLING, RISING, TrendBatch, in_order, pad_rows
from logbook.analysis.normalize import ReadingConditions, normalized_value, trended_values
from logbook.analysis.segments import KINDS, PumpReadings, SegmentStarts
from logbook.analysis.timeline import Timeline, codes, floats
from logbook.analysis.utilisation import (
    MachineUse,
    year_months,
    pump_rate_spread,
    running_days_between,
    timeline_spans,
)
from logbook.units import theoretical_flow_lpm
from logbook.model import ALL_KINDS, Fitment, Kind, Limit, PumpModel


@dataclass(slots=True)
class FleetPack:
    """The batch of a fleet and what the forecast records need beside it (rows: 3 per pump, kinds in order)."""

    batch: TrendBatch
    pump_current: list[Fitment | None]
    per_day: list[float | None]
    since_overhaul: list[float | None]
    last_on: list[date | None]
    limits: list[Limit | None]  # per row
    start_on: list[date | None]  # per row: the start event's day, else the first reading's
    started: np.ndarray  # per row: the segment starts at an event
    origin: np.ndarray  # per row: pump hours that x counts from
    before: np.ndarray  # readings of the kind before the segment, per row
    bounds: np.ndarray  # (S + 1,) row r's readings are entries bounds[r]:bounds[r + 1], in reading order
    x: np.ndarray  # per entry: hours since the segment start
    y: np.ndarray  # normalized value
    raw: np.ndarray
    day: np.ndarray  # day ordinal
    rank: np.ndarray  # position of the entry among its row's entries in x order (the batch column)
    spread: tuple[np.ndarray, ...] = ()  # per pump: utilisation.rate_spread's (v, L, T, last meter day)
    theoretical_lpm: np.ndarray | None = None  # per pump: theoretical flow at its model's test speed
    not_used: dict[int, tuple[str, ...]] = field(default_factory=dict)  # row -> "date: why" of readings not trended
    basis: list[str] = field(default_factory=list)  # per pump: how its machine's hours run ahead, if not plainly
    months: np.ndarray | None = None  # (P, 12) month-of-year rates of machines run by season (NaN rows: plain)
    today: date | None = None


@dataclass(slots=True)
class Entries:
    """(pump, kind, reading) entries in the current segments, row by row in reading order."""

    reading: np.ndarray  # position in PumpReadings
    row: np.ndarray  # 3 * pump + kind
    raw: np.ndarray
    y: np.ndarray
    bounds: np.ndarray  # row r's entries are bounds[r]:bounds[r + 1]
    before: np.ndarray  # per row: readings of the kind before the segment
    not_used: dict[int, tuple[str, ...]] = field(default_factory=dict)  # row -> readings left out, with why

    @property
    def per_row(self) -> np.ndarray:
        return np.diff(self.bounds)


def pack(timeline: Timeline, pump_serials: Sequence[str], pump_models: Sequence[PumpModel],
         utilisation: dict[str, float | None], today: date, use: np.ndarray | None = None,
         uses: dict[str, MachineUse] | None = None) -> FleetPack:  # fmt: skip
    """Pack the pumps ``pump_serials`` (models ``pump_models``); readings where ``use`` is False
    (superseded ones) are left out of the series and of the pump hours at events. ``uses``: how each
    machine's hours run ahead (parked, by season: ``utilisation.machine_states``), when known."""
    pumps = PumpReadings.of(timeline, pump_serials, use)
    current, per_day, now = hours_today(timeline, pumps, utilisation, today, uses)
    starts = SegmentStarts.of(timeline, pumps, use)
    entries = segment_entries(timeline, pumps, starts, pump_models)
    hours = pumps.hours[entries.reading]
    has = entries.per_row > 0
    lowest = np.full(len(has), np.inf)
    if len(hours):
        lowest[has] = np.minimum.reduceat(hours, entries.bounds[:-1][has])
    origin = starts.origins(lowest, has)
    x = hours - origin[entries.row]
    limits = [m.limit(kind) for m in pump_models for kind in ALL_KINDS]
    batch, rank = series_batch(entries, x, pumps, origin, np.repeat(now, KINDS), pump_models, limits)
    day = pumps.day[entries.reading]
    _, last_day = pumps.last_hours_and_day()
    since = np.where(starts.start[:, 0] >= 0, now - origin[0::KINDS], now - 0.0)  # drain resets at overhauls only
    return FleetPack(
        batch=batch, pump_current=current, per_day=per_day,
        since_overhaul=[None if v != v else v for v in since.tolist()],
        last_on=[date.fromordinal(d) if d >= 0 else None for d in last_day.tolist()],
        limits=limits, start_on=_start_days(starts, entries, day),
        started=starts.start.reshape(-1) >= 0, origin=origin, before=entries.before, bounds=entries.bounds, x=x,
        y=entries.y, raw=entries.raw, day=day, rank=rank,
        theoretical_lpm=floats([theoretical_flow_lpm(m.displacement_cc, m.test_speed_rpm) for m in pump_models]),
        spread=pump_rate_spread(timeline, [f.machine if f is not None else None for f in current], per_day, today,
                                _season_codes(timeline, uses)),
        not_used=entries.not_used,
        basis=[uses[f.machine].words if uses and f is not None and f.machine in uses else "" for f in current],
        months=_pump_months(current, uses),
        today=today,
    )  # fmt: skip


def _season_codes(timeline: Timeline, uses: dict[str, MachineUse] | None) -> dict[int, tuple[float, ...]]:
    return {timeline.machine_index[m]: u.months for m, u in (uses or {}).items()
            if u.months is not None and m in timeline.machine_index}  # fmt: skip


def _pump_months(current: list[Fitment | None], uses: dict[str, MachineUse] | None) -> np.ndarray | None:
    """(P, 12) month-of-year rates of each pump's machine (NaN rows for machines not run by season); None for none."""
    if not uses or not any(u.months is not None for u in uses.values()):
        return None
    out = np.full((len(current), 12), np.nan)
    for p, f in enumerate(current):
        u = uses.get(f.machine) if f is not None else None
        if u is not None and u.months is not None:
            out[p] = u.months
    return out


def hours_today(timeline: Timeline, pumps: PumpReadings, utilisation: dict[str, float | None], today: date,
                uses: dict[str, MachineUse] | None = None):
    """Per pump: its current fitment (the first not removed), that machine's hours per day, its pump hours today
    (since its newest reading the machine's running days at its rate, or its months' rates when it runs by season)."""
    fits = timeline.fits
    current = [fits.items[i] if i >= 0 else None for i in fits.current(pumps.codes)]
    per_day = [utilisation.get(f.machine) if f is not None else None for f in current]
    rate = floats(per_day)
    at_fit = floats([None if f is None else f.pump_hours_at_fit for f in current])
    last_hours, last_day = pumps.last_hours_and_day()
    t = today.toordinal()
    days = np.maximum(t - last_day, 0).astype(float)
    spans = timeline_spans(timeline)
    seasonal = any(u.months is not None for u in uses.values()) if uses else False
    for p, f in enumerate(current if spans or seasonal else ()):  # parked or by season: own days since the newest reading
        if f is None or last_day[p] < 0 or days[p] <= 0:
            continue
        code = timeline.machine_index.get(f.machine, -1)
        u = uses.get(f.machine) if uses else None
        if code in spans:
            days[p] = running_days_between(code, int(last_day[p]), t, spans)
        if u is not None and u.months is not None and rate[p] > 0:
            months = np.asarray(u.months)[year_months(int(last_day[p]), t - 1) % 12]
            days[p] = float(months.sum()) / rate[p] if code not in spans else days[p]
    run = np.where(np.isnan(rate) | np.isnan(at_fit), 0.0, rate) * days
    ahead = ~np.isnan(rate) & ~np.isnan(at_fit)
    now = np.where(pumps.count > 0, np.where(ahead, last_hours + run, last_hours), at_fit)
    return current, per_day, now


def segment_entries(timeline: Timeline, pumps: PumpReadings, starts: SegmentStarts,
                    pump_models: Sequence[PumpModel]) -> Entries:  # fmt: skip
    """The readings of each kind taken after their segment's start, with their trended values."""
    parts, before = [], np.zeros((pumps.pumps, KINDS), dtype=np.int64)
    not_used: dict[int, list[str]] = {}
    conditions = _conditions(timeline, pumps, pump_models)
    for k, kind in enumerate(ALL_KINDS):
        valued = np.flatnonzero(timeline.given[k][pumps.reading])
        after = starts.after_start(timeline, pumps, valued, k)
        before[:, k] = np.bincount(pumps.pump[valued[~after]], minlength=pumps.pumps)
        keep = valued[after]
        raw = timeline.values[k][pumps.reading[keep]]
        cond = conditions(keep) if kind is Kind.CASE_DRAIN else None
        y = trended_values(kind, raw, cond)
        if cond is not None and len(raw) and cond.trust.any():  # outside the trusted range: kept, not trended
            out = np.flatnonzero(cond.trust)
            for i in out.tolist():
                day = date.fromordinal(int(pumps.day[keep[i]])).isoformat()
                not_used.setdefault(KINDS * int(pumps.pump[keep[i]]) + k, []).append(f"{day}: {cond.reason(i)}")
            ok = cond.trust == 0
            keep, raw, y = keep[ok], raw[ok], y[ok]
        parts.append((KINDS * pumps.pump[keep] + k, keep, raw, y))
    row, reading, raw, y = (np.concatenate(column) for column in zip(*parts))
    order = in_order(row, reading)
    bounds = np.r_[0, np.cumsum(np.bincount(row, minlength=KINDS * pumps.pumps))]
    return Entries(reading[order], row[order], raw[order], y[order], bounds, before.reshape(-1),
                   {r: tuple(v) for r, v in not_used.items()})


def _conditions(timeline: Timeline, pumps: PumpReadings, pump_models: Sequence[PumpModel]):
    """The test conditions of some of ``pumps``' readings (positions), for ``normalize.ReadingConditions``."""
    models = list({id(m): m for m in pump_models}.values())
    model_of_pump = codes([id(m) for m in pump_models], {})

    def conditions(entries: np.ndarray) -> ReadingConditions:
        rows = pumps.reading[entries]

        def refuse(i: int) -> None:
            normalized_value(timeline.readings[rows[i]], Kind.CASE_DRAIN, pump_models[int(pumps.pump[entries[i]])])

        return ReadingConditions(timeline.dp[rows], timeline.temp[rows], timeline.grade[rows], timeline.vi[rows],
                                 models, model_of_pump[pumps.pump[entries]], refuse, timeline.nu40[rows],
                                 timeline.nu100[rows])  # fmt: skip

    return conditions


def series_batch(entries: Entries, x: np.ndarray, pumps: PumpReadings, origin: np.ndarray, now: np.ndarray,
                 pump_models: Sequence[PumpModel], limits: list[Limit | None]) -> tuple[TrendBatch, np.ndarray]:  # fmt: skip
    """The TrendBatch of the entries (columns in x order, ties in reading order) and each entry's rank."""
    rows = KINDS * pumps.pumps
    position = entries.reading - pumps.first[pumps.pump[entries.reading]]
    bx, by, rank, _ = pad_rows(entries.row, x, entries.y, rows, position)
    has = entries.per_row > 0
    last_x = np.where(has, x[np.maximum(entries.bounds[1:] - 1, 0)] if len(x) else 0.0, 0.0)
    x_now = np.maximum(np.where(np.isnan(now), last_x, now - origin), last_x)
    model_rank: dict[str, int] = {}
    group = [KINDS * model_rank.setdefault(m.code, len(model_rank)) + k for m in pump_models for k in range(KINDS)]
    direction = [limit_direction(kind, lim) for lim, kind in zip(limits, ALL_KINDS * pumps.pumps)]
    limit = [np.nan if lim is None else lim.value for lim in limits]
    return TrendBatch(x=bx, y=by, limit=np.asarray(limit, dtype=float), direction=np.asarray(direction, dtype=np.int8),
                      group=np.asarray(group, dtype=np.int64), x_now=x_now), rank  # fmt: skip


def limit_direction(kind: Kind, limit: Limit | None) -> int:
    """FALLING toward a lower limit, RISING toward an upper one; without a limit, servo pressure falls."""
    if limit is not None:
        return FALLING if limit.direction == "below" else RISING
    return FALLING if kind is Kind.SERVO_PRESSURE else RISING


def _start_days(starts: SegmentStarts, entries: Entries, day: np.ndarray) -> list[date | None]:
    """Per row: the day of the start event, else of the segment's first reading (None without readings)."""
    first = day[np.minimum(entries.bounds[:-1], len(day) - 1)].tolist() if len(day) else [0] * len(entries.before)
    return [starts.events[s].happened_on if s >= 0 else (date.fromordinal(d) if h else None)
            for s, d, h in zip(starts.start.reshape(-1).tolist(), first, (entries.per_row > 0).tolist())]  # fmt: skip


__all__ = ["FleetPack", "hours_today", "limit_direction", "pack", "segment_entries", "series_batch"]
