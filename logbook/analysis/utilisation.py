"""Step of the engine: machine utilisation (operating hours per calendar day), and hours turned into dates.

A machine's points are its continuous hours (``timeline``) at fittings, removals,
readings taken while a pump sat in it and events with a meter reading. Utilisation is
the Theil-Sen slope (Sen, JASA 1968: the median of pairwise slopes) of those hours
against date over the last ``window_days``, so that a long gap, a meter typo or a quiet
month does not swing it; with too little recent history (under two points or
``min_span_days``) the whole history; with two or more points on fewer days than that,
the straight line from the first to the last day; clipped to 0-24 h a day. Points
that are not finite numbers are left out. Machines with the same number of points
are done in one array step.
"""

from __future__ import annotations

from collections.abc import Sequence
from datetime import date

import numpy as np

from logbook.analysis.timeline import (
    DAY_BITS,
    NEVER,
    FitmentTable,
    MeterTable,
    Timeline,
    codes,
    floats,
    ordinals,
)
from logbook.model import Event, EventKind

MAX_HOURS_PER_DAY = 24.0


def machine_points(fits: FitmentTable, meters: MeterTable, events: Sequence[Event], machine_index: dict[str, int],
                   read_fit: np.ndarray, read_day: np.ndarray, read_meter: np.ndarray, read_cont: np.ndarray):  # fmt: skip
    """(machine code, day, continuous hours) of every point, as three arrays.

    ``read_fit`` is the fitment of each reading (-1 for none) and ``read_cont`` its continuous
    machine hours (on the fitment's machine); readings outside any fitment are no points.
    """
    mach, day, meter = [], [], []
    removed = (fits.removed != NEVER) & np.isfinite(fits.meter_at_removal)
    mach += [fits.machine, fits.machine[removed]]
    day += [fits.fitted, fits.removed[removed]]
    meter += [fits.meter_at_fit, fits.meter_at_removal[removed]]
    ev_m, ev_d, ev_h = [], [], []
    for e in events:
        if e.machine is not None and e.hours is not None:
            ev_m.append(e.machine), ev_d.append(e.happened_on), ev_h.append(e.hours)
        if e.kind is EventKind.METER_REPLACED and e.machine is not None and e.to_hours is not None:
            ev_m.append(e.machine), ev_d.append(e.happened_on), ev_h.append(e.to_hours)
        elif e.kind is EventKind.MOVE and e.to_machine is not None and e.to_hours is not None:
            ev_m.append(e.to_machine), ev_d.append(e.happened_on), ev_h.append(e.to_hours)
    mach.append(codes(ev_m, machine_index))
    day.append(ordinals(ev_d))
    meter.append(floats(ev_h))
    m, d, h = np.concatenate(mach), np.concatenate(day), np.concatenate(meter)
    c = meters.continuous(m, d, h)
    held = read_fit >= 0
    return (np.concatenate([m, fits.machine[read_fit[held]]]), np.concatenate([d, read_day[held]]),
            np.concatenate([c, read_cont[held]]))  # fmt: skip


