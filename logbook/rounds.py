"""Inspection rounds (pure: no SQL, no UI): when each pump's next reading is due, which
pumps a round at a site should test, and which newly imported readings need a second look.

Hours since the last reading are pump operating hours on the continuous scale of the
engine's timeline (``analysis.timeline``), so a replaced hour meter neither hides nor
invents an overdue pump; utilisation, pump hours and segments are the engine's.
The rules are written out in docs/rounds.md.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from operator import attrgetter, ne
from datetime import date, timedelta
from typing import Iterable, Sequence

from logbook.analysis.results import FLAG_JUMP, FleetForecast, KindForecast, Outcome, PumpForecast
from logbook.model import ALL_KINDS, Event, EventKind, Fleet, Kind, PumpModel, Reading

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
class MachineClocks:
    """Each machine's newest hour-meter record by a day, from the engine's machine points (fittings,
    removals, readings, events, on the continuous scale), and its utilisation from the engine."""

    def __init__(self, timeline, today: date):
        import numpy as np

        from logbook.analysis.utilisation import machine_points

        self.timeline, self.today = timeline, today
        machine, day, hours = machine_points(timeline.fits, timeline.meters, timeline.events, timeline.machine_index,
                                             timeline.fit, timeline.day, timeline.meter, timeline.cont)  # fmt: skip
        keep = day <= today.toordinal()
        machine, day, hours = machine[keep], day[keep], hours[keep]
        order = np.lexsort((hours, day, machine))  # the newest day's highest record comes last
        last = order[np.r_[machine[order][1:] != machine[order][:-1], True]] if len(order) else order
        self.newest = {m: (d, h) for m, d, h in zip(machine[last].tolist(), day[last].tolist(), hours[last].tolist())}

    def hours_now(self, machine: str, per_day: float | None) -> float | None:
        """Continuous machine hours today: the newest record plus utilisation times the days since."""
        code = self.timeline.machine_index.get(machine)
        if code not in self.newest:
            return None
        newest_day, hours = self.newest[code]
        if per_day is not None and per_day > 0:
            hours += per_day * (self.today.toordinal() - newest_day)
        return hours

    def utilisation(self, machines) -> dict[str, float | None]:
        from logbook.analysis.utilisation import machine_utilisation

        return machine_utilisation(self.timeline, sorted(machines), self.today) if machines else {}


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
            from logbook.analysis.utilisation import days_until  # the engine's hours-to-date rule

            ahead = int(days_until(left, per_day))
            due = today + timedelta(days=ahead) if ahead >= 0 else None
        if due is not None:
            options.append((due, f"every {model.reading_interval_hours:g} h: about {hours_since:,.0f} h run "
                                 f"since the last reading"))
    if not options:
        if model.reading_interval_hours and hours_since is not None:
            return None, (f"every {model.reading_interval_hours:g} h: about {hours_since:,.0f} h run since the last "
                          f"reading; no date for the rest: the machine's hours per day are unknown or too few")
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
def _baseline_events(events: Iterable[Event]) -> dict[str, list[Event]]:
    """Each pump's overhauls and exchanges (the events after which wear starts again), grouped once."""
    grouped: dict[str, list[Event]] = {}
    for e in events:
        if e.serial is not None and e.kind in BASELINE_EVENTS:
            grouped.setdefault(e.serial, []).append(e)
    return grouped


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
    from logbook.analysis.timeline import Timeline

    rules = rules or TestRules()
    timeline = Timeline.of(fleet)  # the engine's, when it forecast this snapshot
    clocks = MachineClocks(timeline, today)
    fitted = _fitted_today(timeline, sorted(fleet.pumps), today)
    last_of = _last_readings(timeline)
    restarts = _baseline_events(fleet.events)
    per_day = _utilisation(fitted, forecast, clocks, timeline)
    out: dict[str, NextTest] = {}
    for serial, fit in fitted.items():
        current = timeline.fits.items[fit]
        model = fleet.models[fleet.pumps[serial].model]
        machine = fleet.machines.get(current.machine)
        pf = forecast.pump(serial) if forecast is not None else None  # a dict lookup
        last_index = last_of.get(timeline.serial_index.get(serial))
        last = fleet.readings[last_index] if last_index is not None else None
        base = dict(serial=serial, model=model.code, machine=current.machine, position=current.position,
                    site=machine.site if machine else "", last_reading_on=last.taken_on if last else None)
        restart = _baseline_event(restarts.get(serial, ()), serial, last)
        if last is None or restart is not None:
            out[serial] = _baseline_test(base, restart, last, current.fitted_on, today)
            continue
        rate = per_day[current.machine]
        hours_since = _hours_since(timeline, clocks, fit, last_index, rate)
        due_on, why = interval_due(model, last.taken_on, hours_since, rate, today)
        early_on, early_why, asap = forecast_test_date(pf, today, due_on, rules)
        test_on, reason = (early_on, early_why) if early_on is not None else (due_on, why)
        out[serial] = NextTest(**base, hours_since_reading=hours_since, days_since_reading=(today - last.taken_on).days,
                               interval_due_on=due_on, test_on=test_on, reason=reason,
                               earlier=early_on is not None, asap=asap)
    return out


