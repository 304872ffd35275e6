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

Machines that stand still (docs/conditions.md). A machine's "parked" event stops its
hours from that day, "back in service" restarts them; the days between (and from a
parked day without a return up to today) are not running days: the rates above are
taken against running days (calendar days less parked ones), a pump accrues no hours
over them, and a machine parked now is assumed to restart tomorrow at its rate (the
earliest it could: a plan must not come late), which its forecast says. Spells the hour
meter shows without a "parked" event (``meter_standstills``) are left out the same way;
spells in two different years are a pattern: the rate is then the average over whole
years (``whole_year_rate``) instead, spread over the months by the spells' shares of
each day of the year (``pattern_months``), counted ahead as a season's. Seasons: when
the last three years of hour-meter evidence show months of near-zero use (month-of-year
rate under ``LOW_SHARE`` of the year's average in one run of ``MIN_LOW_MONTHS`` to
``MAX_LOW_MONTHS`` months, each of them low in two different years, and a positive rate
otherwise), the machine runs by month-of-year rates: its hours
a day are their year average and the dates count each future day at its month's rate
(``seasonal_days``); the spread about that profile still widens P10 and P90. The
thresholds are ours (common practice, no published source).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
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

#: Parked spans per machine code: [(first parked day, first running day again or NEVER)], in order.
Spans = dict[int, list[tuple[int, int]]]


def parked_spans(events: Sequence[Event], machine_index: dict[str, int]) -> Spans:
    """The spans each machine stood still: from a "parked" event's day to the next "back in service"
    (NEVER while it has none); a second "parked" before a return, or a return without one, changes nothing."""
    marks = sorted(((e.machine, e.happened_on.toordinal(), e.id or 0, e.kind) for e in events
                    if e.kind in (EventKind.PARKED, EventKind.BACK_IN_SERVICE) and e.machine is not None),
                   key=lambda t: t[:3])  # fmt: skip
    out: Spans = {}
    since: dict[str, int] = {}
    for machine, day, _, kind in marks:
        if kind is EventKind.PARKED:
            since.setdefault(machine, day)
        elif machine in since:
            start = since.pop(machine)
            if day > start:
                out.setdefault(machine_index.setdefault(machine, len(machine_index)), []).append((start, day))
    for machine, start in since.items():
        out.setdefault(machine_index.setdefault(machine, len(machine_index)), []).append((start, NEVER))
    return out


def running_day(machine: np.ndarray, day: np.ndarray, spans: Spans | None) -> np.ndarray:
    """Each day less the parked days of its machine before it (a parked day counts as the span's
    start): the axis the rates are taken on. Days of machines never parked come back unchanged."""
    out = np.asarray(day, dtype=float).copy()
    if not spans:
        return out
    for code, mine in spans.items():
        rows = np.flatnonzero(machine == code)
        if not len(rows):
            continue
        d = np.asarray(day, dtype=float)[rows]
        lost = np.zeros(len(rows))
        for start, end in mine:
            lost += np.clip(d - start, 0.0, end - start)
        out[rows] = d - lost
    return out


def running_days_between(machine: int, first: int, last: int, spans: Spans | None) -> int:
    """Running days of ``machine`` from day ``first`` to day ``last`` (0 when ``last`` is not after it)."""
    if last <= first:
        return 0
    both = running_day(np.array([machine, machine]), np.array([first, last]), spans)
    return int(round(both[1] - both[0]))


def parked_since(machine: int, today: int, spans: Spans | None) -> int | None:
    """The day ``machine`` was parked when it still stands on ``today`` (None when it runs)."""
    for start, end in (spans or {}).get(machine, ()):
        if start <= today < end:
            return start
    return None


