"""Reference: pump operating hours from machine hour meters, fitments and meter replacements, one record at a time.

A machine's meter may be replaced: ``Event.hours`` is the old meter's last reading and
``Event.to_hours`` the new meter's first. Continuous machine hours add up the jumps,
continuous = meter + sum(old_last - new_first) over the replacements before the reading.
A pump's hours = its hours when fitted + the continuous machine hours run since then.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from datetime import date

import numpy as np

from logbook import meter
from logbook.model import Event, Fitment


def meter_replacements(machine: str, events: Iterable[Event]) -> list[Event]:
    """The meter replacements of ``machine`` that carry both meter readings, in date order."""
    return meter.replacements_of(machine, events)


def continuous_hours(machine: str, meter_hours: float, on: date, events: Iterable[Event]) -> float:
    """Machine hours on one unbroken scale across meter replacements (in the first meter's terms)."""
    return meter.continuous_hours(meter_hours, on, meter.replacements_of(machine, events))


def fitment_on(fitments: Sequence[Fitment], on: date) -> Fitment | None:
    """The fitment the pump was in on ``on`` (the most recent one fitted by then and not yet removed)."""
    return meter.fitment_on(fitments, on)


def pump_hours(
    meter_hours: float, on: date, fitments: Sequence[Fitment], events: Iterable[Event]
) -> float | None:
    """Pump operating hours for a machine meter value read on ``on``; None if no fitment covers that day."""
    fit = meter.fitment_on(fitments, on)
    if fit is None:
        return None
    return meter.pump_hours(meter_hours, on, fit, meter.replacements_of(fit.machine, events))


def pump_hours_by_date(
    on: date, known: Sequence[tuple[date, float]]
) -> float | None:
    """Pump hours on a day between known (date, pump hours) points, by straight-line interpolation."""
    if not known:
        return None
    pts = sorted(known)
    days = np.array([d.toordinal() for d, _ in pts], dtype=float)
    hrs = np.maximum.accumulate(np.array([h for _, h in pts], dtype=float))
    return float(np.interp(on.toordinal(), days, hrs))