def _baseline_test(base: dict, restart: Event | None, last: Reading | None, fitted_on: date, today: date) -> NextTest:
    """A pump never read, or overhauled since its last reading: test on the day of the work."""
    since = restart.happened_on if restart is not None else fitted_on
    why = (f"no reading since the {restart.kind.value} on {since.isoformat()}: take a new baseline"
           if restart is not None else f"no reading since fitted on {since.isoformat()}: take a baseline")
    return NextTest(**base, hours_since_reading=None, days_since_reading=(today - last.taken_on).days if last else None,
                    interval_due_on=since, test_on=since, reason=why)


def _hours_since(timeline, clocks: MachineClocks, fit: int, last: int, per_day: float | None) -> float | None:
    """Pump operating hours from reading ``last`` to today while fitment ``fit`` holds: the machine's
    continuous hours now less at the fitting, on top of the pump's hours then, less the reading's."""
    current = timeline.fits.items[fit]
    now_machine = clocks.hours_now(current.machine, per_day)
    if now_machine is None or timeline.fit[last] < 0:  # no record on the machine, or the reading's hours unknown
        return None
    now = current.pump_hours_at_fit + (now_machine - float(timeline.fits.cont_at_fit[fit]))
    return max(now - float(timeline.hours[last]), 0.0)


def _fitted_today(timeline, serials: list[str], today: date) -> dict[str, int]:
    """Serial -> index of the fitment that holds the pump today (the engine's rule), for pumps fitted today."""
    import numpy as np

    codes = np.array(timeline.pump_codes(serials), dtype=np.int64)
    fit = timeline.fits.on(codes, np.full(len(serials), today.toordinal(), dtype=np.int64)).tolist()
    return {s: f for s, f in zip(serials, fit) if f >= 0}


def _last_readings(timeline) -> dict[int, int]:
    """Serial code -> index of the pump's newest current reading, by (date, meter); the later record on a tie."""
    import numpy as np

    rows = np.flatnonzero(timeline.latest)
    order = rows[np.lexsort((rows, timeline.meter[rows], timeline.day[rows], timeline.serial[rows]))]
    serial = timeline.serial[order]
    last = order[np.r_[serial[1:] != serial[:-1], True]] if len(order) else order
    return dict(zip(timeline.serial[last].tolist(), last.tolist()))


def _utilisation(fitted: dict[str, int], forecast, clocks: MachineClocks, timeline) -> dict[str, float | None]:
    """Hours per day of each machine holding a pump: the forecast's for its first pump (by serial), else
    the engine's from the records."""
    per_day: dict[str, float | None] = {}
    missing = set()
    for serial, fit in fitted.items():
        machine = timeline.fits.items[fit].machine
        if machine in per_day or machine in missing:
            continue
        pf = forecast.pump(serial) if forecast is not None else None
        if pf is not None and pf.hours_per_day is not None:
            per_day[machine] = pf.hours_per_day
        else:
            missing.add(machine)
    return {**per_day, **clocks.utilisation(missing)}


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
    (central ``coverage``) at their operating hours, as the trend stood before the import.

    The band is where a new reading is expected (the fitted path's prediction band, measurement
    scatter included: ``reading=True``), not the narrower band of the true condition. Per fitted
    pump and kind, one call of its distribution function on all its new readings at once
    (``FitDetail.below``) and one band call for the readings outside it (their line names the
    band); not one quantile per reading. Lines come in the readings' order."""
    from logbook.analysis.fleet import pack_fleet

    packed = pack_fleet(before, forecast.today)
    pumps = {p.serial: p for p in forecast.pumps}
    details = []
    for serial in packed.serials:
        fits = {kf.kind: kf.fit for kf in pumps[serial].kinds} if serial in pumps else {}
        details += [fits.get(kind) for kind in ALL_KINDS]
    return _second_look(before, packed, details, new, coverage)