# Stand-stills the hour meter shows (our rule; thresholds common practice, no published source):
STILL_MIN_DAYS = 60  # running days a run of slow intervals must span
STILL_SHARE = 0.6  # an interval is slow under this share of the machine's usual rate, ...
USUAL_QUANTILE = 0.75  # ... the rate its intervals reach on this share of their days
STILL_LEAST_DAYS = 30  # days not run a run must hold
RECUR_DAYS = 200  # stand-stills this far apart (their middles) are in different years: a pattern
MIN_YEAR_DAYS = 330  # the shortest span the whole-year rate of a pattern is taken over

#: Stand-stills the meter shows, per machine code: [(first point's day, next point's day, days not run)].
Standstills = dict[int, list[tuple[int, int, int]]]


def meter_standstills(machine: np.ndarray, day: np.ndarray, hours: np.ndarray, today: date,
                      recorded: Spans | None = None) -> Standstills:  # fmt: skip
    """Stand-stills the hour meter shows where no "parked" event says so. Intervals between a machine's
    consecutive points (in running days; same-day points skipped) are slow under ``STILL_SHARE`` of its
    usual rate (the day-weighted ``USUAL_QUANTILE`` of its intervals' rates). A run of consecutive slow
    intervals spanning ``STILL_MIN_DAYS`` or more holds ``days - hours / r`` days not run, ``r`` the
    machine's rate over its intervals outside such runs; it counts from ``STILL_LEAST_DAYS`` of them.
    Runs that touch a recorded parked span are left to it; a machine without other intervals has no
    rate to tell one by."""
    t = today.toordinal()
    keep = (day <= t) & np.isfinite(hours)
    m, d, h = machine[keep], day[keep].astype(np.int64), hours[keep]
    order = np.lexsort((h, d, m))
    m, d, h = m[order], d[order], h[order]
    out: Standstills = {}
    if len(m) < 3:
        return out
    run = running_day(m, d, recorded)
    ok = (m[1:] == m[:-1]) & (np.diff(run) >= 1)
    mi, first, last = m[1:][ok], d[:-1][ok], d[1:][ok]
    dd, dh = np.diff(run)[ok], np.maximum(np.diff(h), 0.0)[ok]
    chained = np.r_[False, mi[1:] == mi[:-1]]  # the interval before is the same machine's (same-day points skipped)
    key = np.unique(mi, return_inverse=True)[1]
    n = int(key.max(initial=-1)) + 1
    with np.errstate(invalid="ignore", divide="ignore"):
        slow = dh / dd < STILL_SHARE * _day_weighted_quantile(dh / dd, dd, key, n, USUAL_QUANTILE)[key]
    # runs of slow intervals: a new run where a slow interval does not follow a slow one of the same chain
    begins = slow & ~(np.r_[False, slow[:-1]] & chained)
    label = np.cumsum(begins) - 1
    runs = np.flatnonzero(begins)
    if not runs.size:
        return out
    run_days = np.bincount(label[slow], weights=dd[slow], minlength=len(runs))
    run_hours = np.bincount(label[slow], weights=dh[slow], minlength=len(runs))
    long_run = run_days >= STILL_MIN_DAYS
    inside = slow & long_run[np.maximum(label, 0)]
    with np.errstate(invalid="ignore", divide="ignore"):
        rate = (np.bincount(key, weights=np.where(inside, 0.0, dh), minlength=n)
                / np.bincount(key, weights=np.where(inside, 0.0, dd), minlength=n))  # fmt: skip
        lost = np.where(long_run & (rate[key[runs]] > 0), run_days - run_hours / rate[key[runs]], 0.0)
    tail = np.zeros(len(runs), dtype=np.int64)  # each run's last interval
    np.maximum.at(tail, label[slow], np.flatnonzero(slow))
    for r in np.flatnonzero(lost >= STILL_LEAST_DAYS).tolist():
        code, a, b = int(mi[runs[r]]), int(first[runs[r]]), int(last[tail[r]])
        if any(start < b and a < end for start, end in (recorded or {}).get(code, ())):
            continue
        out.setdefault(code, []).append((a, b, int(round(lost[r]))))
    return out


