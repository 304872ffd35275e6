"""Inspection rounds (pure: no SQL, no UI): when each pump's next reading is due, which
pumps a round at a site should test, and which newly imported readings need a second look.

Hours since the last reading are pump operating hours on the continuous scale of
``logbook.meter``, so a replaced hour meter neither hides nor invents an overdue pump.
The rules are written out in docs/rounds.md.
"""

from __future__ import annotations

import math
from collections import defaultdict
from dataclasses import dataclass
from datetime import date, timedelta
from typing import Iterable, Sequence

from logbook import meter
from logbook.analysis.results import FLAG_JUMP, FleetForecast, KindForecast, Outcome, PumpForecast
from logbook.model import Event, EventKind, Fitment, Fleet, Kind, PumpModel, Reading

#: Events after which the pump's wear starts again: its next reading is a new baseline.
BASELINE_EVENTS = (EventKind.OVERHAUL, EventKind.EXCHANGE)


@dataclass(frozen=True)
class TestRules:
    """When a forecast pulls the next test forward (our own rule, no published source).

    A band is *wide* when (P90 - P10) / P50 of the remaining hours exceeds ``width_ratio``;
    its P10 date is *near* when it lies within ``near_days``. Such a pump is tested at
    today + max(``min_gap_days``, half the days to its P10 date), if that is earlier
    than its interval says.
    """

    width_ratio: float = 1.0
    near_days: int = 365
    min_gap_days: int = 7


@dataclass(frozen=True)
class NextTest:
    """When one fitted pump should next be read, and why."""

    serial: str
    model: str
    machine: str
    position: str
    site: str
    last_reading_on: date | None
    hours_since_reading: float | None  # pump operating hours since the last reading, estimated to today
    days_since_reading: int | None
    interval_due_on: date | None  # when the model's reading interval runs out (None: no interval)
    test_on: date | None  # the date to test on: the interval or earlier (None: nothing asks for a test)
    reason: str  # why test_on is what it is, in plain words
    earlier: bool = False  # moved forward by the forecast rule
    asap: bool = False  # the last reading jumped: test again as soon as possible

    def is_due(self, today: date) -> bool:
        return self.test_on is not None and self.test_on <= today

    def words(self, today: date) -> str:
        """A short status for lists: 'reading due', 'reading in 12 d', ..."""
        if self.asap:
            return "reading due now (jump)"
        if self.test_on is None:
            return "no reading interval"
        days = (self.test_on - today).days
        early = " (early)" if self.earlier else ""
        if days < 0:
            return f"reading overdue {-days} d{early}"
        if days == 0:
            return f"reading due{early}"
        return f"reading in {days} d{early}"


# -- hours -----------------------------------------------------------------------
def machine_points(fleet: Fleet) -> dict[str, list[tuple[date, float]]]:
    """(date, continuous hours) records of each machine's meter: fitments, readings, events."""
    from logbook.analysis.calendar import machine_hour_points

    return machine_hour_points(fleet.fitments, fleet.readings, fleet.events)


def machine_hours_now(points: Sequence[tuple[date, float]], today: date, per_day: float | None) -> float | None:
    """Continuous machine hours today: the newest record plus utilisation times the days since."""
    known = [p for p in points if p[0] <= today]
    if not known:
        return None
    newest_day = max(d for d, _ in known)
    hours = max(h for d, h in known if d == newest_day)
    if per_day is not None and per_day > 0:
        hours += per_day * (today - newest_day).days
    return hours


def utilisation(points: Sequence[tuple[date, float]], today: date) -> float | None:
    """Hours per day from a machine's records (the engine's robust slope)."""
    from logbook.analysis.calendar import hours_per_day

    return hours_per_day(points, today)


def reading_pump_hours(reading: Reading, fitments: Sequence[Fitment], events: Iterable[Event]) -> float | None:
    """Pump operating hours at a reading, through the fitment that held that day."""
    fit = meter.fitment_on(fitments, reading.taken_on)
    if fit is None:
        return None
    return meter.pump_hours(reading.machine_hours, reading.taken_on, fit, meter.replacements_of(fit.machine, events))


# -- the interval and the forecast rule ----------------------------------------------
def interval_due(
    model: PumpModel, last_on: date, hours_since: float | None, per_day: float | None, today: date
) -> tuple[date | None, str]:
    """When the model's interval (hours and/or days, whichever first) runs out after a reading."""
    options: list[tuple[date, str]] = []
    if model.reading_interval_days:
        due = last_on + timedelta(days=model.reading_interval_days)
        options.append((due, f"every {model.reading_interval_days} days: last reading {last_on.isoformat()}, "
                             f"{(today - last_on).days} days ago"))
    if model.reading_interval_hours and hours_since is not None:
        left = model.reading_interval_hours - hours_since
        due = None
        if left <= 0:
            back = math.floor(-left / per_day) if per_day else 0
            due = max(today - timedelta(days=back), last_on)
        elif per_day:
            due = today + timedelta(days=math.ceil(left / per_day))
        if due is not None:
            options.append((due, f"every {model.reading_interval_hours:g} h: about {hours_since:,.0f} h run "
                                 f"since the last reading"))
    if not options:
        if model.reading_interval_hours:
            return None, f"every {model.reading_interval_hours:g} h, but the hours run since the last reading are unknown"
        return None, "no reading interval set for the model"
    return min(options, key=lambda o: o[0])


