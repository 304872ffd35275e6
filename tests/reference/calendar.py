"""Reference: machine utilisation (operating hours per calendar day) and hours turned into dates, one machine at a time.

Utilisation is the Theil-Sen slope (median of pairwise slopes; Sen, JASA 1968) of
continuous machine hours against date over the last ``window_days``, so that a long
gap, a meter typo or a quiet month does not swing it; with too little recent history
the whole history is used. Points that are not finite numbers are left out.
"""

from __future__ import annotations

from collections import defaultdict
from collections.abc import Iterable
from datetime import date, timedelta

import numpy as np
from scipy import stats

from tests.reference.hours import continuous_hours, fitment_on
from logbook.model import Event, EventKind, Fitment, Reading

MAX_HOURS_PER_DAY = 24.0


def machine_hour_points(
    fitments: Iterable[Fitment], readings: Iterable[Reading], events: Iterable[Event]
) -> dict[str, list[tuple[date, float]]]:
    """(date, continuous machine hours) per machine from fitments, readings and events."""
    fitments, events = tuple(fitments), tuple(events)
    by_serial: dict[str, list[Fitment]] = defaultdict(list)
    for f in fitments:
        by_serial[f.serial].append(f)
    raw: dict[str, list[tuple[date, float]]] = defaultdict(list)
    for f in fitments:
        raw[f.machine].append((f.fitted_on, f.machine_hours_at_fit))
        if f.removed_on is not None and f.machine_hours_at_removal is not None:
            raw[f.machine].append((f.removed_on, f.machine_hours_at_removal))
    for r in readings:
        fit = fitment_on(by_serial.get(r.serial, ()), r.taken_on)
        if fit is not None:
            raw[fit.machine].append((r.taken_on, r.machine_hours))
    for e in events:
        if e.machine is not None and e.hours is not None:
            raw[e.machine].append((e.happened_on, e.hours))
        if e.kind is EventKind.METER_REPLACED and e.machine is not None and e.to_hours is not None:
            raw[e.machine].append((e.happened_on, e.to_hours))
        elif e.kind is EventKind.MOVE and e.to_machine is not None and e.to_hours is not None:
            raw[e.to_machine].append((e.happened_on, e.to_hours))
    machine_events: dict[str, list[Event]] = defaultdict(list)
    for e in events:
        if e.kind is EventKind.METER_REPLACED and e.machine is not None:
            machine_events[e.machine].append(e)
    return {
        m: sorted((d, continuous_hours(m, h, d, machine_events.get(m, ()))) for d, h in pts)
        for m, pts in raw.items()
    }


def parked_spans(events: Iterable[Event]) -> dict[str, list[tuple[date, date | None]]]:
    """Per machine, the spans it stood still: a "parked" event's day up to the next "back in service"
    (None while it has none). A second "parked" before a return, or a return without one, changes nothing;
    a return on the parked day itself leaves no span."""
    out: dict[str, list[tuple[date, date | None]]] = defaultdict(list)
    marks = sorted((e for e in events if e.machine is not None and e.kind in (EventKind.PARKED, EventKind.BACK_IN_SERVICE)),
                   key=lambda e: (e.machine, e.happened_on, e.id or 0))  # fmt: skip
    since: dict[str, date] = {}
    for e in marks:
        if e.kind is EventKind.PARKED:
            since.setdefault(e.machine, e.happened_on)
        elif e.machine in since:
            start = since.pop(e.machine)
            if e.happened_on > start:
                out[e.machine].append((start, e.happened_on))
    for machine, start in since.items():
        out[machine].append((start, None))
    return dict(out)


def running_day(day: date, spans: Iterable[tuple[date, date | None]] = ()) -> int:
    """The day's ordinal less the machine's parked days before it (a parked day counts as its span's start)."""
    lost = 0
    for start, end in spans:
        if day > start:
            lost += ((min(day, end) if end is not None else day) - start).days
    return day.toordinal() - lost


def hours_per_day(
    points: Iterable[tuple[date, float]], today: date, window_days: int = 365, min_span_days: int = 28,
    spans: Iterable[tuple[date, date | None]] = (),
) -> float | None:
    """Robust utilisation, hours/day (0-24), from (date, continuous hours) points; None if under 2 days apart.
    Slopes and spans are taken on running days (``running_day``: parked days left out), recency on the calendar."""
    pts = sorted(p for p in points if p[0] <= today and np.isfinite(p[1]))
    if len(pts) < 2:
        return None
    spans = tuple(spans)
    days = np.array([running_day(d, spans) for d, _ in pts], dtype=float)
    hrs = np.array([h for _, h in pts], dtype=float)
    recent = np.array([d.toordinal() >= today.toordinal() - window_days for d, _ in pts])
    for mask in (recent, np.ones_like(recent)):
        d, h = days[mask], hrs[mask]
        if d.size >= 2 and d.max() - d.min() >= min_span_days and np.unique(d).size >= 2:
            slope = stats.theilslopes(h, d)[0]
            return float(np.clip(slope, 0.0, MAX_HOURS_PER_DAY))
    if days.max() > days.min():
        return float(np.clip((hrs[-1] - hrs[0]) / (days.max() - days.min()), 0.0, MAX_HOURS_PER_DAY))
    return None


