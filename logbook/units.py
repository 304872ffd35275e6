"""Unit conversion at the edges of the program (pure).

Canonical units: bar, L/min, degrees C, hours, cSt, rpm, cm^3/rev. Every factor
comes from scipy.constants (psi, gallon, bar, litre, minute), none is typed by hand.
scipy is imported on the first conversion, not with this module (the fleet view's
first frame must not wait for it); ``PSI_PER_BAR`` and ``LITRE_PER_US_GALLON`` are
module attributes computed on first access.
"""

from __future__ import annotations

import functools
import re
from dataclasses import dataclass
from typing import TYPE_CHECKING, TypeVar

if TYPE_CHECKING:
    import numpy as np

Number = TypeVar("Number", float, "np.ndarray")  # a value, or an array of them element by element


@functools.cache
def _constants():
    """scipy.constants, imported once when a factor is first needed (NIST SP 811 values)."""
    from scipy import constants

    return constants


@functools.cache
def psi_per_bar() -> float:
    """psi in one bar (scipy.constants bar / psi)."""
    c = _constants()
    return c.bar / c.psi


@functools.cache
def litre_per_us_gallon() -> float:
    """Litres in one US gallon (scipy.constants gallon / litre)."""
    c = _constants()
    return c.gallon / c.litre


_LAZY_FACTORS = {"PSI_PER_BAR": psi_per_bar, "LITRE_PER_US_GALLON": litre_per_us_gallon}


def __getattr__(name: str):
    # PSI_PER_BAR and LITRE_PER_US_GALLON: computed (and kept as module globals) on first use.
    if name in _LAZY_FACTORS:
        value = globals()[name] = _LAZY_FACTORS[name]()
        return value
    raise AttributeError(f"module 'logbook.units' has no attribute {name!r}")


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
#: Kinematic viscosity: 1 cSt is 1 mm^2/s exactly, so the two names are one unit.
VISCOSITY = Quantity("viscosity", "cSt", {"cst": "cSt", "mm2/s": "cSt", "mm²/s": "cSt", "mm^2/s": "cSt"})
NONE = Quantity("none", "", {"": ""})


def to_canonical(value: float, unit: str) -> float:
    """Convert ``value`` in ``unit`` (a unit id: bar, psi, L/min, gpm, C, F, ...) to canonical."""
    if unit == "psi":
        return value / psi_per_bar()
    if unit == "gpm":
        return value * litre_per_us_gallon()
    if unit == "F":
        return float(_constants().convert_temperature(value, "Fahrenheit", "Celsius"))
    return value


def from_canonical(value: float, unit: str) -> float:
    """Convert a canonical ``value`` to ``unit``."""
    if unit == "psi":
        return value * psi_per_bar()
    if unit == "gpm":
        return value / litre_per_us_gallon()
    if unit == "F":
        return float(_constants().convert_temperature(value, "Celsius", "Fahrenheit"))
    return value


#: A number as people type it: ASCII digits 0-9, an optional sign, one decimal point,
#: an optional exponent. Python's float() also takes "4_2" (42), Unicode digits
#: ("٤٢", "４２"), "nan" and "infinity"; none of those is a reading.
NUMBER = r"[-+]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][-+]?[0-9]+)?"
_NUMBER_RE = re.compile(NUMBER)
_VALUE_UNIT_RE = re.compile(rf"({NUMBER})\s*((?:[^\W\d_]|°).*)?")  # a unit starts with a letter or °
#: The digits, sign, point and exponent a number is written with (for messages).
NUMBER_FORM = "the digits 0-9, an optional sign and a decimal point (e.g. 4.2 or -1.5)"


def is_number(text: str) -> bool:
    """True when ``text`` (as given, no spaces around) is a number in the ``NUMBER`` form."""
    return _NUMBER_RE.fullmatch(text) is not None


def split_value_unit(text: str) -> tuple[str, str] | None:
    """'4.2gpm' -> ('4.2', 'gpm'), ' 61 psi ' -> ('61', 'psi'), '24' -> ('24', ''); None when
    the text does not start with a number in the ``NUMBER`` form ('4_2', '٤.٢', 'abc')."""
    m = _VALUE_UNIT_RE.fullmatch(text.strip())
    if m is None:
        return None
    return m.group(1), (m.group(2) or "").strip()


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


def theoretical_flow_lpm(displacement_cc: Number, speed_rpm: Number) -> Number:
    """Q_th [L/min] = Vg [cm^3/rev] * n [rpm] / 1000 (standard fluid power identity)."""
    return displacement_cc * speed_rpm / 1000.0
