"""Pack a whole fleet's readings into one TrendBatch with array steps, not a loop per pump.

Same rules as ``segments.build_series`` (the one-pump definition, kept for single-pump
views): per pump and reading kind, the segment starts at the pump's last event that
resets the kind; x = pump hours since the segment start, y = the normalized value
(``normalize``). Readings are in (date, meter) order per pump; batch columns in x order.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from datetime import date
from operator import attrgetter

import numpy as np

from logbook.analysis.arrays import (
    NEVER,
    FitmentTable,
    MeterTable,
    codes,
    floats,
    ordinals,
)
from logbook.analysis.batch import FALLING, RISING, TrendBatch
from logbook.analysis.hours import pump_hours_by_date
from logbook.analysis.normalize import normalized_value, reference_viscosity_cst
from logbook.model import (
    ALL_KINDS,
    SEGMENT_RESETS,
    Event,
    Fitment,
    Kind,
    Limit,
    PumpModel,
    Reading,
)
from logbook.oil import oil_walther, walther_viscosity

VALUE_FIELDS = ("case_drain_lpm", "servo_pressure_bar", "neutral_drift_bar")  # in ALL_KINDS order
RESETS = [np.array([kind in SEGMENT_RESETS.get(ev, ()) for ev in SEGMENT_RESETS]) for kind in ALL_KINDS]
NUMBERS = ("machine_hours", *VALUE_FIELDS, "oil_temp_c", "test_pressure_bar", "oil_grade", "oil_vi", "superseded_by")


class FleetArrays:
    """Fitments, meter replacements and readings of a fleet as columns, and pump hours of every reading."""

    def __init__(self, fitments: Sequence[Fitment], readings: Sequence[Reading], events: Sequence[Event]):
        self.serial_index: dict[str, int] = {}
        self.machine_index: dict[str, int] = {}
        self.events = events
        self.meters = MeterTable(events, self.machine_index)
        self.fits = FitmentTable(fitments, self.serial_index, self.machine_index, self.meters)
        self.readings = readings
        n = len(readings)
        serials = list(map(attrgetter("serial"), readings))
        for s in set(serials).difference(self.serial_index):
            self.serial_index[s] = len(self.serial_index)
        self.serial = np.fromiter(map(self.serial_index.__getitem__, serials), dtype=np.int64, count=n)
        self.day = np.fromiter(map(date.toordinal, map(attrgetter("taken_on"), readings)), dtype=np.int64, count=n)
        rows = list(map(attrgetter(*NUMBERS), readings))  # one pass over the records for all the numbers
        table = np.array(rows, dtype=float).reshape(n, len(NUMBERS))
        self.meter, self.temp, self.dp, self.grade, self.vi = (table[:, i].copy() for i in (0, 4, 5, 6, 7))
        self.values = [table[:, 1 + k].copy() for k in range(3)]
        self.latest = np.isnan(table[:, 8])  # not superseded by a correction (ids are never NaN)
        self.given = [~np.isnan(v) for v in self.values]
        row, col = np.nonzero(np.isnan(table[:, 1:4]))
        if len(row):  # a value given as NaN (not None) is a reading all the same
            given = np.fromiter((rows[i][1 + k] is not None for i, k in zip(row.tolist(), col.tolist())), bool,
                                count=len(row))  # fmt: skip
            for i, k in zip(row[given].tolist(), col[given].tolist()):
                self.given[k][i] = True
        self.fit = self.fits.on(self.serial, self.day)
        hours, self.cont = self.fits.pump_hours(self.fit, self.day, self.meter)
        self.hours = np.where(self.fit >= 0, hours, self.meter)  # the meter itself where no fitment held


@dataclass
class FleetPack:
    """The batch of a fleet and what the forecast records need beside it (rows: 3 per pump, kinds in order)."""

    batch: TrendBatch
    pump_current: list[Fitment | None]
    per_day: list[float | None]
    since_overhaul: list[float | None]
    last_on: list[date | None]
    limits: list[Limit | None]  # per row
    start_on: list[date | None]
    before: np.ndarray  # readings of the kind before the segment, per row
    bounds: np.ndarray  # (S + 1,) row r's readings are entries bounds[r]:bounds[r + 1], in reading order
    x: np.ndarray  # per entry: hours since the segment start
    y: np.ndarray  # normalized value
    raw: np.ndarray
    day: np.ndarray  # day ordinal
    rank: np.ndarray  # position of the entry among its row's entries in x order (the batch column)


def _in_order(group: np.ndarray, *keys: np.ndarray) -> np.ndarray:
    """Stable order by ``group``, then by ``keys`` (most significant first), cheap when already in key order."""
    order = np.argsort(group, kind="stable")
    g = group[order]
    same = g[1:] == g[:-1]
    ok, tie = np.ones(len(same), dtype=bool), same
    for key in keys:
        k = key[order]
        ok &= ~tie | (k[1:] >= k[:-1])
        tie = tie & (k[1:] == k[:-1])
    if ok.all():
        return order
    return np.lexsort(tuple(reversed(keys)) + (group,))


def _last_by(pump: np.ndarray, *keys: np.ndarray) -> np.ndarray:
    """Index of the last element per pump in the order of ``keys`` (most significant last)."""
    order = np.lexsort(keys + (pump,))
    return order[np.r_[pump[order][1:] != pump[order][:-1], True]] if len(order) else order


def pack(arrays: FleetArrays, pump_serials: Sequence[str], pump_models: Sequence[PumpModel],
         utilisation: dict[str, float | None], today: date, use: np.ndarray | None = None) -> FleetPack:  # fmt: skip
    """Pack the pumps ``pump_serials`` (models ``pump_models``) from ``arrays``; readings where ``use`` is
    False (superseded ones) are left out of the series."""
    n_pumps, fits, index = len(pump_serials), arrays.fits, arrays.serial_index
    pump_codes = [index.setdefault(serial, len(index)) for serial in pump_serials]
    pos_of = np.full(len(index), -1, dtype=np.int64)
    pos_of[pump_codes] = np.arange(n_pumps)
    pump_of = pos_of[arrays.serial]
    idx = np.flatnonzero(pump_of >= 0 if use is None else (pump_of >= 0) & use)
    idx = idx[_in_order(pump_of[idx], arrays.day[idx], arrays.meter[idx])]  # per pump, (date, meter) order
    r_pump, r_day, r_hours = pump_of[idx], arrays.day[idx], arrays.hours[idx]
    count = np.bincount(r_pump, minlength=n_pumps)
    first = np.r_[0, np.cumsum(count)[:-1]]
    has = count > 0
    last_hours = np.full(n_pumps, np.nan)
    last_day = np.full(n_pumps, -1, dtype=np.int64)
    if len(idx):
        last_hours[has] = np.maximum.reduceat(r_hours, first[has])
        last_day[has] = r_day[first[has] + count[has] - 1]

    # the pump's current fitment (first one not removed), its machine's utilisation, its hours today
    current = [fits.items[i] if i >= 0 else None for i in fits.current(pump_codes)]
    per_day = [utilisation.get(f.machine) if f is not None else None for f in current]
    rate = floats(per_day)
    at_fit = floats([None if f is None else f.pump_hours_at_fit for f in current])
    run = np.where(np.isnan(rate) | np.isnan(at_fit), 0.0, rate) * np.maximum(today.toordinal() - last_day, 0)
    ahead = ~np.isnan(rate) & ~np.isnan(at_fit)
    now = np.where(has, np.where(ahead, last_hours + run, last_hours), at_fit)

    # segment starts: the pump's last event that resets the kind, in (date, id) order
    ev_idx = [i for i, e in enumerate(arrays.events) if e.serial is not None and e.kind in SEGMENT_RESETS]
    evs = [arrays.events[i] for i in ev_idx]
    ev_pump = np.array([pos_of[index[e.serial]] if e.serial in index else -1 for e in evs], dtype=np.int64)
    ev_day = ordinals([e.happened_on for e in evs])
    ev_id = np.array([e.id or 0 for e in evs], dtype=np.int64)
    ev_kind = np.array([list(SEGMENT_RESETS).index(e.kind) for e in evs], dtype=np.int64)
    start = np.full((n_pumps, 3), -1, dtype=np.int64)
    for k in range(3):
        m = np.flatnonzero((ev_pump >= 0) & RESETS[k][ev_kind]) if len(evs) else np.zeros(0, dtype=np.int64)
        last = m[_last_by(ev_pump[m], np.array(ev_idx, dtype=np.int64)[m], ev_id[m], ev_day[m])]
        start[ev_pump[last], k] = last
    start_hours = _start_hours(arrays, evs, ev_pump, ev_day, np.unique(start[start >= 0]), idx, r_hours, first, count,
                               pump_codes)  # fmt: skip

    # entries: (pump, kind, reading) with a value, in the current segment
    parts = []
    before = np.zeros((n_pumps, 3), dtype=np.int64)
    for k in range(3):
        raw, given = arrays.values[k], arrays.given[k]
        has_v = np.flatnonzero(given[idx])
        after = np.ones(len(has_v), dtype=bool)
        w = np.flatnonzero(start[r_pump[has_v], k] >= 0)
        ew = start[r_pump[has_v[w]], k]
        rd, ed = r_day[has_v[w]], ev_day[ew]
        sh = start_hours[ew]
        tie = rd == ed
        res = rd > ed
        if tie.any():
            ev_hours = np.array([evs[j].hours is not None for j in ew.tolist()], dtype=bool)
            by_hours = tie & ev_hours & ~np.isnan(sh)
            res = np.where(by_hours, r_hours[has_v[w]] >= sh, res)
            for q in np.flatnonzero(tie & ~by_hours).tolist():  # same day, no meter reading: who was entered first
                r, ev = arrays.readings[idx[has_v[w[q]]]], evs[ew[q]]
                res[q] = r.entered_at >= ev.entered_at if r.entered_at is not None and ev.entered_at is not None else True
        after[w] = res
        before[:, k] = np.bincount(r_pump[has_v[w[~res]]], minlength=n_pumps)
        keep = has_v[after]
        values = raw[idx[keep]]
        parts.append((k, keep, values, _values(k, keep, values, arrays, idx, r_pump, pump_models)))

    e_read = np.concatenate([keep for _, keep, _, _ in parts])
    e_row = np.concatenate([3 * r_pump[keep] + k for k, keep, _, _ in parts])
    order = _in_order(e_row, e_read)
    e_read, e_row = e_read[order], e_row[order]
    e_raw = np.concatenate([raw for _, _, raw, _ in parts])[order]
    e_y = np.concatenate([y for *_, y in parts])[order]
    n_rows = 3 * n_pumps
    per_row = np.bincount(e_row, minlength=n_rows)
    bounds = np.r_[0, np.cumsum(per_row)]
    e_hours = r_hours[e_read]

    # origin of x: the start's pump hours, but never after the first reading of the segment
    row_start = start.reshape(-1)
    row_sh = np.where(row_start >= 0, start_hours[np.maximum(row_start, 0)] if len(evs) else np.nan, np.nan)
    has_rows = per_row > 0
    row_min = np.full(n_rows, np.inf)
    if len(e_row):
        row_min[has_rows] = np.minimum.reduceat(e_hours, bounds[:-1][has_rows])
    origin = np.where(row_start < 0, 0.0, np.where(np.isnan(row_sh), np.where(has_rows, row_min, 0.0), row_sh))
    origin = np.where((row_start >= 0) & has_rows, np.minimum(origin, row_min), origin)
    e_x = e_hours - origin[e_row]

    # batch columns in x order (ties in reading order), NaN readings left out
    e_pos = e_read - first[r_pump[e_read]]
    col_order = _in_order(e_row, e_x, e_pos)
    rank = np.empty(len(e_row), dtype=np.int64)
    rank[col_order] = np.arange(len(e_row)) - bounds[e_row[col_order]]
    width = max(int(per_row.max(initial=0)), 1)
    bx, by = np.full((n_rows, width), np.nan), np.full((n_rows, width), np.nan)
    fine = np.isfinite(e_x) & np.isfinite(e_y)
    col = rank
    if not fine.all():
        sub = col_order[fine[col_order]]
        col = np.full(len(e_row), -1, dtype=np.int64)
        kept = np.bincount(e_row[sub], minlength=n_rows)
        col[sub] = np.arange(len(sub)) - np.r_[0, np.cumsum(kept)][e_row[sub]]
    bx[e_row[fine], col[fine]] = e_x[fine]
    by[e_row[fine], col[fine]] = e_y[fine]

    last_x = np.where(has_rows, e_x[np.maximum(bounds[1:] - 1, 0)] if len(e_x) else 0.0, 0.0)
    now_rows = np.repeat(now, 3)
    x_now = np.maximum(np.where(np.isnan(now_rows), last_x, now_rows - origin), last_x)
    limits = [m.limit(kind) for m in pump_models for kind in ALL_KINDS]
    rank_of: dict[str, int] = {}
    group = [3 * rank_of.setdefault(m.code, len(rank_of)) + k for m in pump_models for k in range(3)]
    direction = [_direction(kind, lim) for lim, kind in zip(limits, ALL_KINDS * n_pumps)]
    batch = TrendBatch(x=bx, y=by, limit=[np.nan if lim is None else lim.value for lim in limits],
                       direction=direction, group=group, x_now=x_now)  # fmt: skip

    e_day = r_day[e_read]
    first_day = e_day[np.minimum(bounds[:-1], len(e_day) - 1)].tolist() if len(e_day) else [0] * n_rows
    start_on = [evs[s].happened_on if s >= 0 else (date.fromordinal(d) if h else None)
                for s, d, h in zip(row_start.tolist(), first_day, has_rows.tolist())]  # fmt: skip
    since = np.where(start[:, 0] >= 0, now - origin[0::3], now - 0.0)
    return FleetPack(
        batch=batch, pump_current=current, per_day=per_day,
        since_overhaul=[None if v != v else v for v in since.tolist()],
        last_on=[date.fromordinal(d) if d >= 0 else None for d in last_day.tolist()], limits=limits,
        start_on=start_on, before=before.reshape(-1), bounds=bounds, x=e_x, y=e_y, raw=e_raw, day=e_day, rank=rank,
    )  # fmt: skip


def _direction(kind: Kind, limit: Limit | None) -> int:
    if limit is not None:
        return FALLING if limit.direction == "below" else RISING
    return FALLING if kind is Kind.SERVO_PRESSURE else RISING


def _start_hours(arrays, evs, ev_pump, ev_day, wanted, idx, r_hours, first, count, pump_codes) -> np.ndarray:
    """Pump hours at each segment-starting event in ``wanted`` (NaN elsewhere), as segments.event_pump_hours."""
    out = np.full(len(evs), np.nan)
    if not len(wanted):
        return out
    fits = arrays.fits
    serial = np.array([pump_codes[p] for p in ev_pump[wanted].tolist()], dtype=np.int64)
    meter = floats([evs[j].hours for j in wanted.tolist()])
    fit = fits.on(serial, ev_day[wanted])
    mach = codes([evs[j].machine for j in wanted.tolist()], arrays.machine_index)
    direct = ~np.isnan(meter) & (fit >= 0) & ((mach < 0) | (mach == fits.machine_of(fit)))
    hours, _ = fits.pump_hours(fit, ev_day[wanted], np.nan_to_num(meter))
    out[wanted[direct]] = hours[direct]
    removal = fits.removal_pump_hours() if not direct.all() else None
    for j, p in zip(wanted[~direct].tolist(), ev_pump[wanted[~direct]].tolist()):  # rare: interpolate by date
        mine = np.flatnonzero(fits.serial == pump_codes[p]).tolist()
        known = [(fits.items[i].fitted_on, fits.items[i].pump_hours_at_fit) for i in mine]
        known += [(fits.items[i].removed_on, float(removal[i])) for i in mine if not np.isnan(removal[i])]
        lo, n = int(first[p]), int(count[p])
        known += [(arrays.readings[idx[i]].taken_on, float(r_hours[i])) for i in range(lo, lo + n)]
        got = pump_hours_by_date(evs[j].happened_on, known)
        out[j] = np.nan if got is None else got
    return out


def _values(k: int, keep: np.ndarray, raw: np.ndarray, arrays: FleetArrays, idx, r_pump, pump_models) -> np.ndarray:
    """Trended values of the readings ``keep``: case drain at reference conditions, |drift|, servo as read."""
    if ALL_KINDS[k] is Kind.NEUTRAL_DRIFT:
        return np.abs(raw)
    if ALL_KINDS[k] is Kind.SERVO_PRESSURE or not len(keep):
        return raw
    rows = idx[keep]
    model_index: dict[int, int] = {}
    models = list({id(m): m for m in pump_models}.values())
    em = codes([id(m) for m in pump_models], model_index)[r_pump[keep]]

    def column(got: np.ndarray, model_value: str, keep=np.isfinite) -> np.ndarray:
        got = got[rows]
        return np.where(keep(got), got, floats([getattr(m, model_value) for m in models])[em])

    def given(got: np.ndarray) -> np.ndarray:
        return ~np.isnan(got)

    dp, temp = column(arrays.dp, "ref_pressure_bar"), column(arrays.temp, "ref_temp_c")  # not finite: reference
    grade, vi = column(arrays.grade, "oil_grade", given), column(arrays.vi, "oil_vi", given)  # None: model's oil
    bad = dp <= 0
    nu = np.full(len(rows), np.nan)
    for mine in _oil_groups(grade, vi):
        try:
            a, b = oil_walther(int(grade[mine[0]]), float(vi[mine[0]]))
        except (TypeError, ValueError):
            bad[mine] = True
            continue
        nu[mine] = walther_viscosity(temp[mine], a, b)
    nu_ref = np.full(len(models), np.nan)
    for c, m in enumerate(models):
        try:
            nu_ref[c] = reference_viscosity_cst(m)
        except (TypeError, ValueError):
            bad |= em == c
    if bad.any():  # refuse as the one-reading code does, naming the field and the value
        i = int(np.flatnonzero(bad)[0])
        normalized_value(arrays.readings[rows[i]], Kind.CASE_DRAIN, pump_models[int(r_pump[keep[i]])])
    ref_p = floats([m.ref_pressure_bar for m in models])[em]
    return raw * (ref_p / dp) * (nu / nu_ref[em])


def _oil_groups(grade: np.ndarray, vi: np.ndarray) -> list[np.ndarray]:
    """Indices of the readings of each oil (grade, viscosity index); a NaN grade or index is an oil of its own."""
    todo = np.ones(len(grade), dtype=bool)
    groups = []
    while todo.any() and len(groups) < 16:  # peel one oil at a time: a fleet uses a handful
        i = int(np.argmax(todo))
        mine = todo & (grade == grade[i]) & (vi == vi[i])
        mine[i] = True
        todo &= ~mine
        groups.append(np.flatnonzero(mine))
    if todo.any():  # many oils: group the rest by sorting
        rest = np.flatnonzero(todo)
        _, inverse = np.unique(np.stack([grade[rest], vi[rest]], axis=1), axis=0, return_inverse=True)
        inverse = inverse.reshape(-1)
        order = np.argsort(inverse, kind="stable")
        groups += np.split(rest[order], np.flatnonzero(np.diff(inverse[order])) + 1)
    return groups


__all__ = ["NEVER", "FleetArrays", "FleetPack", "pack"]
