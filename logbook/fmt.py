"""Formatting values for people, in their preferred units (pure); and the one way user
text reaches a terminal or a screen (``visible``, ``text``, ``cells``)."""

from __future__ import annotations

import re
from datetime import date
from typing import TYPE_CHECKING

from logbook import units
from logbook.model import Kind
from logbook.units import UnitPrefs

if TYPE_CHECKING:
    from rich.text import Text

#: Characters that steer a terminal or the reading order instead of being shown: the C0
#: controls (ESC starts colour, cursor and link sequences; CR, BS and NUL overwrite), DEL,
#: the C1 controls (U+009B is a one-byte CSI to some terminals), the Unicode line and
#: paragraph separators and the bidirectional embeddings, overrides and isolates
#: (Unicode Standard Annex #9, "Unicode Bidirectional Algorithm").
_CONTROL = re.compile("[\x00-\x1f\x7f-\x9f\u2028\u2029\u202a-\u202e\u2066-\u2069]")


def _escape(match: re.Match) -> str:
    return repr(match[0])[1:-1]  # \x1b, \r, \t, \u202e: Python's own escapes


def visible(value: object) -> str:
    """User text as a terminal or a screen shows it: every character as typed, except that
    control characters are written as their escapes (ESC as ``\\x1b``, CR as ``\\r``), so
    that a stored text cannot move the cursor, recolour or clear the screen or open a link.
    Only the display changes: the store keeps the text as it was entered. None is ''."""
    shown = "" if value is None else str(value)
    return shown if shown.isprintable() else _CONTROL.sub(_escape, shown)


def text(*lines: object, style: str = "") -> Text:
    """The one way text goes to a terminal (rich) or a screen (Textual): a rich ``Text`` of
    ``lines`` (one argument a line), each made ``visible`` and never read as markup, so that
    ``[/]``, ``x[/b]``, ``Ann [night shift]`` or ``[link=...]`` show exactly as typed."""
    from rich.text import Text

    return Text("\n".join(visible(line) for line in lines), style=style, end="")


def cells(*values: object) -> list[Text]:
    """One table row (rich Table or Textual DataTable): each value as ``text`` makes it."""
    return [text(v) for v in values]


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


def nearest_limit(kf, prefs: UnitPrefs) -> str:
    """How close a reading kind is to its limit, in words a planner reads at a glance:
    rising kinds as a percentage of the limit, falling ones as value against limit."""
    if kf is None or kf.latest_value is None:
        return "-"
    if kf.limit is None:
        return f"{kf.kind.label} (no limit)"
    if kf.limit.direction == "below":
        return f"{kf.kind.label} {value(kf.kind, kf.latest_value, prefs, with_unit=False)}/{value(kf.kind, kf.limit.value, prefs)}"
    return f"{kf.kind.label} {100.0 * kf.latest_value / kf.limit.value:.0f}%"


def limit_use(kind: Kind, normalized: float | None, limit, prefs: UnitPrefs) -> str:
    """Short: a rising reading as a percentage of its limit ('64%'); a falling one as its
    margin above the lower limit in the user's unit ('+2.5', '-1.0' when below it)."""
    if normalized is None or limit is None or not limit.value:
        return ""
    if limit.direction == "below":
        margin = units.from_canonical(normalized, unit_for(kind, prefs)) - units.from_canonical(limit.value, unit_for(kind, prefs))
        return f"{margin:+.1f}"
    return f"{100.0 * normalized / limit.value:.0f}%"


def against_limit(kind: Kind, normalized: float | None, limit, prefs: UnitPrefs) -> str:
    """Long: how a normalized value stands against its limit, in words, e.g.
    '64 % of the 24.00 L/min limit' or '2.50 bar above the 20.00 bar lower limit',
    with '(over)' once the limit is crossed."""
    if normalized is None or limit is None or not limit.value:
        return ""
    over = normalized > limit.value if limit.direction == "above" else normalized < limit.value
    tag = " (over)" if over else ""
    if limit.direction == "below":
        margin = abs(normalized - limit.value)
        side = "below" if normalized < limit.value else "above"
        return f"{value(kind, margin, prefs)} {side} the {value(kind, limit.value, prefs)} lower limit{tag}"
    return f"{100.0 * normalized / limit.value:.0f} % of the {value(kind, limit.value, prefs)} limit{tag}"
