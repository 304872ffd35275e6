"""Machine hour meters and pump operating hours (pure).

A machine's hour meter may be replaced (a ``meter_replaced`` event records the old
meter's last reading in ``hours`` and the new meter's first reading in
``to_hours``). *Continuous* hours add the hours lost at each replacement so that
they never run backwards. Records dated after a replacement belong to the new
meter, records before it to the old one; on the day itself the nearer meter wins
for arithmetic, and the hour-meter check puts the day on the new meter.
"""

from __future__ import annotations

import bisect
from datetime import date
from typing import Iterable, cast

from logbook.model import Event, EventKind, Fitment


def replacements_of(machine: str, events: Iterable[Event]) -> list[Event]:
    """The meter replacements of one machine that carry both meter readings, oldest first."""
    return sorted(
        (
            e
            for e in events
            if e.kind is EventKind.METER_REPLACED and e.machine == machine and e.hours is not None and e.to_hours is not None
        ),
        key=lambda e: (e.happened_on, e.id or 0),
    )


def read_on_new_meter(rep: Event, on: date, meter_hours: float) -> bool:
    """Was a meter value read on ``on`` taken on the new meter of ``rep``? On the
    replacement day itself, the meter whose reading is nearer decides."""
    if on != rep.happened_on:
        return on > rep.happened_on
    assert rep.hours is not None and rep.to_hours is not None  # a replacement that carries both readings
    return abs(meter_hours - rep.to_hours) < abs(meter_hours - rep.hours)


def continuous_hours(meter_hours: float, on: date, replacements: list[Event]) -> float:
    """Hour-meter reading taken on ``on`` expressed on the machine's continuous scale
    (in the first meter's terms)."""
    offset = sum(cast(float, rep.hours) - cast(float, rep.to_hours) for rep in replacements if read_on_new_meter(rep, on, meter_hours))
    return float(meter_hours) + offset


def pump_hours(meter_hours: float, on: date, fitment: Fitment, replacements: list[Event]) -> float:
    """Pump operating hours at a machine hour-meter reading taken while ``fitment`` held."""
    at_fit = continuous_hours(fitment.machine_hours_at_fit, fitment.fitted_on, replacements)
    now = continuous_hours(meter_hours, on, replacements)
    return fitment.pump_hours_at_fit + (now - at_fit)


def fitment_on(fitments: Iterable[Fitment], on: date) -> Fitment | None:
    """The fitment that held on a day; on a move day the newer one."""
    best: Fitment | None = None
    for f in sorted(fitments, key=lambda f: (f.fitted_on, f.id or 0)):
        if f.fitted_on <= on and (f.removed_on is None or on <= f.removed_on):
            best = f
    return best


class MeterTimeline:
    """Hour-meter records of one machine, split into eras at meter replacements,
    to tell whether a new record would make the meter run backwards."""

    def __init__(self, replacement_dates: Iterable[date] = ()):
        self.replacements = sorted(replacement_dates)
        self._points: list[tuple[date, float]] = []
        self._index: dict[int, tuple[list[date], list[float], list[int], list[int]]] | None = None

    def era(self, on: date) -> int:
        """How many replacements happened on or before ``on`` (the list is kept sorted)."""
        return bisect.bisect_right(self.replacements, on) if self.replacements else 0

    def add(self, on: date, hours: float) -> None:
        self._points.append((on, hours))
        self._index = None

    def add_replacement(self, on: date) -> None:
        self.replacements = sorted([*self.replacements, on])
        self._index = None

    def _build(self) -> None:
        by_era: dict[int, list[tuple[date, float]]] = {}
        for point in self._points:
            by_era.setdefault(self.era(point[0]), []).append(point)
        index = {}
        for era, points in by_era.items():
            points.sort()
            dates = [p[0] for p in points]
            hours = [p[1] for p in points]
            # Positions of the first highest record up to i, and of the first lowest from i on.
            prefix_max, best = [], 0
            for i, h in enumerate(hours):
                if h > hours[best]:
                    best = i
                prefix_max.append(best)
            suffix_min, best = [0] * len(hours), len(hours) - 1
            for i in range(len(hours) - 1, -1, -1):
                if hours[i] <= hours[best]:
                    best = i
                suffix_min[i] = best
            index[era] = (dates, hours, prefix_max, suffix_min)
        self._index = index

    def neighbours(self, on: date) -> tuple[tuple[date, float] | None, tuple[date, float] | None]:
        """(latest-dated record before ``on`` with the highest hours, record after ``on``
        with the lowest hours) within the same meter era."""
        if self._index is None:
            self._build()
        assert self._index is not None  # _build sets it
        entry = self._index.get(self.era(on))
        if not entry:
            return None, None
        dates, hours, prefix_max, suffix_min = entry
        lo = bisect.bisect_left(dates, on)
        hi = bisect.bisect_right(dates, on)
        earlier = None
        if lo > 0:
            j = prefix_max[lo - 1]
            earlier = (dates[j], hours[j])
        later = None
        if hi < len(dates):
            j = suffix_min[hi]
            later = (dates[j], hours[j])
        return earlier, later