def band_width_ratio(kf: KindForecast) -> float | None:
    """(P90 - P10) / P50 of the remaining hours; inf when P50 or P90 lies beyond the horizon."""
    if kf.p10_hours is None or not math.isfinite(kf.p10_hours):
        return None
    if kf.p50_hours is None or kf.p90_hours is None or not math.isfinite(kf.p90_hours) or kf.p50_hours <= 0:
        return math.inf
    return (kf.p90_hours - kf.p10_hours) / kf.p50_hours


def forecast_test_date(
    pf: PumpForecast | None, today: date, interval_due_on: date | None, rules: TestRules | None = None
) -> tuple[date | None, str, bool]:
    """(date, reason, asap) when the forecast asks for an earlier test than the interval, else (None, "", False).

    The last reading jumped: test as soon as possible (today). A wide band whose P10 date
    is near: today + max(min_gap_days, days to P10 / 2), if that beats the interval.
    """
    rules = rules or TestRules()
    if pf is None:
        return None, "", False
    for kf in pf.kinds:
        if FLAG_JUMP in kf.flags:
            return today, f"the last {kf.kind.label} reading jumped away from its trend: test again as soon as possible", True
    best: tuple[date | None, str] = (None, "")
    for kf in pf.kinds:
        if kf.outcome not in (Outcome.CROSSING, Outcome.NO_CROSSING) or kf.p10_date is None:
            continue
        ratio = band_width_ratio(kf)
        days_to_p10 = (kf.p10_date - today).days
        if ratio is None or ratio <= rules.width_ratio or days_to_p10 > rules.near_days:
            continue
        when = today + timedelta(days=max(rules.min_gap_days, math.ceil(days_to_p10 / 2)))
        if interval_due_on is not None and when >= interval_due_on:
            continue
        if best[0] is None or when < best[0]:
            width = "beyond the horizon" if math.isinf(ratio) else f"{ratio:.1f} x P50"
            best = (when, f"{kf.kind.label} forecast is uncertain (P90-P10 {width}) and its P10 date "
                          f"{kf.p10_date.isoformat()} is near: a reading by {when.isoformat()} narrows it")
    return best[0], best[1], False


# -- every fitted pump -----------------------------------------------------------------
def _baseline_event(events: Iterable[Event], serial: str, last: Reading | None) -> Event | None:
    """The newest overhaul/exchange of the pump after its last reading (same day: after, if the
    reading's meter is below the event's)."""
    found = None
    for e in events:
        if e.serial != serial or e.kind not in BASELINE_EVENTS:
            continue
        if last is not None:
            after = e.happened_on > last.taken_on or (
                e.happened_on == last.taken_on and e.hours is not None and last.machine_hours < e.hours
            )
            if not after:
                continue
        if found is None or e.happened_on >= found.happened_on:
            found = e
    return found


def next_tests(
    fleet: Fleet, forecast: FleetForecast | None, today: date, rules: TestRules | None = None
) -> dict[str, NextTest]:
    """The next test of every pump fitted today, by serial."""
    rules = rules or TestRules()
    points = machine_points(fleet)
    per_day_cache: dict[str, float | None] = {}
    fits: dict[str, list[Fitment]] = defaultdict(list)
    for f in fleet.fitments:
        fits[f.serial].append(f)
    reads: dict[str, list[Reading]] = defaultdict(list)
    for r in fleet.readings:
        if r.superseded_by is None:
            reads[r.serial].append(r)
    out: dict[str, NextTest] = {}
    for serial in sorted(fleet.pumps):
        current = meter.fitment_on(fits.get(serial, ()), today)
        if current is None:
            continue
        model = fleet.models[fleet.pumps[serial].model]
        machine = fleet.machines.get(current.machine)
        pf = forecast.pump(serial) if forecast is not None else None
        if current.machine not in per_day_cache:
            per_day_cache[current.machine] = (
                pf.hours_per_day if pf is not None and pf.hours_per_day is not None
                else utilisation(points.get(current.machine, []), today)
            )
        per_day = per_day_cache[current.machine]
        history = sorted(reads.get(serial, ()), key=lambda r: (r.taken_on, r.machine_hours))
        last = history[-1] if history else None
        base = dict(serial=serial, model=model.code, machine=current.machine, position=current.position,
                    site=machine.site if machine else "", last_reading_on=last.taken_on if last else None)
        restart = _baseline_event(fleet.events, serial, last)
        if last is None or restart is not None:
            since = restart.happened_on if restart is not None else current.fitted_on
            why = (f"no reading since the {restart.kind.value} on {since.isoformat()}: take a new baseline"
                   if restart is not None else f"no reading since fitted on {since.isoformat()}: take a baseline")
            out[serial] = NextTest(**base, hours_since_reading=None,
                                   days_since_reading=(today - last.taken_on).days if last else None,
                                   interval_due_on=since, test_on=since, reason=why)
            continue
        reps = meter.replacements_of(current.machine, fleet.events)
        now_machine = machine_hours_now(points.get(current.machine, []), today, per_day)
        at_last = reading_pump_hours(last, fits[serial], fleet.events)
        hours_since = None
        if now_machine is not None and at_last is not None:
            at_fit = meter.continuous_hours(current.machine_hours_at_fit, current.fitted_on, reps)
            hours_since = max(current.pump_hours_at_fit + (now_machine - at_fit) - at_last, 0.0)
        due_on, why = interval_due(model, last.taken_on, hours_since, per_day, today)
        early_on, early_why, asap = forecast_test_date(pf, today, due_on, rules)
        test_on, reason = (early_on, early_why) if early_on is not None else (due_on, why)
        out[serial] = NextTest(**base, hours_since_reading=hours_since, days_since_reading=(today - last.taken_on).days,
                               interval_due_on=due_on, test_on=test_on, reason=reason,
                               earlier=early_on is not None, asap=asap)
    return out


