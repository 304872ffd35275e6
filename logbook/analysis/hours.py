"""Pump operating hours from machine hour meters, fitments and meter replacements.

A machine's meter may be replaced: ``Event.hours`` is the old meter's last reading and
``Event.to_hours`` the new meter's first. Continuous machine hours add up the jumps,
continuous = meter + sum(old_last - new_first) over the replacements before the reading.
A pump's hours = its hours when fitted + the continuous machine hours run since then.
"""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from datetime import date

import numpy as np

from logbook.model import Event, EventKind, Fitment


def meter_replacements(machine: str, events: Iterable[Event]) -> list[Event]:
    """The meter replacements of ``machine`` that carry both meter readings, in date order."""
    reps = [
        e
        for e in events
        if e.kind is EventKind.METER_REPLACED and e.machine == machine and e.hours is not None and e.to_hours is not None
    ]
    return sorted(reps, key=lambda e: (e.happened_on, e.id or 0))


def _after(rep: Event, on: date, meter_hours: float) -> bool:
    """Was a meter value read on ``on`` taken on the new meter of ``rep``?"""
    if on != rep.happened_on:
        return on > rep.happened_on
    return abs(meter_hours - rep.to_hours) < abs(meter_hours - rep.hours)  # same day: nearer meter


def continuous_hours(machine: str, meter_hours: float, on: date, events: Iterable[Event]) -> float:
    """Machine hours on one unbroken scale across meter replacements (in the first meter's terms)."""
    offset = sum(rep.hours - rep.to_hours for rep in meter_replacements(machine, events) if _after(rep, on, meter_hours))
    return float(meter_hours) + offset


def fitment_on(fitments: Sequence[Fitment], on: date) -> Fitment | None:
    """The fitment the pump was in on ``on`` (the most recent one fitted by then and not yet removed)."""
    best = None
    for f in sorted(fitments, key=lambda f: (f.fitted_on, f.id or 0)):
        if f.fitted_on <= on and (f.removed_on is None or on <= f.removed_on):
            best = f
    return best


def pump_hours(
    meter_hours: float, on: date, fitments: Sequence[Fitment], events: Iterable[Event]
) -> float | None:
    """Pump operating hours for a machine meter value read on ``on``; None if no fitment covers that day."""
    fit = fitment_on(fitments, on)
    if fit is None:
        return None
    events = tuple(events)
    now = continuous_hours(fit.machine, meter_hours, on, events)
    at_fit = continuous_hours(fit.machine, fit.machine_hours_at_fit, fit.fitted_on, events)
    return fit.pump_hours_at_fit + (now - at_fit)


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
