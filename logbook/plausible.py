"""Plausibility of a reading at entry (pure: no SQL, no UI).

A value can pass every field check and still be wrong: a digit typed twice in the hour
meter, a value typed into the next box, oil far from the test temperature. These rules
do not refuse; they ask. The TUI asks to confirm with the reason shown, ``logbook
record`` and ``logbook correct`` need ``--confirm``, an import lists them per line and
``logbook check`` reports stored hour meters that fail the meter rule. Every caller
takes its doubts from here; the store only gathers the context (``Context``).

The rules (common practice, no published source; the thresholds are ours):

- Hour meter: a machine cannot run more than 24 h a day, so a meter that gained more
  than 24 h per calendar day since the machine's previous meter record (plus one day of
  slack: the times of day are not recorded) is asked about; so is a gain over
  ``RATE_FACTOR`` times what the machine's utilisation (the engine's hours per day)
  predicts for the days between, plus ``RATE_SLACK_H``.
- Oil temperature outside the model's test window (the temperatures its test is taken at).
- A wear reading that moved by more than ``CHANGE_SHARE`` of the model's limit since the
  pump's previous reading of that kind, with no event between that restarts the trend
  (an overhaul or a neutral re-set makes a big change expected). Case drain is compared
  at reference conditions (the engine's normalization), so that a test at another
  temperature or pressure is not mistaken for wear.
- A wear reading outside the pump's forecast band (when the caller has one for the
  reading's operating hours).
"""

from __future__ import annotations

import bisect
from collections.abc import Sequence
from dataclasses import dataclass, field
from itertools import repeat
from operator import is_, is_not
from datetime import date
from typing import TYPE_CHECKING

from logbook import fmt, units
from logbook.model import ALL_KINDS, SEGMENT_RESETS, Event, EventKind, Fleet, Kind, PumpModel, Reading
from logbook.units import UnitPrefs
from logbook.validate import FIELD_LABELS

if TYPE_CHECKING:
    import numpy as np

MAX_HOURS_PER_DAY = 24.0
SLACK_DAYS = 1
RATE_FACTOR = 3.0
RATE_SLACK_H = 100.0
CHANGE_SHARE = 0.5

#: The labels of the entry forms, also used in every message about a field.
LABELS = FIELD_LABELS

CONFIRM_FLAG = "--confirm"


@dataclass(frozen=True)
class Doubt:
    """A value that passed the checks but looks wrong: the field, the value as shown
    (display units) and why it is asked about."""

    field: str
    shown: str
    reason: str
    line: int | None = None

    @property
    def label(self) -> str:
        return LABELS.get(self.field, self.field)

    def __str__(self) -> str:
        where = f"line {self.line}: " if self.line is not None else ""
        return f"{where}{self.label} {self.shown}: {self.reason}"


@dataclass(frozen=True)
class Context:
    """What the rules need besides the reading (the store gathers it, the rules here use it).

    ``meter_points``: the machine's hour-meter records (date, hours) before the reading's
    date within the same meter (since its last replacement); ``earlier``: the pump's
    current readings before this one; ``events``: the pump's events; ``bands``: per kind,
    the forecast's (low, high) for the reading's operating hours, when the caller has them."""

    model: PumpModel
    meter_points: tuple[tuple[date, float], ...] = ()
    earlier: tuple[Reading, ...] = ()
    events: tuple[Event, ...] = ()
    bands: dict[Kind, tuple[float, float]] = field(default_factory=dict)

    @property
    def meter_before(self) -> tuple[date, float] | None:
        return meter_before(self.meter_points)

    def hours_per_day(self, today: date) -> float | None:
        return hours_per_day(self.meter_points, today)

    def previous(self, kind: Kind, before: date) -> Reading | None:
        """The pump's latest reading of ``kind`` before ``before`` in the current trend
        (none when an event restarting the trend came after it)."""
        last = max((r for r in self.earlier if r.taken_on <= before and r.value(kind) is not None),
                   key=lambda r: (r.taken_on, r.machine_hours), default=None)
        if last is None:
            return None
        for e in self.events:
            if kind in SEGMENT_RESETS.get(e.kind, ()) and last.taken_on <= e.happened_on <= before:
                return None
        return last


