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

How far the future average may stray from that rate (``rate_spread``): the spread of the
rates between consecutive points about the machine's rate, weighted by the days each
interval spans, gives the relative variance ``v`` of a rate over intervals of ``L`` days (the
day-weighted mean interval); the average over ``D`` days ahead then has relative variance
``v * (min(1, L / D) + L / T)`` (independent blocks of length L, plus the uncertainty of the
rate itself from ``T`` days of history; our rule, in the spirit of batch means, Law and
Kelton, Simulation Modeling and Analysis, ch. 9). Machines with under three intervals take
the fleet's median ``v`` and ``L``. ``dates_ahead`` combines it with the crossing quantiles in
log days (quadrature of the half-widths: exact when both are lognormal).
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
                   read_fit: np.ndarray, read_day: np.ndarray, read_meter: np.ndarray,
                   read_cont: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:  # fmt: skip
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
            ev_m.append(e.machine)
            ev_d.append(e.happened_on)
            ev_h.append(e.hours)
        if e.kind is EventKind.METER_REPLACED and e.machine is not None and e.to_hours is not None:
            ev_m.append(e.machine)
            ev_d.append(e.happened_on)
            ev_h.append(e.to_hours)
        elif e.kind is EventKind.MOVE and e.to_machine is not None and e.to_hours is not None:
            ev_m.append(e.to_machine)
            ev_d.append(e.happened_on)
            ev_h.append(e.to_hours)
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


MIN_SPREAD_INTERVALS = 3  # intervals a machine needs for its own rate spread
MAX_REL_SD = 1.0  # relative sd of a future average rate is capped here (log scale)
Z90 = 1.2815515655446004  # scipy.stats.norm.ppf(0.9)


def rate_spread(machine: np.ndarray, day: np.ndarray, hours: np.ndarray, rates: dict[int, float | None],
                today: date, window_days: int = 365) -> dict[int, tuple[float, float, float, int]]:  # fmt: skip
    """Per machine code in ``rates``: (v, L, T, last point day) of the module docstring; NaN v for none."""
    t = today.toordinal()
    out: dict[int, tuple[float, float, float, int]] = {}
    if not rates:
        return out
    want = np.zeros(max([*rates, int(machine.max(initial=-1))]) + 2, dtype=bool)
    want[list(rates)] = True
    keep = want[machine] & (day <= t) & np.isfinite(hours)
    m, d, h = machine[keep], day[keep].astype(np.int64), hours[keep]
    order = np.lexsort((h, d, m))
    m, d, h = m[order], d[order].astype(float), h[order]
    same = m[1:] == m[:-1]
    dd, dh = np.diff(d), np.diff(h)
    use = same & (dd >= 1) & (d[1:] >= t - window_days)
    mi, dd, dh = m[1:][use], dd[use], dh[use]
    slope = np.array([np.nan if rates.get(c) is None else rates[c] for c in mi.tolist()], dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        dev = np.where(slope > 0, (dh / dd - slope) / slope, np.nan)
    ok = np.isfinite(dev)
    mi, dd, dev = mi[ok], dd[ok], dev[ok]
    codes_ = np.array(sorted(rates), dtype=np.int64)
    pos = np.searchsorted(codes_, mi)
    n = np.bincount(pos, minlength=len(codes_))
    total = np.bincount(pos, weights=dd, minlength=len(codes_))
    sq = np.bincount(pos, weights=dd * dd, minlength=len(codes_))
    var = np.bincount(pos, weights=dd * dev * dev, minlength=len(codes_))
    with np.errstate(invalid="ignore", divide="ignore"):
        v = np.where(total > 0, var / total, np.nan)
        length = np.where(total > 0, sq / total, np.nan)
    own = n >= MIN_SPREAD_INTERVALS
    if own.any():
        v = np.where(own, v, np.median(v[own]))
        length = np.where(own, length, np.median(length[own]))
    else:
        v[:] = np.nan
    last = np.full(len(codes_), -1, dtype=np.int64)
    if len(m):
        ends = np.r_[np.flatnonzero(m[1:] != m[:-1]), len(m) - 1]
        hit = np.searchsorted(codes_, m[ends])
        found = (hit < len(codes_)) & (codes_[np.minimum(hit, len(codes_) - 1)] == m[ends])
        last[hit[found]] = d[ends][found].astype(np.int64)
    for i, c in enumerate(codes_.tolist()):
        out[c] = (float(v[i]), float(length[i]), float(max(total[i], length[i] if np.isfinite(length[i]) else 0.0)),
                  int(last[i]))
    return out


def dates_ahead(remaining: np.ndarray, per_day: np.ndarray, v: np.ndarray, length: np.ndarray,
                span: np.ndarray) -> np.ndarray:  # fmt: skip
    """(S, 3) days ahead of P10/P50/P90 remaining hours (S, 3) at (S,) hours a day, widened by the
    utilisation spread (module docstring); -1 for no date. Rows with NaN ``v`` keep the plain dates."""
    remaining = np.asarray(remaining, dtype=float)
    rate = np.asarray(per_day, dtype=float)[:, None]
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        plain = remaining / rate
        d50 = np.where(np.isfinite(plain[:, 1]) & (plain[:, 1] > 0), plain[:, 1],
                       np.where(np.isfinite(plain[:, 0]) & (plain[:, 0] > 0), plain[:, 0], np.nan))
        rel = v * (np.minimum(1.0, length / d50) + length / np.maximum(span, 1.0))
        sd = np.minimum(np.sqrt(np.where(np.isfinite(rel) & (rel > 0), rel, 0.0)), MAX_REL_SD)[:, None]
        wide = Z90 * sd
        log = np.log(plain)
        mid = log[:, 1:2]
        has_mid = np.isfinite(mid)
        lo = np.where(has_mid, mid - np.sqrt((mid - log[:, 0:1]) ** 2 + wide**2), log[:, 0:1] - wide)  # no P50: P10 moves alone
        hi = np.where(has_mid, mid + np.sqrt((log[:, 2:3] - mid) ** 2 + wide**2), log[:, 2:3] + wide)
        days = np.concatenate([np.exp(lo), plain[:, 1:2], np.exp(hi)], axis=1)
        days = np.where(remaining <= 0, 0.0, days)
        days = np.where(np.isfinite(remaining), days, np.inf)
    return np.where(rate > 0, days_until(days, 1.0), days_until(remaining, rate))


def pump_rate_spread(timeline: Timeline, machines: Sequence[str | None], per_day: Sequence[float | None],
                     today: date) -> tuple[np.ndarray, ...]:  # fmt: skip
    """(v, L, T, last point day) per pump of ``rate_spread`` for each pump's current machine (None: no machine)."""
    n = len(machines)
    v, length, span, last = np.full(n, np.nan), np.full(n, np.nan), np.full(n, np.nan), np.full(n, -1, dtype=np.int64)
    index = timeline.machine_index
    rates: dict[int, float | None] = {}
    for m, r in zip(machines, per_day):
        if m is not None and m in index:
            rates[index[m]] = r
    if not rates:
        return v, length, span, last
    points = machine_points(timeline.fits, timeline.meters, timeline.events, index, timeline.fit, timeline.day,
                            timeline.meter, timeline.cont)  # fmt: skip
    got = rate_spread(*points, rates, today)
    for i, m in enumerate(machines):
        if m is not None and m in index and index[m] in got:
            v[i], length[i], span[i], last[i] = got[index[m]]
    return v, length, span, last


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