def _day_weighted_quantile(rate: np.ndarray, days: np.ndarray, key: np.ndarray, n: int, q: float) -> np.ndarray:
    """(n,) per key 0..n-1: the lowest of its intervals' rates at which their days reach ``q`` of its total."""
    order = np.lexsort((rate, key))
    k, r = key[order], rate[order]
    cum = np.cumsum(days[order])  # increasing across keys: every interval holds a day or more
    before = np.r_[0.0, cum][np.searchsorted(k, np.arange(n))]
    at = np.searchsorted(cum, before + q * np.bincount(key, weights=days, minlength=n), side="left")
    return r[np.minimum(at, len(r) - 1)]


def recurring(found: Standstills) -> set[int]:
    """Machines whose meter shows stand-stills in two different years (their intervals' middles at least
    ``RECUR_DAYS`` apart): a pattern, not a spell (a season the month rates could not resolve, say)."""
    out = set()
    for code, mine in found.items():
        middles = sorted((a + b) / 2 for a, b, _ in mine)
        if len(middles) >= 2 and middles[-1] - middles[0] >= RECUR_DAYS:
            out.add(code)
    return out


def whole_year_rate(day: np.ndarray, hours: np.ndarray) -> float | None:
    """Hours a day from the newest point back to the earlier point whose distance is nearest a whole number
    of years (at least one; the longer span on a tie): over whole years a yearly pattern averages out."""
    order = np.lexsort((hours, day))
    d, h = day[order].astype(float), hours[order]
    span = d[-1] - d[:-1] if len(d) > 1 else np.zeros(0)
    fit = span >= MIN_YEAR_DAYS
    if not fit.any():
        return None
    years = span / 365.25
    off = np.where(fit, np.abs(years - np.round(years)), np.inf)
    i = int(np.argmax(off <= off.min() + 1e-12))  # the points are in day order: the first is the longest span
    return float(np.clip((h[-1] - h[i]) / span[i], 0.0, MAX_HOURS_PER_DAY))


def pattern_months(still: list[tuple[int, int, int]], per_day: float) -> tuple[float, ...] | None:
    """Month-of-year rates (h a day, January first) of a machine whose meter shows a pattern of stand-stills
    (``recurring``): each spell's days not run spread evenly over the days of its run (the meter cannot say
    where in the run they lay), the spells' shares of a day of the year not run averaged over the spells,
    every other day run at one rate, and the months scaled so that their year average is ``per_day`` (the
    whole-year rate). None when no day of the year is left running."""
    idle = np.zeros(365)
    for a, b, lost in still:
        doy = day_of_year(np.arange(a, b))
        share = np.minimum(np.bincount(doy, minlength=365) * (lost / max(b - a, 1)), 1.0)
        idle += share
    running = 1.0 - idle / max(len(still), 1)
    if not running.sum() > 0:
        return None
    month = year_months(date(2025, 1, 1).toordinal(), date(2025, 12, 31).toordinal()) % 12  # a year without 29 Feb
    months = np.bincount(month, weights=running, minlength=12) / np.bincount(month, minlength=12)
    return tuple(float(v) for v in months * (per_day / year_average(months)))


def day_of_year(days: np.ndarray) -> np.ndarray:
    """0-364 of each ordinal day: its day of the year, 29 February counted as 28 February."""
    day = (np.asarray(days, dtype=np.int64) - _EPOCH).astype("datetime64[D]")
    month_start = day.astype("datetime64[M]")
    month = month_start.astype(np.int64) % 12
    in_month = (day - month_start.astype("datetime64[D]")).astype(np.int64)
    return _MONTH_STARTS[month] + np.where(month == 1, np.minimum(in_month, 27), in_month)


_EPOCH = date(1970, 1, 1).toordinal()  # datetime64 counts days from here
_MONTH_STARTS = np.cumsum([0, 31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30])  # days of a year without 29 Feb before each month


