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

from logbook.analysis.arrays import FitmentTable, MeterTable, codes, floats, ordinals
from logbook.analysis.batch import FALLING, RISING, TrendBatch
from logbook.analysis.hours import pump_hours_by_date
from logbook.analysis.normalize import normalized_value, reference_viscosity_cst
from logbook.model import ALL_KINDS, SEGMENT_RESETS, Event, Fitment, Kind, Limit, PumpModel, Reading
from logbook.oil import oil_walther, walther_viscosity


VALUE_FIELDS = {Kind.CASE_DRAIN: "case_drain_lpm", Kind.SERVO_PRESSURE: "servo_pressure_bar",
                Kind.NEUTRAL_DRIFT: "neutral_drift_bar"}  # fmt: skip


class FleetArrays:
    """Fitments, meter replacements and readings of a fleet as columns, pump hours of every reading."""

    def __init__(self, fitments: Sequence[Fitment], readings: Sequence[Reading], events: Sequence[Event]):
        self.serial_index: dict[str, int] = {}
        self.machine_index: dict[str, int] = {}
        self.events = events
        self.meters = MeterTable(events, self.machine_index)
        self.fits = FitmentTable(fitments, self.serial_index, self.machine_index, self.meters)
        self.readings = readings
        serials = [r.serial for r in readings]
        for s in set(serials).difference(self.serial_index):
            self.serial_index[s] = len(self.serial_index)
        self.serial = np.fromiter(map(self.serial_index.__getitem__, serials), dtype=np.int64, count=len(serials))
        self.day = ordinals([r.taken_on for r in readings])
        self.meter = floats([r.machine_hours for r in readings])
        self.fit = self.fits.on(self.serial, self.day)
        hours, self.cont = self.fits.pump_hours(self.fit, self.day, self.meter)
        self.hours = np.where(self.fit >= 0, hours, self.meter)  # the meter itself where no fitment held


@dataclass
class FleetPack:
    """The batch of a fleet and what the forecast records need beside it (rows: 3 per pump, kinds in order)."""

    batch: TrendBatch
    pump_current: list[Fitment | None]
    per_day: list[float | None]
    pump_now: list[float | None]
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


def _last_by(pump: np.ndarray, *keys: np.ndarray) -> np.ndarray:
    """Index of the last element per pump in the order of ``keys`` (most significant last); -1 where none."""
    order = np.lexsort(keys + (pump,))
    last = order[np.r_[pump[order][1:] != pump[order][:-1], True]] if len(order) else order
    return last