def meter_before(points) -> tuple[date, float] | None:
    """The highest earlier record (the one a meter running backwards is told against)."""
    return max(points, key=lambda p: (p[1], p[0]), default=None)


def hours_per_day(points, today: date) -> float | None:
    """A machine's utilisation from its meter records (date, hours): the engine's own rule."""
    if len(points) < 2:
        return None
    import numpy as np

    from logbook.analysis.utilisation import utilisation

    day = np.array([d.toordinal() for d, _ in points], dtype=np.int64)
    hours = np.array([h for _, h in points], dtype=float)
    return utilisation(np.zeros(len(day), dtype=np.int64), day, hours, [0], today)[0]


def meter_doubt(when: date, hours: float, before: tuple[date, float] | None, hours_per_day: float | None,
                *, field_name: str = "machine_hours") -> Doubt | None:
    """The hour-meter rule: ``hours`` on ``when`` against the machine's earlier record."""
    if before is None:
        return None
    on, earlier = before
    gain = hours - earlier
    days = max((when - on).days, 0)
    if gain <= 0:
        return None
    shown = fmt.hours(hours)
    possible = MAX_HOURS_PER_DAY * (days + SLACK_DAYS)
    if gain > possible:
        return Doubt(field_name, shown,
                     f"{fmt.hours(gain)} more than the {fmt.hours(earlier)} the machine read on {on.isoformat()}, "
                     f"{days} day(s) earlier: more than {MAX_HOURS_PER_DAY:g} h a day (check for a digit typed "
                     f"twice or a value from the next box)")
    if hours_per_day is not None and hours_per_day > 0:
        expected = hours_per_day * max(days, 1)
        if gain > RATE_FACTOR * expected + RATE_SLACK_H:
            return Doubt(field_name, shown,
                         f"{fmt.hours(gain)} in {days} day(s) since {fmt.hours(earlier)} on {on.isoformat()}; the "
                         f"machine runs about {hours_per_day:.1f} h a day ({fmt.hours(expected)} expected)")
    return None


def trended(reading: Reading, kind: Kind, model: PumpModel) -> float | None:
    """The value compared between readings: the engine's trended value (case drain at
    reference conditions), signed for neutral drift (a sign flip is a change too)."""
    if kind is not Kind.CASE_DRAIN:
        return reading.value(kind)
    from logbook.analysis.normalize import normalized_value

    value = normalized_value(reading, kind, model)
    return value if value is not None and value == value else None


def _temperature(celsius: float, prefs: UnitPrefs) -> str:
    return f"{units.from_canonical(celsius, prefs.temperature):.1f} {prefs.temperature}"