def reading_fits(before: Fleet, today: date):
    """(packed fleet, per row of its pack the fitted line as a ``FitDetail`` or None): what the
    second look judges by, without the crossing forecast (the path mixture, its calibration and
    quantile searches), which a band of a new reading (``FitDetail.below`` / ``bounds`` with
    ``reading=True``) does not use. The same lines and the same detail rule as ``forecast_fleet``
    (tests/unit/test_second_look_fits.py holds the two equal)."""
    from logbook.analysis.fit import fit_batch
    from logbook.analysis.fleet import pack_fleet
    from logbook.analysis.records import fit_details, shown_fit

    packed = pack_fleet(before, today)
    if not packed.serials:
        return packed, []
    fit = fit_batch(packed.pack.batch, None)
    return packed, fit_details(packed.pack, fit, shown_fit(fit))


def _second_look(before: Fleet, packed, details: list, new: Sequence[Reading], coverage: float) -> list[str]:
    """``second_look`` with the fitted line of each row of ``packed`` (``details``, None for none)."""
    import numpy as np

    from logbook.analysis.timeline import Timeline
    from logbook.columns import ReadingColumns

    position = {s: i for i, s in enumerate(packed.serials)}
    if isinstance(new, ReadingColumns):  # the columns as they are, looked at in serial, date, hours order
        codes = {s: i for i, s in enumerate(sorted(set(new.text("serial"))))}
        serial_code = np.fromiter(map(codes.__getitem__, new.text("serial")), dtype=np.int64, count=len(new))
        order = np.lexsort((new.number("machine_hours"), new.day, serial_code))
        serials, day = list(map(new.text("serial").__getitem__, order.tolist())), new.day[order]
    else:
        new = sorted(new, key=lambda r: (r.serial, r.taken_on, r.machine_hours))
        order = np.arange(len(new))
        serials = [r.serial for r in new]
        day = np.array([r.taken_on.toordinal() for r in new], dtype=np.int64)
    hours = np.asarray(Timeline(before.fitments, new, before.events).hours, dtype=float)[order]  # pump hours of the new readings
    low_q, high_q = round(50 - 50 * coverage, 1), round(50 + 50 * coverage, 1)
    by_pump: dict[str, np.ndarray] = {}
    runs = np.fromiter(map(ne, serials[1:], serials[:-1]), dtype=bool, count=max(len(serials) - 1, 0))
    begins = [0, *(np.flatnonzero(runs) + 1).tolist()] if serials else []
    for first, last in zip(begins, [*begins[1:], len(serials)]):  # the serials come in runs, each once
        if serials[first] in position and serials[first] in before.pumps:
            by_pump[serials[first]] = np.arange(first, last, dtype=np.int64)
    trended = [values[order] for values in _trended(before, new)]
    found: list[tuple[int, int, str]] = []
    day_of: dict[int, str] = {}  # ISO text of each day ordinal met
    for serial, at in by_pump.items():
        for k, kind in enumerate(ALL_KINDS):
            row = 3 * position[serial] + k
            fit = details[row]
            if fit is None:
                continue
            start_on = packed.pack.start_on[row]
            older = packed.pack.started[row]  # readings of an older wear segment: the current trend says nothing of them
            keep = np.isfinite(trended[k][at])
            if older:
                keep &= day[at] >= start_on.toordinal()
            take = at[keep]
            if not len(take):
                continue
            xs = hours[take] - float(packed.pack.origin[row])
            values = trended[k][take]
            p = fit.below(xs, values, reading=True)  # one call for all of them; the band only where outside
            out = np.flatnonzero((p < 0.5 - coverage / 2) | (p > 0.5 + coverage / 2))
            if not len(out):
                continue
            lo, hi = fit.bounds(xs[out], coverage=coverage, reading=True)
            words = _LookWords(kind, (low_q, high_q), start_on)
            for i, value, low, high, x in zip(take[out].tolist(), values[out].tolist(), lo.tolist(), hi.tolist(),
                                              xs[out].tolist()):
                if low <= value <= high:
                    continue  # on the band's edge (the band's quantiles are found to 1e-12 by bisection)
                d = day_of.get(i_day := int(day[i])) or day_of.setdefault(i_day, date.fromordinal(i_day).isoformat())
                found.append((i, k, words.line(serials[i], d, value, (low, high), x)))
    return [line for _, _, line in sorted(found)]


#: The reading's attribute holding each kind's value (``Reading.value``).
_VALUE_OF = {Kind.CASE_DRAIN: "case_drain_lpm", Kind.SERVO_PRESSURE: "servo_pressure_bar",
             Kind.NEUTRAL_DRIFT: "neutral_drift_bar"}