def plan_round(
    fleet: Fleet,
    forecast: FleetForecast | None,
    today: date,
    *,
    site: str | None = None,
    within_days: int = 7,
    everyone: bool = False,
    rules: TestRules | None = None,
) -> list[NextTest]:
    """Pumps to test (due by today + within_days, or all with ``everyone``), in walking order:
    site, machine, position."""
    horizon = today + timedelta(days=within_days)
    tests = next_tests(fleet, forecast, today, rules).values()
    chosen = [t for t in tests if (site is None or t.site == site)
              and (everyone or (t.test_on is not None and t.test_on <= horizon))]
    return sorted(chosen, key=lambda t: (t.site, t.machine, t.position, t.serial))


# -- second look at imported readings ----------------------------------------------------
def second_look(
    before: Fleet, forecast: FleetForecast, new: Sequence[Reading], *, coverage: float = 0.95
) -> list[str]:
    """Lines for new readings whose normalized value falls outside the trend's prediction band
    (central ``coverage``) at their operating hours, as the trend stood before the import."""
    from logbook.analysis.normalize import normalized_value
    from logbook.analysis.segments import build_series
    from logbook.analysis.segments import reading_pump_hours as engine_pump_hours

    lines: list[str] = []
    histories: dict = {}
    series_of: dict = {}
    low_q, high_q = round(50 - 50 * coverage, 1), round(50 + 50 * coverage, 1)
    for r in sorted(new, key=lambda r: (r.serial, r.taken_on, r.machine_hours)):
        pf = forecast.pump(r.serial)
        if pf is None or r.serial not in before.pumps:
            continue
        if r.serial not in histories:
            histories[r.serial] = before.history(r.serial)
        history = histories[r.serial]
        for kf in pf.kinds:
            if kf.fit is None or r.value(kf.kind) is None:
                continue
            if (r.serial, kf.kind) not in series_of:
                series_of[(r.serial, kf.kind)] = build_series(history, kf.kind)
            series = series_of[(r.serial, kf.kind)]
            if series.start is not None and r.taken_on < series.start.happened_on:
                continue  # an older wear segment: the current trend says nothing about it
            x = engine_pump_hours(r, history) - series.start_hours
            value = normalized_value(r, kf.kind, history.model)
            lo, _, hi = (float(v[0]) for v in kf.fit.band([x], coverage=coverage))
            if lo <= value <= hi:
                continue
            side = "above" if value > hi else "below"
            since = series.start_on.isoformat() if series.start_on else "with its first reading"
            unit = kf.kind.unit
            at_ref = " at reference conditions" if kf.kind is Kind.CASE_DRAIN else ""
            lines.append(
                f"{r.serial} {r.taken_on.isoformat()} {kf.kind.label} {value:.2f} {unit}{at_ref} is {side} its trend's "
                f"P{low_q:g}-P{high_q:g} band {lo:.2f}-{hi:.2f} {unit} at {x:,.0f} h into the trend begun {since}: "
                f"check the entry and the test conditions, or test again"
            )
    return lines


def new_readings(before: Fleet, after: Fleet) -> list[Reading]:
    """Readings in ``after`` that ``before`` did not have (by id)."""
    known = {r.id for r in before.readings}
    return [r for r in after.readings if r.id not in known and r.superseded_by is None]


def import_second_look(before: Fleet, after: Fleet, today: date, *, coverage: float = 0.95) -> list[str]:
    """Second-look lines for the readings an import added, against the forecast before it."""
    added = new_readings(before, after)
    if not added:
        return []
    from logbook.analysis.fleet import forecast_fleet

    return second_look(before, forecast_fleet(before, today), added, coverage=coverage)


__all__ = [
    "NextTest", "TestRules", "band_width_ratio", "forecast_test_date", "import_second_look",
    "interval_due", "machine_hours_now", "machine_points", "next_tests", "plan_round", "second_look",
]
