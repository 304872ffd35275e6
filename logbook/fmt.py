"""Formatting values for people, in their preferred units (pure)."""

from __future__ import annotations

from datetime import date

from logbook import units
from logbook.model import Kind
from logbook.units import UnitPrefs


def unit_for(kind: Kind, prefs: UnitPrefs) -> str:
    return prefs.flow if kind is Kind.CASE_DRAIN else prefs.pressure


def value(kind: Kind, canonical: float | None, prefs: UnitPrefs, *, with_unit: bool = True) -> str:
    """A reading value in the user's unit, e.g. '4.21 L/min' or '61.0 psi'."""
    if canonical is None:
        return "-"
    unit = unit_for(kind, prefs)
    shown = units.from_canonical(canonical, unit)
    digits = 2 if abs(shown) < 100 else 1 if abs(shown) < 1000 else 0
    text = f"{shown:.{digits}f}"
    return f"{text} {unit}" if with_unit else text


def pressure(bar: float | None, prefs: UnitPrefs) -> str:
    return "-" if bar is None else f"{units.from_canonical(bar, prefs.pressure):.1f} {prefs.pressure}"


def temperature(celsius: float | None, prefs: UnitPrefs) -> str:
    return "-" if celsius is None else f"{units.from_canonical(celsius, prefs.temperature):.0f} {prefs.temperature}"


def hours(h: float | None) -> str:
    if h is None:
        return "-"
    if h == float("inf"):
        return "beyond horizon"
    return f"{h:,.0f} h"


def day(d: date | None) -> str:
    return d.isoformat() if d else "-"


def month(d: date | None) -> str:
    return d.strftime("%Y-%m") if d else "-"
