"""Unit conversion at the edges of the program (pure).

Canonical units: bar, L/min, degrees C, hours, cSt, rpm, cm^3/rev. Every factor
comes from scipy.constants (psi, gallon, bar, litre, minute), none is typed by hand.
"""

from __future__ import annotations

from dataclasses import dataclass

from scipy import constants as _c

#: Pascal per psi and per bar (scipy.constants; NIST SP 811 values).
PSI_PER_BAR = _c.bar / _c.psi
#: Litres per US gallon.
LITRE_PER_US_GALLON = _c.gallon / _c.litre


@dataclass(frozen=True)
class Quantity:
    """A physical quantity with its canonical unit and the aliases users may type."""

    name: str
    canonical: str
    aliases: dict[str, str]  # lower-case alias -> unit id


PRESSURE = Quantity("pressure", "bar", {"bar": "bar", "psi": "psi"})
FLOW = Quantity(
    "flow",
    "L/min",
    {"l/min": "L/min", "lpm": "L/min", "l/m": "L/min", "gpm": "gpm", "usgpm": "gpm", "gal/min": "gpm"},
)
TEMPERATURE = Quantity(
    "temperature", "C", {"c": "C", "degc": "C", "°c": "C", "f": "F", "degf": "F", "°f": "F"}
)
HOURS = Quantity("hours", "h", {"h": "h", "hours": "h", "hr": "h"})
SPEED = Quantity("speed", "rpm", {"rpm": "rpm", "1/min": "rpm"})
DISPLACEMENT = Quantity("displacement", "cm3/rev", {"cm3/rev": "cm3/rev", "cc": "cm3/rev", "cm3": "cm3/rev", "cc/rev": "cm3/rev"})
DAYS = Quantity("days", "d", {"d": "d", "days": "d"})
NONE = Quantity("none", "", {"": ""})


def to_canonical(value: float, unit: str) -> float:
    """Convert ``value`` in ``unit`` (a unit id: bar, psi, L/min, gpm, C, F, ...) to canonical."""
    if unit == "psi":
        return value / PSI_PER_BAR
    if unit == "gpm":
        return value * LITRE_PER_US_GALLON
    if unit == "F":
        return float(_c.convert_temperature(value, "Fahrenheit", "Celsius"))
    return value


def from_canonical(value: float, unit: str) -> float:
    """Convert a canonical ``value`` to ``unit``."""
    if unit == "psi":
        return value * PSI_PER_BAR
    if unit == "gpm":
        return value / LITRE_PER_US_GALLON
    if unit == "F":
        return float(_c.convert_temperature(value, "Celsius", "Fahrenheit"))
    return value


def resolve_unit(quantity: Quantity, text: str | None) -> str | None:
    """The unit id for what a user typed (case-insensitive), the canonical unit for
    nothing, or None when the text is not a unit of this quantity."""
    if text is None or text.strip() == "":
        return quantity.canonical
    return quantity.aliases.get(text.strip().lower().replace(" ", ""))


def allowed_units(quantity: Quantity) -> str:
    return ", ".join(sorted(set(quantity.aliases.values())))


@dataclass(frozen=True)
class UnitPrefs:
    """Which units a user wants to see and type."""

    pressure: str = "bar"
    flow: str = "L/min"
    temperature: str = "C"

    @classmethod
    def us(cls) -> "UnitPrefs":
        return cls("psi", "gpm", "F")


def theoretical_flow_lpm(displacement_cc: float, speed_rpm: float) -> float:
    """Q_th [L/min] = Vg [cm^3/rev] * n [rpm] / 1000 (standard fluid power identity)."""
    return displacement_cc * speed_rpm / 1000.0