def _trended(fleet: Fleet, readings: Sequence[Reading]):
    """Per kind, every reading's trended value (``normalize.normalized_value``, computed for all
    at once with the engine's ``trended_values``); NaN where the reading has none."""
    import numpy as np

    from logbook.analysis.normalize import ReadingConditions, normalized_value, trended_values

    from logbook.columns import ReadingColumns

    codes = sorted(fleet.models)
    models = [fleet.models[c] for c in codes]
    index = {c: i for i, c in enumerate(codes)}
    as_columns = isinstance(readings, ReadingColumns)
    serials = readings.text("serial") if as_columns else [r.serial for r in readings]
    model_code = {s: index[fleet.pumps[s].model] if s in fleet.pumps else 0 for s in set(serials)}
    model_of = np.fromiter(map(model_code.__getitem__, serials), dtype=int, count=len(serials))

    def column(name: str) -> np.ndarray:
        if as_columns:
            return readings.number(name)
        return np.array([np.nan if v is None else v for v in map(attrgetter(name), readings)], dtype=float)

    def refuse(i: int):
        normalized_value(readings[i], Kind.CASE_DRAIN, models[model_of[i]])  # raises the one reading's own error
        raise ValueError(f"reading {readings[i].id} cannot be normalized")

    conditions = ReadingConditions(column("test_pressure_bar"), column("oil_temp_c"), column("oil_grade"), column("oil_vi"),
                                   models, model_of, refuse)
    out = []
    for kind in ALL_KINDS:
        raw = column(_VALUE_OF[kind])
        have = np.isfinite(raw)
        values = np.full(len(readings), np.nan)
        if have.any():
            part = ReadingConditions(conditions.dp[have], conditions.temp[have], conditions.grade[have],
                                     conditions.vi[have], models, model_of[have], lambda i: refuse(int(np.flatnonzero(have)[i])))
            values[have] = trended_values(kind, raw[have], part)
        out.append(values)
    return out


class _LookWords:
    """The words of one kind's second-look lines (``line``: one reading's), the parts that do
    not change from reading to reading put together once."""

    __slots__ = ("label", "unit", "at_ref", "band", "since")

    def __init__(self, kind: Kind, quantiles, start_on: date | None):
        low_q, high_q = quantiles
        self.label, self.unit = kind.label, kind.unit
        self.at_ref = " at reference conditions" if kind is Kind.CASE_DRAIN else ""
        self.band = f"P{low_q:g}-P{high_q:g}"
        self.since = start_on.isoformat() if start_on else "with its first reading"

    def line(self, serial: str, taken_on: str, value: float, band, x: float) -> str:
        lo, hi = band
        side = "above" if value > hi else "below"
        unit = self.unit
        return (
            f"{serial} {taken_on} {self.label} {value:.2f} {unit}{self.at_ref} is {side} its trend's "
            f"{self.band} band {lo:.2f}-{hi:.2f} {unit} at {x:,.0f} h into the trend begun {self.since}: "
            f"check the entry and the test conditions, or test again"
        )


def _look_line(serial: str, taken_on: date, kind: Kind, value: float, band, quantiles, x: float,
               start_on: date | None) -> str:
    """One second-look line (``_LookWords.line``)."""
    return _LookWords(kind, quantiles, start_on).line(serial, taken_on.isoformat(), value, band, x)


def new_readings(before: Fleet, after: Fleet) -> Sequence[Reading]:
    """Readings in ``after`` that ``before`` did not have (by id), current ones, in ``after``'s
    order: a list, or the store's columns (``ReadingColumns.take``) when both fleets hold columns."""
    from logbook.columns import ReadingColumns

    if isinstance(before.readings, ReadingColumns) and isinstance(after.readings, ReadingColumns):
        import numpy as np

        cols = after.readings
        fresh = ~np.isin(cols.id, before.readings.id) & np.isnan(cols.number("superseded_by"))
        return cols.take(np.flatnonzero(fresh))
    known = {r.id for r in before.readings}
    return [r for r in after.readings if r.id not in known and r.superseded_by is None]


def import_second_look(before: Fleet, after: Fleet, today: date, *, coverage: float = 0.95,
                       added: Sequence[Reading] | None = None) -> list[str]:
    """Second-look lines for the readings an import added (``added``, else ``new_readings``),
    against the trends before it: ``second_look`` on the fitted lines alone (``reading_fits``)."""
    added = new_readings(before, after) if added is None else added
    if not len(added):
        return []
    packed, details = reading_fits(before, today)
    return _second_look(before, packed, details, added, coverage)


__all__ = [
    "MachineClocks", "NextTest", "TestRules", "band_width_ratio", "forecast_test_date", "import_second_look",
    "interval_due", "new_readings", "next_tests", "plan_round", "reading_fits", "second_look",
]