def pack(arrays: FleetArrays, pump_serials: Sequence[str], pump_models: Sequence[PumpModel],
         utilisation: dict[str, float | None], today: date, use: np.ndarray | None = None) -> FleetPack:  # fmt: skip
    """Pack the pumps ``pump_serials`` (models ``pump_models``) from ``arrays``; readings where ``use`` is
    False (superseded ones) are left out of the series."""
    n_pumps = len(pump_serials)
    fits = arrays.fits
    index = arrays.serial_index
    pump_codes = [index.setdefault(serial, len(index)) for serial in pump_serials]
    pos_of = np.full(len(index), -1, dtype=np.int64)
    pos_of[pump_codes] = np.arange(n_pumps)
    pump_of = pos_of[arrays.serial]
    sel = pump_of >= 0 if use is None else (pump_of >= 0) & use
    idx = np.flatnonzero(sel)
    idx = idx[np.lexsort((idx, arrays.meter[idx], arrays.day[idx], pump_of[idx]))]  # per pump, (date, meter) order
    r_pump, r_day, r_hours = pump_of[idx], arrays.day[idx], arrays.hours[idx]
    readings = [arrays.readings[i] for i in idx.tolist()]
    count = np.bincount(r_pump, minlength=n_pumps)
    first = np.r_[0, np.cumsum(count)[:-1]]
    has = count > 0
    last_hours = np.full(n_pumps, np.nan)
    if len(idx):
        last_hours[has] = np.maximum.reduceat(r_hours, first[has])
    last_day = np.where(has, r_day[np.maximum(first + count - 1, 0)] if len(idx) else 0, -1)

    # the pump's current fitment (first one not removed) and its machine's utilisation
    current = [fits.items[i] if i >= 0 else None for i in fits.current(pump_codes)]
    per_day = [utilisation.get(f.machine) if f is not None else None for f in current]
    t = today.toordinal()
    pump_now = []
    for p in range(n_pumps):
        f, rate = current[p], per_day[p]
        if not has[p]:
            pump_now.append(f.pump_hours_at_fit if f is not None else None)
        elif f is None or rate is None:
            pump_now.append(float(last_hours[p]))
        else:
            pump_now.append(float(last_hours[p] + rate * max(t - int(last_day[p]), 0)))
    now_arr = floats(pump_now) if n_pumps else np.zeros(0)

    # segment starts: the pump's last event that resets the kind, in (date, id) order
    ev_idx = [i for i, e in enumerate(arrays.events) if e.serial is not None and e.kind in SEGMENT_RESETS]
    evs = [arrays.events[i] for i in ev_idx]
    ev_pump = np.array([pos_of[arrays.serial_index[e.serial]] if e.serial in arrays.serial_index else -1 for e in evs],
                       dtype=np.int64)  # fmt: skip
    ev_day = ordinals([e.happened_on for e in evs])
    ev_id = np.array([e.id or 0 for e in evs], dtype=np.int64)
    start = np.full((n_pumps, 3), -1, dtype=np.int64)
    for k, kind in enumerate(ALL_KINDS):
        m = np.flatnonzero((ev_pump >= 0) & np.array([kind in SEGMENT_RESETS[e.kind] for e in evs], dtype=bool))
        last = m[_last_by(ev_pump[m], np.array(ev_idx, dtype=np.int64)[m], ev_id[m], ev_day[m])]
        start[ev_pump[last], k] = last
    start_hours = _start_hours(arrays, evs, ev_pump, ev_day, np.unique(start[start >= 0]), readings, r_pump, r_hours,
                               first, count, pump_codes)  # fmt: skip

    # entries: (pump, kind, reading) with a value, in the current segment
    read_pos = np.arange(len(idx)) - first[r_pump]
    parts = []
    for k, kind in enumerate(ALL_KINDS):
        values = list(map(attrgetter(VALUE_FIELDS[kind]), readings))
        raw = floats(values)
        missing = np.isnan(raw)
        if missing.any():  # a value given as NaN is a reading all the same
            missing = np.fromiter((v is None for v in values), dtype=bool, count=len(values))
        has_v = np.flatnonzero(~missing)
        raw = raw[has_v]
        e = start[r_pump[has_v], k]
        after = np.ones(len(has_v), dtype=bool)
        w = np.flatnonzero(e >= 0)
        ew = e[w]
        rd, ed = r_day[has_v[w]], ev_day[ew]
        sh = start_hours[ew] if len(ew) else np.zeros(0)
        tie = rd == ed
        res = rd > ed
        ev_hours = np.array([evs[j].hours is not None for j in ew.tolist()], dtype=bool)
        by_hours = tie & ev_hours & ~np.isnan(sh)
        res = np.where(by_hours, r_hours[has_v[w]] >= sh, res)
        for q in np.flatnonzero(tie & ~by_hours).tolist():  # same day, no meter reading: who was entered first
            r, ev = readings[has_v[w[q]]], evs[ew[q]]
            res[q] = r.entered_at >= ev.entered_at if r.entered_at is not None and ev.entered_at is not None else True
        after[w] = res
        before = np.bincount(r_pump[has_v[w[~res]]], minlength=n_pumps)
        keep = has_v[after]
        parts.append((k, keep, raw[after], before))
    before = np.stack([b for *_, b in parts], axis=1).reshape(-1) if n_pumps else np.zeros(0, dtype=np.int64)
    y_parts = [_values(ALL_KINDS[k], keep, raw, readings, r_pump, pump_models) for k, keep, raw, _ in parts]

    e_read = np.concatenate([keep for _, keep, _, _ in parts])
    e_row = np.concatenate([3 * r_pump[keep] + k for k, keep, _, _ in parts])
    e_raw = np.concatenate([raw for _, _, raw, _ in parts])
    e_y = np.concatenate(y_parts) if y_parts else np.zeros(0)
    order = np.lexsort((e_read, e_row))
    e_read, e_row, e_raw, e_y = e_read[order], e_row[order], e_raw[order], e_y[order]
    n_rows = 3 * n_pumps
    per_row = np.bincount(e_row, minlength=n_rows)
    bounds = np.r_[0, np.cumsum(per_row)]
    e_hours = r_hours[e_read]

    # origin of x: the start's pump hours, but never after the first reading of the segment
    row_start = start.reshape(-1)
    row_sh = np.where(row_start >= 0, start_hours[np.maximum(row_start, 0)] if len(start_hours) else np.nan, np.nan)
    has_rows = per_row > 0
    row_min = np.full(n_rows, np.inf)
    if len(e_row):
        row_min[has_rows] = np.minimum.reduceat(e_hours, bounds[:-1][has_rows])
    origin = np.where(row_start < 0, 0.0, np.where(np.isnan(row_sh), np.where(has_rows, row_min, 0.0), row_sh))
    origin = np.where((row_start >= 0) & has_rows, np.minimum(origin, row_min), origin)
    e_x = e_hours - origin[e_row]

    # batch columns in x order (ties in reading order), newest readings kept, NaN readings left out
    e_pos = read_pos[e_read]
    col_order = np.lexsort((e_pos, e_x, e_row))
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
    x_now = np.where(np.repeat(np.isnan(now_arr), 3), last_x, np.repeat(now_arr, 3) - origin)
    x_now = np.maximum(x_now, last_x)
    limits = [m.limit(kind) for m in pump_models for kind in ALL_KINDS]
    rank_of: dict[str, int] = {}
    group = [3 * rank_of.setdefault(m.code, len(rank_of)) + k for m in pump_models for k in range(3)]
    direction = [_direction(kind, lim) for lim, kind in zip(limits, ALL_KINDS * n_pumps)]
    batch = TrendBatch(x=bx, y=by, limit=[np.nan if lim is None else lim.value for lim in limits],
                       direction=direction, group=group, x_now=x_now)  # fmt: skip

    e_day = r_day[e_read]
    start_ev = [evs[j] if j >= 0 else None for j in row_start.tolist()]
    first_day = np.where(has_rows, e_day[np.minimum(bounds[:-1], max(len(e_day) - 1, 0))] if len(e_day) else 0, 0)
    start_on = [ev.happened_on if ev is not None else (date.fromordinal(int(d)) if h else None)
                for ev, d, h in zip(start_ev, first_day.tolist(), has_rows.tolist())]  # fmt: skip
    cd_origin = origin[0::3]
    since = [None if now is None else now - (float(o) if s >= 0 else 0.0)
             for now, o, s in zip(pump_now, cd_origin.tolist(), start[:, 0].tolist())]  # fmt: skip
    return FleetPack(
        batch=batch, pump_current=current, per_day=per_day, pump_now=pump_now, since_overhaul=since,
        last_on=[date.fromordinal(int(d)) if d >= 0 else None for d in last_day.tolist()], limits=limits,
        start_on=start_on, before=before, bounds=bounds, x=e_x, y=e_y, raw=e_raw, day=e_day, rank=rank,
    )  # fmt: skip