def date_after_hours(today: date, remaining_hours: float | None, per_day: float | None) -> date | None:
    """The calendar day on which ``remaining_hours`` will have run at ``per_day`` hours a day."""
    if remaining_hours is None or per_day is None or per_day <= 0 or not np.isfinite(remaining_hours):
        return None
    days = remaining_hours / per_day
    if days > 366 * 200:
        return None
    return today + timedelta(days=int(np.ceil(days - 1e-9)))


def rate_spread(points: Iterable[tuple[date, float]], rate: float | None, today: date,
                window_days: int = 365, spans: Iterable[tuple[date, date | None]] = (),
                months: tuple[float, ...] | None = None) -> tuple[float, float, float, int]:  # fmt: skip
    """(v, L, T, intervals) of one machine: the day-weighted relative variance of the rates between
    consecutive points (ending within ``window_days``) about ``rate`` (about the mean of the month rates
    over the interval's days for a machine run by season), the day-weighted mean interval, the days
    covered and how many intervals, intervals in running days; NaN v and L without any."""
    pts = sorted(p for p in points if p[0] <= today and np.isfinite(p[1]))
    spans = tuple(spans)
    total = squares = var = 0.0
    count = 0
    for (d0, h0), (d1, h1) in zip(pts, pts[1:]):
        dd = running_day(d1, spans) - running_day(d0, spans)
        if dd < 1 or d1.toordinal() < today.toordinal() - window_days or rate is None or rate <= 0:
            continue
        expected = rate
        if months is not None:
            span_days = [d0 + timedelta(i) for i in range((d1 - d0).days)]
            expected = float(np.mean([months[d.month - 1] for d in span_days]))
        if not expected > 0:
            continue
        dev = ((h1 - h0) / dd - expected) / expected
        total += dd
        squares += dd * dd
        var += dd * dev * dev
        count += 1
    if not total:
        return float("nan"), float("nan"), 0.0, 0
    return var / total, squares / total, total, count


def fleet_spreads(own: dict[str, tuple[float, float, float, int]]) -> dict[str, tuple[float, float, float]]:
    """Machines with under three intervals take the median v and L of those with three or more."""
    rich = [s for s in own.values() if s[3] >= 3]
    if not rich:
        return {m: (float("nan"), float("nan"), 0.0) for m in own}
    v_med = float(np.median([s[0] for s in rich]))
    l_med = float(np.median([s[1] for s in rich]))
    return {m: (s[0], s[1], s[2]) if s[3] >= 3 else (v_med, l_med, max(s[2], l_med)) for m, s in own.items()}


def dates_with_spread(today: date, remaining: list[float | None], per_day: float | None,
                      spread: tuple[float, float, float] | None) -> list[date | None]:  # fmt: skip
    """P10/P50/P90 dates: the log-days quantiles of the crossing widened by the utilisation spread,
    half-widths added in quadrature (z = 1.2816 for 10 / 90 %)."""
    import math

    if per_day is None or per_day <= 0 or spread is None or not math.isfinite(spread[0]):
        return [date_after_hours(today, r, per_day) for r in remaining]
    v, length, span = spread
    plain = [None if r is None or not math.isfinite(r) else r / per_day for r in remaining]
    base = plain[1] if plain[1] is not None and plain[1] > 0 else plain[0] if plain[0] is not None and plain[0] > 0 else None
    sd = 0.0
    if base is not None:
        rel = v * (min(1.0, length / base) + length / max(span, 1.0))
        sd = min(math.sqrt(rel), 1.0) if rel > 0 else 0.0
    wide = 1.2815515655446004 * sd
    out: list[float | None] = [None, plain[1], None]
    if plain[0] is not None:
        if plain[0] <= 0:
            out[0] = 0.0
        elif plain[1] is not None and plain[1] > 0:
            m = math.log(plain[1])
            out[0] = math.exp(m - math.sqrt((m - math.log(plain[0])) ** 2 + wide * wide))
        else:
            out[0] = math.exp(math.log(plain[0]) - wide)
    if plain[2] is not None:
        if plain[2] <= 0:
            out[2] = 0.0
        elif plain[1] is not None and plain[1] > 0:
            m = math.log(plain[1])
            out[2] = math.exp(m + math.sqrt((math.log(plain[2]) - m) ** 2 + wide * wide))
        else:
            out[2] = math.exp(math.log(plain[2]) + wide)
    return [date_after_hours(today, d, 1.0) if d is not None else None for d in out]