def reading_doubts(reading: Reading, ctx: Context, prefs: UnitPrefs | None = None, *, rate_rule: bool = True
                   ) -> list[Doubt]:
    """Every doubt about ``reading``, values shown in ``prefs``. ``rate_rule``: also the
    machine's utilisation rule for the hour meter (the 24 h a day rule always)."""
    prefs = prefs or UnitPrefs()
    doubts: list[Doubt] = []
    rate = ctx.hours_per_day(reading.taken_on) if rate_rule else None
    d = meter_doubt(reading.taken_on, reading.machine_hours, ctx.meter_before, rate)
    if d:
        doubts.append(d)
    m = ctx.model
    t = reading.oil_temp_c
    if t is not None and not (m.test_temp_min_c - 1e-9 <= t <= m.test_temp_max_c + 1e-9):
        doubts.append(Doubt("oil_temp", _temperature(t, prefs),
                            f"outside the test window of {m.code} ({fmt.temperature(m.test_temp_min_c, prefs)} to "
                            f"{fmt.temperature(m.test_temp_max_c, prefs)}): was the oil at test temperature, or is "
                            "this another box's value?"))
    oil_doubted = any(x.field == "oil_temp" for x in doubts)
    for kind in ALL_KINDS:
        raw = reading.value(kind)
        if raw is None or (kind is Kind.CASE_DRAIN and oil_doubted):
            continue  # case drain at a wrong temperature: normalizing it would say nothing
        value = trended(reading, kind, m)
        shown = fmt.value(kind, raw, prefs)
        limit = m.limit(kind)
        prev = ctx.previous(kind, reading.taken_on)
        before = trended(prev, kind, m) if prev is not None else None
        if value is not None and prev is not None and before is not None and limit is not None:
            step = value - before
            if abs(step) > CHANGE_SHARE * abs(limit.value):
                at_ref = " at reference conditions" if kind is Kind.CASE_DRAIN else ""
                doubts.append(Doubt(kind.value, shown,
                                    f"{'up' if step > 0 else 'down'} {fmt.value(kind, abs(step), prefs)}{at_ref} since "
                                    f"{fmt.value(kind, before, prefs)} on {prev.taken_on.isoformat()}: more than half "
                                    f"the limit ({fmt.value(kind, limit.value, prefs)}) in one step"))
                continue
        band = ctx.bands.get(kind)
        if band is not None and value is not None:
            value = abs(value) if kind is Kind.NEUTRAL_DRIFT else value  # the trend is of its magnitude
        if band is not None and value is not None and not band[0] <= value <= band[1]:
            at_ref = f" ({fmt.value(kind, value, prefs)} at reference conditions)" if kind is Kind.CASE_DRAIN else ""
            # neutral drift is signed, its trend and band of its size: say the size that was compared
            size = f"its size {fmt.value(kind, value, prefs)} is " if kind is Kind.NEUTRAL_DRIFT else ""
            of = " (the drift's size, either sign)" if kind is Kind.NEUTRAL_DRIFT else ""
            doubts.append(Doubt(kind.value, shown,
                                f"{size}outside where the pump's trend expects a reading now{at_ref}: "
                                f"{fmt.value(kind, band[0], prefs)} to {fmt.value(kind, band[1], prefs)}{of}"))
    return doubts


#: The share of new readings the forecast's prediction band holds when it is used to ask.
BAND_COVERAGE = 0.99


def forecast_bands(pump_forecast, when: date, today: date, coverage: float = BAND_COVERAGE) -> dict:
    """Per kind, where a new reading on ``when`` is expected: the prediction band of the
    pump's current trend (``FitDetail.band(..., reading=True)``) at its operating hours then
    (today's hours in the segment, moved by the machine's hours a day). Empty without a fit."""
    bands: dict[Kind, tuple[float, float]] = {}
    if pump_forecast is None:
        return bands
    per_day = pump_forecast.hours_per_day or 0.0
    for kf in pump_forecast.kinds:
        if kf.fit is None or kf.hours_in_segment is None or kf.n_readings < 3:
            continue
        x = max(0.0, kf.hours_in_segment + (when - today).days * per_day)
        lo, _, hi = (float(v[0]) for v in kf.fit.band([x], coverage=coverage, reading=True))
        if lo == lo and hi == hi:
            bands[kf.kind] = (lo, hi)
    return bands


def confirm_hint(doubts: list[Doubt]) -> str:
    """What the command line says when it stops at a doubt."""
    return (f"not saved: {len(doubts)} value(s) look wrong. Check them; if they are right, run the same command "
            f"again with {CONFIRM_FLAG}")