def _direction(kind: Kind, limit: Limit | None) -> int:
    if limit is not None:
        return FALLING if limit.direction == "below" else RISING
    return FALLING if kind is Kind.SERVO_PRESSURE else RISING


def _start_hours(arrays, evs, ev_pump, ev_day, wanted, readings, r_pump, r_hours, first, count, pump_codes):
    """Pump hours at each segment-starting event in ``wanted`` (NaN elsewhere), as segments.event_pump_hours."""
    out = np.full(len(evs), np.nan)
    if not len(wanted):
        return out
    fits = arrays.fits
    serial = np.array([pump_codes[p] for p in ev_pump[wanted].tolist()], dtype=np.int64)
    meter = floats([evs[j].hours for j in wanted.tolist()])
    fit = fits.on(serial, ev_day[wanted])
    mach = codes([evs[j].machine for j in wanted.tolist()], arrays.machine_index)
    direct = ~np.isnan(meter) & (fit >= 0) & ((mach < 0) | (mach == fits.machine[np.maximum(fit, 0)]))
    hours, _ = fits.pump_hours(fit, ev_day[wanted], np.nan_to_num(meter))
    out[wanted[direct]] = hours[direct]
    removal = None
    for j, p in zip(wanted[~direct].tolist(), ev_pump[wanted[~direct]].tolist()):  # rare: interpolate by date
        if removal is None:
            removal = fits.removal_pump_hours()
        mine = np.flatnonzero(fits.serial == pump_codes[p])
        known = [(fits.items[i].fitted_on, fits.items[i].pump_hours_at_fit) for i in mine.tolist()]
        known += [(fits.items[i].removed_on, float(removal[i])) for i in mine.tolist() if not np.isnan(removal[i])]
        lo, n = int(first[p]), int(count[p])
        known += [(readings[i].taken_on, float(r_hours[i])) for i in range(lo, lo + n)]
        got = pump_hours_by_date(evs[j].happened_on, known)
        out[j] = np.nan if got is None else got
    return out


def _values(kind: Kind, keep: np.ndarray, raw: np.ndarray, readings, r_pump, pump_models) -> np.ndarray:
    """Trended values of the readings ``keep``: case drain at reference conditions, |drift|, servo as read."""
    if kind is Kind.NEUTRAL_DRIFT:
        return np.abs(raw)
    if kind is Kind.SERVO_PRESSURE or not len(keep):
        return raw
    sub = [readings[i] for i in keep.tolist()]
    model_index: dict[int, int] = {}
    per_pump = codes([id(m) for m in pump_models], model_index)
    models = list({id(m): m for m in pump_models}.values())
    em = per_pump[r_pump[keep]]

    def column(name: str, model_value: str) -> np.ndarray:
        got = floats(list(map(attrgetter(name), sub)))
        return np.where(np.isnan(got), floats([getattr(m, model_value) for m in models])[em], got)

    dp = column("test_pressure_bar", "ref_pressure_bar")
    temp = column("oil_temp_c", "ref_temp_c")
    grade, vi = column("oil_grade", "oil_grade"), column("oil_vi", "oil_vi")
    pairs, oil = np.unique(np.stack([grade, vi], axis=1), axis=0, return_inverse=True)
    oil = oil.reshape(-1)
    bad = dp <= 0
    nu = np.full(len(sub), np.nan)
    for c, (g, v) in enumerate(pairs.tolist()):
        mine = oil == c
        try:
            a, b = oil_walther(int(g), float(v))
        except (TypeError, ValueError):
            bad |= mine
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
        normalized_value(sub[i], kind, pump_models[int(r_pump[keep[i]])])
    ref_p = floats([m.ref_pressure_bar for m in models])[em]
    return raw * (ref_p / dp) * (nu / nu_ref[em])