# -- seasons: month-of-year rates (thresholds ours: common practice, no published source) ---------------

SEASON_WINDOW_DAYS = 3 * 365 + 1
MIN_SEASON_SPAN_DAYS = 700
LOW_SHARE = 0.2
MIN_LOW_MONTHS, MAX_LOW_MONTHS = 2, 8
MIN_MONTH_DAYS = 15
MONTH_DAYS = (31, 28.25, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31)


def month_rates(points: Iterable[tuple[date, float]], today: date) -> tuple[float, ...] | None:
    """A machine's month-of-year rates (h a day, January first) when its last three years of points
    show a season, else None: every day between two consecutive points runs at that interval's rate
    (its gain over its days, 0 to 24); a month's rate is the mean over its days with evidence; a season
    is one run (around the year) of 2 to 8 months under 20 % of the mean day rate, each such month
    under that share in at least two (year, month)s with 15 days of evidence, every month covered."""
    t = today.toordinal()
    pts = sorted(p for p in points if t - SEASON_WINDOW_DAYS <= p[0].toordinal() <= t and np.isfinite(p[1]))
    if len(pts) < 3 or (pts[-1][0] - pts[0][0]).days < MIN_SEASON_SPAN_DAYS:
        return None
    day_rates: list[tuple[date, float]] = []
    for (d0, h0), (d1, h1) in zip(pts, pts[1:]):
        n = (d1 - d0).days
        if n < 1:
            continue
        r = min(max(h1 - h0, 0.0) / n, MAX_HOURS_PER_DAY)
        day_rates += [(d0 + timedelta(i), r) for i in range(n)]
    if not day_rates:
        return None
    mean = float(np.mean([r for _, r in day_rates]))
    if not mean > 0:
        return None
    by_month: dict[int, list[float]] = defaultdict(list)
    by_year_month: dict[tuple[int, int], list[float]] = defaultdict(list)
    for d, r in day_rates:
        by_month[d.month - 1].append(r)
        by_year_month[(d.year, d.month - 1)].append(r)
    if len(by_month) < 12:
        return None
    months = tuple(float(np.mean(by_month[m])) for m in range(12))
    low = [months[m] < LOW_SHARE * mean for m in range(12)]
    runs = sum(1 for m in range(12) if low[m] and not low[m - 1])
    if not MIN_LOW_MONTHS <= sum(low) <= MAX_LOW_MONTHS or runs != 1:
        return None
    for m in (m for m in range(12) if low[m]):
        years = [ym for ym, rs in by_year_month.items()
                 if ym[1] == m and len(rs) >= MIN_MONTH_DAYS and np.mean(rs) < LOW_SHARE * mean]  # fmt: skip
        if len(years) < 2:
            return None
    return months


def year_average(months: tuple[float, ...]) -> float:
    return sum(r * n for r, n in zip(months, MONTH_DAYS)) / sum(MONTH_DAYS)