def fleet_doubts(fleet: Fleet, new: Sequence[Reading], prefs: UnitPrefs | None = None,
                 already: Sequence[str] = (), lines=None, *, screen: bool = True) -> list[str]:
    """Doubts about readings just added to ``fleet`` (an import), one line each, naming the
    reading (serial and date). Each is judged against the fleet's other records, the
    imported ones included (a jump between two rows of the file is found too). A value
    that a line of ``already`` (the import's second look against the trend) names is
    not told again. ``lines``: (serial, date, hours) -> the file's line number, named first
    (or a function giving that mapping, called only when there is something to tell).

    The rules are those of ``reading_doubts``, run on the readings ``maybe_doubted`` lets
    through: a screen on whole columns that passes every reading that could have a doubt
    (it is never narrower than the rules; tests/unit/test_plausible.py holds the result to
    ``reading_doubts`` run on every reading), so that a clean 100,000-row file costs array
    passes instead of 100,000 contexts (``screen=False``: the rules on every reading)."""
    said = " | ".join(already).lower()
    lines = lines or {}
    from collections import defaultdict

    from logbook import meter as meters

    if screen:
        new = [new[i] for i in maybe_doubted(fleet, new)]
    if not new:
        return []
    machines = {r.machine for r in new if r.machine is not None}
    serials = {r.serial for r in new}
    reps: dict[str, list[date]] = defaultdict(list)
    points: dict[str, list[tuple[date, float, int | None]]] = defaultdict(list)
    for e in fleet.events:
        if e.removed_reason is not None:
            continue
        if e.kind is EventKind.METER_REPLACED:
            if e.machine in machines:
                reps[e.machine].append(e.happened_on)
        elif e.machine in machines and e.hours is not None:
            points[e.machine].append((e.happened_on, e.hours, None))
        if e.kind is EventKind.MOVE and e.to_machine in machines and e.to_hours is not None:
            points[e.to_machine].append((e.happened_on, e.to_hours, None))
    for f in fleet.fitments:
        if f.machine in machines:
            points[f.machine].append((f.fitted_on, f.machine_hours_at_fit, None))
    by_pump: dict[str, list[Reading]] = defaultdict(list)
    for r in fleet.readings:
        if r.superseded_by is None and r.removed_reason is None:
            if r.serial in serials:
                by_pump[r.serial].append(r)
            if r.machine in machines:
                points[r.machine].append((r.taken_on, r.machine_hours, r.id))
    events: dict[str, list[Event]] = defaultdict(list)
    for e in fleet.events:
        if e.serial in serials and e.removed_reason is None:
            events[e.serial].append(e)
    # Per machine and meter era: record dates in order and the highest record up to each.
    highest: dict[tuple[str, int], tuple[list[date], list[tuple[date, float]]]] = {}
    timelines = {m: meters.MeterTimeline(reps.get(m, ())) for m in points}
    for machine, pts in points.items():
        tl = timelines[machine]
        eras: dict[int, list[tuple[date, float]]] = defaultdict(list)
        for d, h, _ in pts:
            if h is not None:
                eras[tl.era(d)].append((d, h))
        for era, recs in eras.items():
            recs.sort()
            best, tops = None, []
            for d, h in recs:
                if best is None or h > best[1]:
                    best = (d, h)
                tops.append(best)
            highest[(machine, era)] = ([d for d, _ in recs], tops)
    for rs in by_pump.values():
        rs.sort(key=lambda x: (x.taken_on, x.machine_hours, x.id or 0))
    out: list[str] = []
    for r in sorted(new, key=lambda r: (r.serial, r.taken_on, r.machine_hours)):
        pump = fleet.pumps.get(r.serial)
        if pump is None or r.machine is None or r.machine not in timelines:
            continue
        dates, tops = highest.get((r.machine, timelines[r.machine].era(r.taken_on)), ([], []))
        i = bisect.bisect_left(dates, r.taken_on)
        before = (tops[i - 1],) if i else ()
        rs = by_pump[r.serial]
        j = _upto(rs, r.taken_on)
        earlier = tuple(x for x in rs[max(0, j - RECENT):j] if x.id != r.id)
        ctx = Context(fleet.models[pump.model], before, earlier, tuple(events[r.serial]))
        for doubt in reading_doubts(r, ctx, prefs, rate_rule=False):
            if f"{r.serial} {r.taken_on.isoformat()} {doubt.label} ".lower() not in said:
                if callable(lines):
                    lines = lines()
                at = lines.get((r.serial, r.taken_on, r.machine_hours))
                out.append(f"{f'line {at}, ' if at else ''}{r.serial} {r.taken_on.isoformat()}: {doubt}")
    return out