def with_standstills(recorded: Spans | None, found: Standstills) -> Spans:
    """The recorded parked spans and the meter's stand-stills of machines without a pattern of them
    (``recurring``) together, each stand-still as a span of its days not run in the middle of its run
    (where they lay inside it matters only to points within a run of several intervals, whose meter
    barely moved: the rates are taken over pairs of points)."""
    out: Spans = {code: list(mine) for code, mine in (recorded or {}).items()}
    pattern = recurring(found)
    for code, mine in found.items():
        if code in pattern:
            continue
        spans = out.setdefault(code, [])
        spans += [(a + (b - a - lost) // 2, a + (b - a - lost) // 2 + lost) for a, b, lost in mine]
        spans.sort()
    return out


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
                window_days: int = 365, min_span_days: int = 28, spans: Spans | None = None
                ) -> dict[int, float | None]:  # fmt: skip
    """Hours per day of the ``wanted`` machine codes (None where the points give none: see the module docstring);
    ``spans``: parked spans (``parked_spans``), whose days are not running days."""
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
    run = running_day(m, d, spans)  # == d for machines never parked
    slope, theil = _window_slopes(d, h, starts, ends, t - window_days, min_span_days, run)
    few = ~theil & (ends - starts >= 2) & (run[ends - 1] - run[starts] > 0)
    slope = np.where(few, _straight_slopes(run, h, starts, ends), slope)
    for g, code in enumerate(codes_.tolist()):
        if theil[g] or few[g]:
            out[code] = float(slope[g])
    return out


def _window_slopes(d, h, starts, ends, since: int, min_span_days: int, run=None) -> tuple[np.ndarray, np.ndarray]:
    """Theil-Sen slope of each machine's points (rows starts:ends, in day order) since ``since``, or of
    all its points when those are under two or span under ``min_span_days``; and which machines have one.
    ``run``: the points' running days (``running_day``), which the spans and slopes are taken on."""
    recent = d >= since
    d = d if run is None else run
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
    return {m: u.per_day for m, u in machine_states(timeline, machines, today).items()}


@dataclass(frozen=True)
class MachineUse:
    """How a machine's hours are counted ahead: its hours per day, the day it was parked when it stands now,
    its month-of-year rates when it runs by season (January first), and the words the forecast shows."""

    per_day: float | None
    parked_on: date | None = None
    months: tuple[float, ...] | None = None
    words: str = ""  # empty: the plain rule (the fleet's note says it)


def machine_states(timeline: Timeline, machines: Sequence[str], today: date) -> dict[str, MachineUse]:
    """``MachineUse`` of each named machine (module docstring)."""
    points = machine_points(timeline.fits, timeline.meters, timeline.events, timeline.machine_index, timeline.fit,
                            timeline.day, timeline.meter, timeline.cont)  # fmt: skip
    wanted = sorted({timeline.machine_index.setdefault(m, len(timeline.machine_index)) for m in machines})
    names = {c: m for m, c in timeline.machine_index.items()}
    spans = timeline_spans(timeline)
    found, pattern, rate_spans = timeline_standstills(timeline, points, today)
    rates = utilisation(*points, wanted, today, spans=rate_spans)
    seasons = month_rates(*points, wanted, today)
    t = today.toordinal()
    out: dict[str, MachineUse] = {}
    for c, rate in rates.items():
        months = seasons.get(c) if rate else None  # no positive rate: no season either
        whole = None
        if c in pattern and months is None and rate is not None:
            mine = (points[0] == c) & (points[1] <= t) & np.isfinite(points[2])
            whole = whole_year_rate(points[1][mine], points[2][mine])
        rate = rate if whole is None else whole
        if whole is not None and whole > 0:
            months = pattern_months(found[c], whole)
        parked = parked_since(c, t, spans)
        per_day = year_average(months) if months is not None else rate
        words = _use_words(parked, per_day, months, found.get(c, []), c in pattern, whole is not None, t)
        out[names[c]] = MachineUse(per_day, date.fromordinal(parked) if parked is not None else None, months, words)
    return out


def _use_words(parked: int | None, per_day: float | None, months, still: list[tuple[int, int, int]],
               pattern: bool, by_years: bool, today: int) -> str:  # fmt: skip
    """What the forecast says of a machine's hours ahead (empty: the plain rule)."""
    words = []
    iso = lambda day: date.fromordinal(day).isoformat()  # noqa: E731
    if parked is not None:
        restart = f"at {per_day:.1f} h a day" if per_day else "(no hours a day known)"
        words.append(f"parked since {iso(parked)}: no hours counted since; dates assume it restarts tomorrow {restart}")
    if by_years:
        spells = ", ".join(f"{iso(a)} to {iso(b)}" for a, b, _ in still[-2:])
        spells = f"{len(still)} spells, the last {spells}" if len(still) > 2 else spells
        words.append(f"its hour meter stood nearly still in more than one year ({spells}): taken as its pattern, "
                     f"dates count each month at its share of those spells, {per_day:.1f} h a day over whole years")
    for a, b, lost in still if not pattern and months is None else ():
        if b > today - 365:  # inside the year the rate is taken over
            words.append(f"stood still about {lost} of the {b - a} days from {iso(a)} to {iso(b)} by its hour "
                         f"meter: not counted in its hours a day")
    if months is not None and not by_years:
        low = [_MONTHS[i] for i, r in enumerate(months) if r < LOW_SHARE * (per_day or 0.0)]
        words.append(f"runs by season (near-zero use in {', '.join(low)} each year): dates count each month at "
                     f"its own rate, {per_day:.1f} h a day over the year")
    return "; ".join(words)


def timeline_spans(timeline: Timeline) -> Spans:
    """The parked spans of a timeline's machines, found once per timeline."""
    got = getattr(timeline, "_parked_spans", None)
    if got is None:
        got = parked_spans(timeline.events, timeline.machine_index)
        timeline._parked_spans = got  # type: ignore[attr-defined]
    return got


def timeline_standstills(timeline: Timeline, points: tuple[np.ndarray, np.ndarray, np.ndarray],
                         today: date) -> tuple[Standstills, set[int], Spans]:  # fmt: skip
    """``meter_standstills`` of a timeline's machines as of ``today``, the machines with a pattern of them
    (``recurring``) and the spans their rates leave out (``with_standstills``): found once per timeline
    and day, for the rates and for their spread."""
    got = getattr(timeline, "_standstills", None)
    if got is None or got[0] != today:
        recorded = timeline_spans(timeline)
        found = meter_standstills(points[0], points[1], points[2], today, recorded)
        got = (today, found, recurring(found), with_standstills(recorded, found))
        timeline._standstills = got  # type: ignore[attr-defined]
    return got[1], got[2], got[3]


_MONTHS = ("Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec")
SEASON_WINDOW_DAYS = 3 * 365 + 1  # evidence looked at for seasons
MIN_SEASON_SPAN_DAYS = 700  # about two years of it
LOW_SHARE = 0.2  # a month under this share of the year's average rate is near-zero use
MIN_LOW_MONTHS = 2
MAX_LOW_MONTHS = 8
MIN_MONTH_DAYS = 15  # days of evidence a (year, month) needs to count
_DAYS_IN_MONTH = np.array([31, 28.25, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31])


def year_average(months) -> float:
    """Hours a day over a year of month-of-year rates (each month weighted by its days)."""
    return float(np.dot(np.asarray(months, dtype=float), _DAYS_IN_MONTH) / _DAYS_IN_MONTH.sum())


def month_rates(machine: np.ndarray, day: np.ndarray, hours: np.ndarray, wanted: Sequence[int], today: date
                ) -> dict[int, tuple[float, ...]]:  # fmt: skip
    """Month-of-year rates (h a day, January first) of the ``wanted`` machines that run by season (module
    docstring); others are left out. Each interval between consecutive points spreads its hours evenly
    over its days; a month's rate is the mean over the days of that month with evidence."""
    t = today.toordinal()
    out: dict[int, tuple[float, ...]] = {}
    want = np.zeros(max([*wanted, int(machine.max(initial=-1))]) + 2, dtype=bool)
    want[list(wanted)] = True
    keep = want[machine] & (day <= t) & (day >= t - SEASON_WINDOW_DAYS) & np.isfinite(hours)
    m, d, h = machine[keep], day[keep].astype(np.int64), hours[keep]
    order = np.lexsort((h, d, m))
    m, d, h = m[order], d[order], h[order]
    if len(m) < 3:
        return out
    starts = np.flatnonzero(np.r_[True, m[1:] != m[:-1]])
    ends = np.r_[starts[1:], len(m)]
    # a cheap necessary condition first, for all machines at once: enough points over enough days, and an
    # interval whose rate is under LOW_SHARE of the machine's average (else no month can be near zero)
    same = m[1:] == m[:-1]
    dd, dh = np.diff(d).astype(float), np.diff(h)
    ok = same & (dd >= 1)
    rate = np.where(ok, np.clip(np.maximum(dh, 0.0) / np.maximum(dd, 1.0), 0.0, MAX_HOURS_PER_DAY), 0.0)
    group = np.cumsum(np.r_[0, ~same.astype(bool)])[:-1] if len(same) else np.zeros(0, dtype=np.int64)
    days = np.bincount(group, weights=np.where(ok, dd, 0.0), minlength=len(starts))
    run = np.bincount(group, weights=np.where(ok, dd * rate, 0.0), minlength=len(starts))
    with np.errstate(invalid="ignore", divide="ignore"):
        average = run / days
    low = np.bincount(group, weights=(ok & (rate < LOW_SHARE * average[group] * (1 + 1e-9))).astype(float),
                      minlength=len(starts)) > 0  # fmt: skip
    maybe = (ends - starts >= 3) & (d[ends - 1] - d[starts] >= MIN_SEASON_SPAN_DAYS) & (average > 0) & low
    for g in np.flatnonzero(maybe).tolist():
        months = _season(d[starts[g]:ends[g]], h[starts[g]:ends[g]])
        if months is not None:
            out[int(m[starts[g]])] = months
    return out


def _season(d: np.ndarray, h: np.ndarray) -> tuple[float, ...] | None:
    dd, dh = np.diff(d), np.diff(h)
    ok = dd >= 1
    dd, dh, first = dd[ok], dh[ok], d[:-1][ok]
    rate = np.clip(np.maximum(dh, 0.0) / np.maximum(dd, 1), 0.0, MAX_HOURS_PER_DAY)
    days = np.concatenate([np.arange(f, f + n) for f, n in zip(first.tolist(), dd.tolist())]) if len(dd) else np.zeros(0)
    if not len(days):
        return None
    per_day = np.repeat(rate, dd)
    dates = [date.fromordinal(int(x)) for x in (days[0], days[-1])]
    # (year, month) of every day from the first ordinal, by stepping the calendar once
    ym = year_months(int(days[0]), int(days[-1]))[days - days[0]]
    month = ym % 12
    average = float(per_day.mean())
    if not average > 0 or dates[1] <= dates[0]:
        return None
    count = np.bincount(month, minlength=12)
    if (count == 0).any():
        return None
    months = np.bincount(month, weights=per_day, minlength=12) / count
    is_low = months < LOW_SHARE * average
    low = np.flatnonzero(is_low)
    if not MIN_LOW_MONTHS <= len(low) <= MAX_LOW_MONTHS or int((is_low & ~np.roll(is_low, 1)).sum()) != 1:
        return None  # a season is one run of months (circularly: Nov to Feb is one)
    n_ym = np.bincount(ym - ym.min())
    ym_rate = np.bincount(ym - ym.min(), weights=per_day) / np.maximum(n_ym, 1)
    for m in low.tolist():
        years = [i for i in range(len(n_ym)) if (i + ym.min()) % 12 == m and n_ym[i] >= MIN_MONTH_DAYS
                 and ym_rate[i] < LOW_SHARE * average]  # fmt: skip
        if len(years) < 2:
            return None
    return tuple(float(x) for x in months)


def year_months(first: int, last: int) -> np.ndarray:
    """12 * year + month - 1 of each day from ordinal ``first`` to ``last``."""
    out = np.empty(last - first + 1, dtype=np.int64)
    day = first
    while day <= last:
        dt = date.fromordinal(day)
        nxt = date(dt.year + (dt.month == 12), dt.month % 12 + 1, 1).toordinal()
        out[day - first : min(nxt, last + 1) - first] = 12 * dt.year + dt.month - 1
        day = nxt
    return out


def seasonal_days(days: np.ndarray, per_day: np.ndarray, months: np.ndarray, today: date) -> np.ndarray:
    """(S, Q) days ahead made at (S,) ``per_day`` hours a day, moved onto (S, 12) month-of-year rates (NaN rows:
    unchanged): the first day by which the months' hours from tomorrow reach the hours those days hold at
    ``per_day``. -1 (no date) and 0 stay; the year ahead repeats after its first 365 days."""
    days = np.asarray(days)
    out = days.copy()
    rows = np.flatnonzero(np.isfinite(months).all(axis=1) & (np.asarray(per_day, dtype=float) > 0))
    if not len(rows):
        return out
    t = today.toordinal()
    month = year_months(t + 1, t + 365) % 12
    for r in rows.tolist():
        cum = np.cumsum(months[r][month])  # hours by the end of each of the next 365 days
        year = cum[-1]
        if not year > 0:
            continue
        for q in range(days.shape[1]):
            d = int(days[r, q])
            if d <= 0:
                continue
            need = d * float(per_day[r])
            whole = int(need // year)
            rest = need - whole * year
            k = 0 if rest <= 0 else int(np.searchsorted(cum, rest - 1e-9)) + 1
            out[r, q] = whole * 365 + k if rest > 0 else whole * 365
    return out


MIN_SPREAD_INTERVALS = 3  # intervals a machine needs for its own rate spread
MAX_REL_SD = 1.0  # relative sd of a future average rate is capped here (log scale)
Z90 = 1.2815515655446004  # scipy.stats.norm.ppf(0.9)


def rate_spread(machine: np.ndarray, day: np.ndarray, hours: np.ndarray, rates: dict[int, float | None],
                today: date, window_days: int = 365, spans: Spans | None = None,
                months: dict[int, tuple[float, ...]] | None = None) -> dict[int, tuple[float, float, float, int]]:  # fmt: skip
    """Per machine code in ``rates``: (v, L, T, last point day) of the module docstring; NaN v for none.
    Intervals are counted in running days (``spans``); a machine with month-of-year rates (``months``)
    is compared with what those rates give over each interval."""
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
    run = running_day(m, d, spans)
    dd, dh = np.diff(run), np.diff(h)
    use = same & (dd >= 1) & (d[1:] >= t - window_days)
    mi, dd, dh = m[1:][use], dd[use], dh[use]
    slope = np.array([np.nan if rates.get(c) is None else rates[c] for c in mi.tolist()], dtype=float)
    if months:
        first, last = d[:-1][use], d[1:][use]
        for i in np.flatnonzero(np.isin(mi, list(months))).tolist():  # expected rate of the interval by season
            profile = np.asarray(months[int(mi[i])], dtype=float)
            slope[i] = float(profile[year_months(int(first[i]), int(last[i]) - 1) % 12].mean())
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
                     today: date, months: dict[int, tuple[float, ...]] | None = None) -> tuple[np.ndarray, ...]:  # fmt: skip
    """(v, L, T, last point day) per pump of ``rate_spread`` for each pump's current machine (None: no machine);
    ``months``: month-of-year rates of the machines that run by season, by machine code."""
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
    got = rate_spread(*points, rates, today, spans=timeline_standstills(timeline, points, today)[2], months=months)
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