def seasonal_date(today: date, plain: date | None, per_day: float | None, months: tuple[float, ...] | None) -> date | None:
    """A date made at ``per_day`` moved onto the month rates: the first day from tomorrow by which the
    month rates' hours reach the hours the plain days hold at ``per_day`` (whole years of the next 365
    days' hours first); no date and today stay."""
    if plain is None or months is None or not per_day or plain <= today:
        return plain
    need = (plain - today).days * per_day
    ahead = [today + timedelta(i) for i in range(1, 366)]
    year = sum(months[d.month - 1] for d in ahead)
    if not year > 0:
        return plain
    whole = int(need // year)
    rest = need - whole * year
    if rest <= 0:
        return today + timedelta(whole * 365)
    got = 0.0
    for k, d in enumerate(ahead, start=1):
        got += months[d.month - 1]
        if got >= rest - 1e-9:
            return today + timedelta(whole * 365 + k)
    return today + timedelta(whole * 365 + 365)


# -- stand-stills the hour meter shows (thresholds ours: common practice, no published source) ---------

STILL_MIN_DAYS = 60
STILL_SHARE = 0.6
USUAL_QUANTILE = 0.75
STILL_LEAST_DAYS = 30
RECUR_DAYS = 200
MIN_YEAR_DAYS = 330


def meter_standstills(points: Iterable[tuple[date, float]], today: date,
                      spans: Iterable[tuple[date, date | None]] = ()) -> list[tuple[date, date, int]]:  # fmt: skip
    """One machine's stand-stills that its meter shows: (first day, last day, days not run) of each run of
    consecutive slow intervals (rate under 60 % of the rate its intervals reach on 75 % of their days,
    in running days, same-day points skipped) that spans 60 running days or more and holds 30 days or
    more not run, reckoned at the machine's rate over its other intervals; runs touching a recorded
    parked span are left out."""
    spans = tuple(spans)
    pts = sorted(p for p in points if p[0] <= today and np.isfinite(p[1]))
    intervals = []  # (first day, last day, running days, hours gained)
    for (d0, h0), (d1, h1) in zip(pts, pts[1:]):
        dd = running_day(d1, spans) - running_day(d0, spans)
        if dd >= 1:
            intervals.append((d0, d1, dd, max(h1 - h0, 0.0)))
    if not intervals:
        return []
    total = sum(iv[2] for iv in intervals)
    got = 0.0
    usual = None
    for iv in sorted(intervals, key=lambda iv: iv[3] / iv[2]):
        got += iv[2]
        if got >= USUAL_QUANTILE * total:
            usual = iv[3] / iv[2]
            break
    slow = [iv[3] / iv[2] < STILL_SHARE * usual for iv in intervals]
    runs: list[list[int]] = []
    for i, is_slow in enumerate(slow):
        if is_slow and i > 0 and slow[i - 1]:
            runs[-1].append(i)
        elif is_slow:
            runs.append([i])
    long_runs = [r for r in runs if sum(intervals[i][2] for i in r) >= STILL_MIN_DAYS]
    inside = {i for r in long_runs for i in r}
    other_days = sum(iv[2] for i, iv in enumerate(intervals) if i not in inside)
    other_hours = sum(iv[3] for i, iv in enumerate(intervals) if i not in inside)
    if not other_days or not other_hours > 0:
        return []
    rate = other_hours / other_days
    out = []
    for r in long_runs:
        lost = sum(intervals[i][2] for i in r) - sum(intervals[i][3] for i in r) / rate
        first, last = intervals[r[0]][0], intervals[r[-1]][1]
        touches = any(start < last and (end is None or first < end) for start, end in spans)
        if lost >= STILL_LEAST_DAYS and not touches:
            out.append((first, last, int(round(lost))))
    return out


def standstill_spans(found: list[tuple[date, date, int]]) -> list[tuple[date, date]]:
    """Each stand-still as a span of its days not run, in the middle of its run."""
    out = []
    for first, last, lost in found:
        start = first + timedelta(((last - first).days - lost) // 2)
        out.append((start, start + timedelta(lost)))
    return out


def is_pattern(found: list[tuple[date, date, int]]) -> bool:
    """Stand-stills in two different years: the middles of the first and the last 200 days or more apart."""
    middles = sorted((a.toordinal() + b.toordinal()) / 2 for a, b, _ in found)
    return len(middles) >= 2 and middles[-1] - middles[0] >= RECUR_DAYS


def whole_year_rate(points: Iterable[tuple[date, float]], today: date) -> float | None:
    """Hours a day from the newest point to the earlier one whose distance is nearest a whole number of
    years, 330 days or more (the longer span on a tie)."""
    pts = sorted(p for p in points if p[0] <= today and np.isfinite(p[1]))
    best = None
    for d, h in pts[:-1]:
        days = (pts[-1][0] - d).days
        if days < MIN_YEAR_DAYS:
            continue
        years = days / 365.25
        off = abs(years - round(years))
        if best is None or off < best[0] - 1e-12 or (abs(off - best[0]) <= 1e-12 and days > best[1]):
            best = (off, days, h)
    if best is None:
        return None
    return float(np.clip((pts[-1][1] - best[2]) / best[1], 0.0, MAX_HOURS_PER_DAY))


def pattern_months(found: list[tuple[date, date, int]], per_day: float) -> tuple[float, ...] | None:
    """Month rates (h a day, January first) of a machine with a pattern of stand-stills: every day of a
    spell's run is not run with the share ``lost / days`` of that run, a (month, day) of the year takes
    the mean over the spells of its share (at most 1 within one spell), the other share runs at one
    rate; the months are means over their days (29 February as 28 February), scaled so their
    year_average is ``per_day``."""
    idle: dict[tuple[int, int], float] = defaultdict(float)
    for first, last, lost in found:
        days = (last - first).days
        mine: dict[tuple[int, int], float] = defaultdict(float)
        for i in range(days):
            d = first + timedelta(i)
            key = (d.month, 28 if (d.month, d.day) == (2, 29) else d.day)
            mine[key] = min(mine[key] + lost / days, 1.0)
        for key, share in mine.items():
            idle[key] += share / len(found)
    by_month: dict[int, list[float]] = defaultdict(list)
    d = date(2025, 1, 1)
    while d.year == 2025:
        by_month[d.month - 1].append(1.0 - idle[(d.month, d.day)])
        d += timedelta(1)
    if not sum(sum(v) for v in by_month.values()) > 0:
        return None
    months = tuple(float(np.mean(by_month[m])) for m in range(12))
    scale = per_day / year_average(months)
    return tuple(r * scale for r in months)

