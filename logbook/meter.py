"""Machine hour meters and pump operating hours (pure).

A machine's hour meter may be replaced (a ``meter_replaced`` event records the old
meter's last reading in ``hours`` and the new meter's first reading in
``to_hours``). *Continuous* hours add the hours lost at each replacement so that
they never run backwards. Records dated on or after a replacement belong to the
new meter; records before it to the old one.
"""

from __future__ import annotations

from datetime import date
from typing import Iterable

from logbook.model import Event, EventKind, Fitment


def replacements_of(machine: str, events: Iterable[Event]) -> list[Event]:
    """The meter replacements of one machine, oldest first."""
    return sorted(
        (e for e in events if e.kind is EventKind.METER_REPLACED and e.machine == machine),
        key=lambda e: (e.happened_on, e.id or 0),
    )


def continuous_hours(meter_hours: float, on: date, replacements: list[Event]) -> float:
    """Hour-meter reading taken on ``on`` expressed on the machine's continuous scale."""
    offset = 0.0
    for rep in replacements:
        if on >= rep.happened_on:
            offset += float(rep.hours or 0.0) - float(rep.to_hours or 0.0)
    return meter_hours + offset


def pump_hours(meter_hours: float, on: date, fitment: Fitment, replacements: list[Event]) -> float:
    """Pump operating hours at a machine hour-meter reading taken while ``fitment`` held."""
    at_fit = continuous_hours(fitment.machine_hours_at_fit, fitment.fitted_on, replacements)
    now = continuous_hours(meter_hours, on, replacements)
    return fitment.pump_hours_at_fit + (now - at_fit)


def fitment_on(fitments: Iterable[Fitment], on: date) -> Fitment | None:
    """The fitment that held on a day; on a move day the newer one."""
    best: Fitment | None = None
    for f in fitments:
        if f.fitted_on <= on and (f.removed_on is None or on <= f.removed_on):
            if best is None or f.fitted_on >= best.fitted_on:
                best = f
    return best