#: How far inside a rule's threshold the screen still passes a reading on to the rules (the
#: screen's case drain at reference conditions is computed on arrays, the rule's one at a time).
SCREEN_MARGIN = 1e-6


def maybe_doubted(fleet: Fleet, new: Sequence[Reading]) -> list[int]:
    """Positions in ``new`` (readings of ``fleet``, the imported ones) of those that
    ``fleet_doubts``'s rules could doubt, found on whole columns: the 24 h a day meter rule
    against the machine's highest earlier record in its meter era, oil outside the model's
    test window, and a step of more than ``CHANGE_SHARE`` of the limit since the pump's
    previous reading of the kind (among its ``RECENT`` before, no restarting event between).
    Never narrower than the rules: where it cannot tell (equal dates and hours, a reading
    that cannot be normalized) it passes the reading on. The store's columns
    (``ReadingColumns``, for the fleet and the new readings) are read as they are."""
    import numpy as np

    n_new = len(new)
    if not n_new:
        return []
    current = _Current.of(fleet.readings)
    where = current.positions(new)
    if where is None:  # not the fleet's own records: no screen
        return list(range(n_new))
    maybe = np.zeros(n_new, dtype=bool)
    maybe |= _meter_screen(fleet, current, where)
    models = fleet.models
    model_code = {s: p.model for s, p in fleet.pumps.items()}
    codes = sorted(models)
    index = {c: i for i, c in enumerate(codes)}
    model_list = [models[c] for c in codes]
    of_serial = {s: index.get(model_code.get(s, ''), -1) for s in set(current.serial)}  # -1: no model known
    model_of = np.fromiter(map(of_serial.__getitem__, current.serial), dtype=np.int64, count=len(current.serial))
    mine = model_of[where]
    oil = current.number("oil_temp_c")[where]
    lo = _per_model([m.test_temp_min_c for m in model_list], mine)
    hi = _per_model([m.test_temp_max_c for m in model_list], mine)
    maybe |= (oil < lo - 1e-9 + SCREEN_MARGIN) | (oil > hi + 1e-9 - SCREEN_MARGIN)
    maybe |= _step_screen(fleet, current, model_list, model_of, where)
    return np.flatnonzero(maybe).tolist()


def _per_model(values: list, model_of) -> "np.ndarray":
    """A value per model (None: NaN) looked up for each code of ``model_of`` (-1: NaN)."""
    import numpy as np

    table = _column([*values, None])
    return table[np.where(model_of >= 0, model_of, len(values))]


class _Current:
    """The current readings of a fleet (neither corrected nor removed) as the screens read them:
    serials, machines and ids as lists and arrays, numbers as float columns (NaN for none); from
    the store's columns as they are, else from the records."""

    def __init__(self, serial, machine, day, ident, number, records=None, ids=None):
        self.serial, self.machine, self.day, self.ident = serial, machine, day, ident
        self._number = number
        self._records = records
        self._ids = ids  # the store's ids (columns) or None (records: matched by identity)
        self._cache: dict = {}

    @classmethod
    def of(cls, readings: Sequence[Reading]) -> "_Current":
        import numpy as np

        from logbook.columns import ReadingColumns

        if isinstance(readings, ReadingColumns):
            keep = np.isnan(readings.number("superseded_by"))
            keep &= np.fromiter(map(is_, readings.text("removed_reason"), repeat(None)), dtype=bool, count=len(readings))
            cols = readings if keep.all() else readings.take(np.flatnonzero(keep))
            return cls(cols.text("serial"), cols.text("machine"), cols.day, cols.id, cols.number, ids=cols.id)
        current = [r for r in readings if r.superseded_by is None and r.removed_reason is None]

        def number(name: str):
            return _column([getattr(r, name) for r in current])

        day = np.array([r.taken_on.toordinal() for r in current], dtype=np.int64)
        ident = np.array([r.id or 0 for r in current], dtype=np.int64)
        return cls([r.serial for r in current], [r.machine for r in current], day, ident, number, records=current)

    def number(self, name: str):
        if name not in self._cache:
            self._cache[name] = self._number(name)
        return self._cache[name]

    def __len__(self) -> int:
        return len(self.serial)

    def positions(self, new: Sequence[Reading]):
        """Where each of ``new`` is among these readings, or None if one is not."""
        import numpy as np

        from logbook.columns import ReadingColumns

        if self._ids is not None:
            if not isinstance(new, ReadingColumns):
                if any(r.id is None for r in new):
                    return None
                wanted = np.array([r.id for r in new], dtype=np.int64)
            else:
                wanted = new.id
            order = np.argsort(self._ids, kind="stable")
            found = np.searchsorted(self._ids[order], wanted)
            found = np.minimum(found, max(len(order) - 1, 0))
            if not len(order) or not (self._ids[order][found] == wanted).all():
                return None
            return order[found]
        at = {_ident(r): i for i, r in enumerate(self._records)}
        where = np.array([at.get(_ident(r), -1) for r in new], dtype=np.int64)
        return None if (where < 0).any() else where