def _median_slopes(days: np.ndarray, hours: np.ndarray) -> np.ndarray:
    """Theil-Sen slope of each row of (M, n) points: median of (h_i - h_j) / (d_i - d_j) over d_i > d_j."""
    dx = days[:, :, None] - days[:, None, :]
    dy = hours[:, :, None] - hours[:, None, :]
    valid = dx > 0
    with np.errstate(invalid="ignore", divide="ignore"):
        slopes = np.where(valid, dy / dx, np.inf).reshape(len(days), -1)
    slopes.sort(axis=1)
    count = valid.reshape(len(days), -1).sum(axis=1)
    rows = np.arange(len(days))
    hi = slopes[rows, count // 2]
    lo = slopes[rows, np.maximum(count - 1, 0) // 2]
    return np.where(count % 2 == 1, hi, (lo + hi) / 2)


def utilisation(machine: np.ndarray, day: np.ndarray, hours: np.ndarray, wanted: Sequence[int], today: date,
                window_days: int = 365, min_span_days: int = 28) -> dict[int, float | None]:  # fmt: skip
    """Hours per day of the ``wanted`` machine codes (None where the points give none: see the module docstring)."""
    out: dict[int, float | None] = {m: None for m in wanted}
    t = today.toordinal()
    want = np.zeros(max([*wanted, int(machine.max(initial=-1))]) + 2, dtype=bool)
    want[list(wanted)] = True
    keep = want[machine] & (day <= t) & np.isfinite(hours)
    m, d, h = machine[keep], day[keep], hours[keep]
    order = np.argsort((m << DAY_BITS) + d, kind="stable")  # by machine, then day
    m, d, h = m[order], d[order].astype(float), h[order]
    if not len(m):
        return out
    starts = np.flatnonzero(np.r_[True, m[1:] != m[:-1]])
    ends = np.r_[starts[1:], len(m)]
    codes_ = m[starts]
    slope, theil = _window_slopes(d, h, starts, ends, t - window_days, min_span_days)
    few = ~theil & (ends - starts >= 2) & (d[ends - 1] - d[starts] > 0)
    slope = np.where(few, _straight_slopes(d, h, starts, ends), slope)
    for g, code in enumerate(codes_.tolist()):
        if theil[g] or few[g]:
            out[code] = float(slope[g])
    return out


def _window_slopes(d, h, starts, ends, since: int, min_span_days: int) -> tuple[np.ndarray, np.ndarray]:
    """Theil-Sen slope of each machine's points (rows starts:ends, in day order) since ``since``, or of
    all its points when those are under two or span under ``min_span_days``; and which machines have one."""
    recent = d >= since
    n_rec = np.add.reduceat(recent.astype(np.int64), starts)
    first_rec = starts + (ends - starts - n_rec)  # points are in day order: the recent ones come last
    span_rec = np.where(n_rec > 0, d[ends - 1] - d[np.minimum(first_rec, ends - 1)], 0.0)
    span_all = d[ends - 1] - d[starts]
    use_rec = (n_rec >= 2) & (span_rec >= min_span_days)
    use_all = ~use_rec & (ends - starts >= 2) & (span_all >= min_span_days)
    lo = np.where(use_rec, first_rec, starts)
    count = ends - lo
    slope = np.full(len(starts), np.nan)
    theil = use_rec | use_all
    for n in np.unique(count[theil]).tolist():  # machines with the same number of points at once
        rows = np.flatnonzero(theil & (count == n))
        cols = lo[rows, None] + np.arange(n)[None, :]
        slope[rows] = _median_slopes(d[cols], h[cols])
    return np.clip(slope, 0.0, MAX_HOURS_PER_DAY), theil


def _straight_slopes(d, h, starts, ends) -> np.ndarray:
    """Slope of the straight line from each machine's first day (its lowest hours) to its last (highest)."""
    group = np.repeat(np.arange(len(starts)), ends - starts)
    h_last = np.maximum.reduceat(np.where(d == d[ends - 1][group], h, -np.inf), starts)
    h_first = np.minimum.reduceat(np.where(d == d[starts][group], h, np.inf), starts)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.clip((h_last - h_first) / (d[ends - 1] - d[starts]), 0.0, MAX_HOURS_PER_DAY)


def machine_utilisation(timeline: Timeline, machines: Sequence[str], today: date) -> dict[str, float | None]:
    """Hours per day of the named machines (None where the points give none)."""
    points = machine_points(timeline.fits, timeline.meters, timeline.events, timeline.machine_index, timeline.fit,
                            timeline.day, timeline.meter, timeline.cont)  # fmt: skip
    wanted = sorted({timeline.machine_index.setdefault(m, len(timeline.machine_index)) for m in machines})
    names = {c: m for m, c in timeline.machine_index.items()}
    return {names[c]: v for c, v in utilisation(*points, wanted, today).items()}


def days_until(remaining, per_day):
    """Whole days (rounded up) until ``remaining`` hours have run at ``per_day`` hours a day, on scalars or
    broadcasting arrays; -1 for no date (NaN or infinite hours, no utilisation, or beyond 200 years)."""
    remaining, per_day = np.asarray(remaining, dtype=float), np.asarray(per_day, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        days = remaining / per_day
        ok = np.isfinite(remaining) & (per_day > 0) & ~(days > 366 * 200)
        step = np.ceil(np.where(ok, days, 0.0) - 1e-9)
    return np.where(ok, step, -1).astype(np.int64)


def days_ahead(remaining: np.ndarray, per_day: np.ndarray) -> np.ndarray:
    """``days_until`` for (S, Q) remaining hours at (S,) hours a day."""
    return days_until(remaining, per_day[:, None])