def _ident(r: Reading) -> tuple:
    return ("id", r.id) if r.id is not None else ("object", id(r))


def _column(values) -> "np.ndarray":
    import numpy as np

    return np.array([np.nan if v is None else v for v in values], dtype=float)


def _meter_screen(fleet: Fleet, current: _Current, where) -> "np.ndarray":
    """The 24 h a day rule for the readings at ``where`` (positions in ``current``), on columns:
    each machine's records (fitments, events, readings) grouped by meter era, sorted by date and
    hours, with the first highest record up to each."""
    import numpy as np

    code: dict[str, int] = {}
    mach, day, hours = [], [], []
    reps_m, reps_d = [], []

    def record(machine, on, h) -> None:
        if h is None or machine is None:
            return
        mach.append(code.setdefault(machine, len(code)))
        day.append(on.toordinal())
        hours.append(h)

    for e in fleet.events:
        if e.removed_reason is not None:
            continue
        if e.kind is EventKind.METER_REPLACED:
            if e.machine is not None:
                reps_m.append(code.setdefault(e.machine, len(code)))
                reps_d.append(e.happened_on.toordinal())
        elif e.machine is not None and e.hours is not None:
            record(e.machine, e.happened_on, e.hours)
        if e.kind is EventKind.MOVE and e.to_machine and e.to_hours is not None:
            record(e.to_machine, e.happened_on, e.to_hours)
    for f in fleet.fitments:
        record(f.machine, f.fitted_on, f.machine_hours_at_fit)
    # the readings' records after the others: a reading with a machine and hours (NOT NULL in the store)
    r_hours = current.number("machine_hours")
    has_point = np.fromiter(map(is_not, current.machine, repeat(None)), dtype=bool, count=len(current))
    points = np.flatnonzero(has_point & ~np.isnan(r_hours))
    reading_point = np.full(len(current), -1, dtype=np.int64)
    reading_point[points] = len(mach) + np.arange(len(points))
    machines = [current.machine[i] for i in points.tolist()] if len(points) < len(current) else current.machine
    for machine in dict.fromkeys(machines):
        code.setdefault(machine, len(code))
    machine_code = np.fromiter(map(code.__getitem__, machines), dtype=np.int64, count=len(points))
    flagged = np.zeros(len(where), dtype=bool)
    if not mach and not len(points):
        return flagged
    m = np.concatenate([np.array(mach, dtype=np.int64), machine_code])
    d = np.concatenate([np.array(day, dtype=np.int64), current.day[points]])
    h = np.concatenate([np.array(hours, dtype=float), r_hours[points]])
    base = min(int(d.min()), min(reps_d, default=int(d.min())))
    span = max(int(d.max()), max(reps_d, default=int(d.max()))) - base + 2
    d = d - base
    reps = np.sort(np.array(reps_m, dtype=np.int64) * span + (np.array(reps_d, dtype=np.int64) - base))
    era = np.searchsorted(reps, m * span + d, side="right")  # replacements on or before (any machine)
    order = np.lexsort((h, d, era, m))
    ms, es, ds, hs = m[order], era[order], d[order], h[order]
    start = np.ones(len(order), dtype=bool)
    start[1:] = (ms[1:] != ms[:-1]) | (es[1:] != es[:-1])
    group = np.cumsum(start) - 1
    rank = np.unique(hs, return_inverse=True)[1].astype(np.int64)  # exact order of the hours
    ranked = rank + group * (int(rank.max()) + 1 if len(rank) else 1)
    top = np.maximum.accumulate(ranked)
    fresh = start.copy()
    fresh[1:] |= ranked[1:] > top[:-1]  # a new highest record (the first of equal ones is kept)
    best = np.maximum.accumulate(np.where(fresh, np.arange(len(order)), 0))
    sorted_at = np.empty(len(order), dtype=np.int64)
    sorted_at[order] = np.arange(len(order))
    has = reading_point[where] >= 0
    q = sorted_at[reading_point[where][has]]
    key = group * span + ds
    first = np.searchsorted(key, group[q] * span + ds[q], side="left")  # the group's records before that date
    prior = first > 0
    prior[prior] = group[first[prior] - 1] == group[q[prior]]
    b = best[np.maximum(first - 1, 0)]
    gain = hs[q] - hs[b]
    days = np.maximum(ds[q] - ds[b], 0)
    flagged[has] = prior & (gain > 0) & (gain > MAX_HOURS_PER_DAY * (days + SLACK_DAYS) - SCREEN_MARGIN)
    return flagged


def _step_screen(fleet: Fleet, current: _Current, models: list[PumpModel], model_of, where) -> "np.ndarray":
    """The step rule for the readings at ``where`` (positions in ``current``), on columns;
    ``model_of``: each current reading's index in ``models`` (-1 for none)."""
    import numpy as np

    n = len(current)
    serial_code = {s: i for i, s in enumerate(dict.fromkeys(current.serial))}
    pump = np.fromiter(map(serial_code.__getitem__, current.serial), dtype=np.int64, count=n)
    day = current.day
    hours = current.number("machine_hours")
    order = np.lexsort((current.ident, hours, day, pump))
    pos = np.empty(n, dtype=np.int64)
    pos[order] = np.arange(n)
    ps, ds, hs = pump[order], day[order], hours[order]
    begins = np.ones(n, dtype=bool)
    begins[1:] = ps[1:] != ps[:-1]
    first_of_pump = np.maximum.accumulate(np.where(begins, np.arange(n), 0))
    tied = np.zeros(n, dtype=bool)  # equal date and hours: which one is "previous" is the rules' to say
    same = (ps[1:] == ps[:-1]) & (ds[1:] == ds[:-1]) & (hs[1:] == hs[:-1])
    tied[1:] |= same
    tied[:-1] |= same
    day0 = int(ds.min()) if n else 0
    width = int(ds.max()) - day0 + 2 if n else 2
    key = ps * width + (ds - day0)
    p = pos[where]  # the new readings in pump, date, hours order
    upto = np.searchsorted(key, ps[p] * width + (ds[p] - day0), side="right")  # readings on or before its date
    window = np.maximum(upto - RECENT, first_of_pump[p])
    resets: dict[Kind, list[int]] = {k: [] for k in ALL_KINDS}
    for e in fleet.events:
        if e.serial in serial_code and e.removed_reason is None:
            for k in SEGMENT_RESETS.get(e.kind, ()):
                on = min(max(e.happened_on.toordinal() - day0, -1), width - 1)  # outside every reading's date
                resets[k].append(serial_code[e.serial] * width + on)
    model_sorted = model_of[order]
    maybe = np.zeros(len(where), dtype=bool)
    for kind in ALL_KINDS:
        raw_all = current.number(_VALUE_OF[kind])
        raw = raw_all[order]
        value = _trended_column(kind, current, raw_all, models, model_of)[order]
        limit = _per_model([(lim.value if (lim := m.limit(kind)) is not None else None) for m in models], model_sorted)
        have = np.isfinite(raw)
        last = np.maximum.accumulate(np.where(have, np.arange(n), -1))  # the last with a value at or before
        prev = last[upto - 1]
        mine = prev == p
        prev[mine] = np.where(p[mine] > 0, last[np.maximum(p[mine] - 1, 0)], -1)
        ok = (prev >= window) & have[p]
        prev = np.where(ok, prev, 0)
        stamps = np.sort(np.array(resets[kind], dtype=np.int64))
        restarted = (np.searchsorted(stamps, key[p], side="right") - np.searchsorted(stamps, key[prev], side="left")) > 0
        step = np.abs(value[p] - value[prev])
        big = step > CHANGE_SHARE * np.abs(limit[p]) - SCREEN_MARGIN * (1.0 + np.abs(limit[p]))
        unsure = np.isnan(value[p]) | np.isnan(value[prev])  # a case drain the columns could not normalize
        maybe |= ok & ((~restarted & big) | tied[prev] | unsure) | (have[p] & tied[p])
    return maybe


#: The reading's attribute holding each kind's value (``Reading.value``).
_VALUE_OF = {Kind.CASE_DRAIN: "case_drain_lpm", Kind.SERVO_PRESSURE: "servo_pressure_bar",
             Kind.NEUTRAL_DRIFT: "neutral_drift_bar"}


def _trended_column(kind: Kind, current: _Current, raw, models: list[PumpModel], model_of) -> "np.ndarray":
    """``trended`` of each reading on columns: case drain at reference conditions per group of
    readings sharing model and oil (``normalize.case_drain_at_reference`` on arrays); NaN where
    it cannot be told here (the rules then judge the reading themselves)."""
    import numpy as np

    if kind is not Kind.CASE_DRAIN:
        return raw
    from logbook.analysis.normalize import case_drain_at_reference

    out = np.full(len(raw), np.nan)
    rows = np.flatnonzero((model_of >= 0) & ~np.isnan(raw))
    if not len(rows):
        return out
    oil = [current.number(name)[rows] for name in ("oil_grade", "oil_vi", "nu40_cst", "nu100_cst")]
    keys = [model_of[rows].astype(float), *(np.where(np.isnan(v), np.inf, v) for v in oil)]  # inf: none
    order = np.lexsort(keys[::-1])  # by model, then the oil; each group in reading order
    starts = np.ones(len(order), dtype=bool)
    for key in keys:
        starts[1:] &= key[order][1:] == key[order][:-1]
    starts = np.flatnonzero(~starts | (np.arange(len(order)) == 0))
    pressure, temp = current.number("test_pressure_bar"), current.number("oil_temp_c")
    for begin, end in zip(starts.tolist(), [*starts[1:].tolist(), len(order)]):
        idx = rows[order[begin:end]]
        f = int(order[begin])
        grade, vi, nu40, nu100 = (None if v[f] != v[f] else float(v[f]) for v in oil)
        try:
            out[idx] = case_drain_at_reference(raw[idx], pressure[idx], temp[idx], models[int(model_of[rows[f]])],
                                               None if grade is None else int(grade), vi, nu40, nu100)
        except (ValueError, FloatingPointError):
            continue  # left NaN: passed on to the rules
    return out


#: Readings before a new one looked at for its previous value of each kind (an import).
RECENT = 12


def _upto(rs: Sequence[Reading], day: date) -> int:
    """How many of the date-ordered readings ``rs`` are on or before ``day``."""
    lo, hi = 0, len(rs)
    while lo < hi:
        mid = (lo + hi) // 2
        if rs[mid].taken_on <= day:
            lo = mid + 1
        else:
            hi = mid
    return lo
