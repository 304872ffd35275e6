"""The safety list shown wherever readings are taken and on every printed plan or sheet (stdlib only).

One source: every screen, command and export takes its words from ``SAFETY`` and
keeps its structure: the title, then the warning (the one item at the warning tier,
always first and marked WARNING), then the other items, then the line that defers to
the maker's manual, local codes and licensed or certified practice. The points follow
common shop safety practice for testing hydraulics on running machinery; they do not
replace the machine maker's service manual.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class Safety:
    title: str
    warning: str  # the warning tier: shown first, apart from the other items
    items: tuple[str, ...]
    deferral: str  # defers to the maker's manual, local codes, licensed or certified practice
    warning_label: str = "WARNING"
    sign: str = "⚠"  # used for safety only (no status or message shows it)

    @property
    def warning_line(self) -> str:
        """The warning as one line of text: ``⚠ WARNING: ...``."""
        return f"{self.sign} {self.warning_label}: {self.warning}"

    def lines(self) -> tuple[str, ...]:
        """Every line but the title, in order: the warning line, the items, the deferral."""
        return (self.warning_line, *self.items, self.deferral)

    def text(self) -> str:
        """Plain text for a terminal: the title, the warning line, the items as bullets, the deferral."""
        return "\n".join([self.title, self.warning_line, *(f"- {item}" for item in self.items), self.deferral])

    def as_dict(self) -> dict:
        return {"title": self.title, "warning": self.warning, "items": list(self.items), "deferral": self.deferral}


#: The item about running tests (engine running, neutral adjustment), shown with the
#: warning wherever a form is short of room and the work is done with the machine running.
RUNNING_MACHINE = (
    "While the machine runs at test speed and pressure, keep clear of moving attachments, "
    "tracks, wheels and rotating parts. Adjusting neutral with the engine running can make "
    "the machine move: block it, keep people away and follow the maker's procedure."
)

SAFETY = Safety(
    title="Safety",
    warning=(
        "Oil under pressure can go through the skin. An injection injury is a medical emergency, "
        "however small it looks: get to hospital and say it is an injection injury. Never feel "
        "for leaks by hand."
    ),
    items=(
        "Use gauges, test hoses, fittings and a flow meter rated for the full pressure of the "
        "circuit they are fitted to.",
        "Relieve the pressure in every circuit before opening a line: lower attachments to the "
        "ground, cycle the controls, and release accumulators, which hold pressure after shutdown.",
        "Never restrict or block the case drain line with the flow meter: the case pressure can "
        "blow the shaft seal and spray hot oil.",
        "Hot oil and hot surfaces burn. Wear eye protection and gloves.",
        RUNNING_MACHINE,
    ),
    deferral=(
        "Follow the machine maker's service manual, your lockout/tagout practice, local codes "
        "and regulations, and licensed or certified practice. logbook plans maintenance; it is "
        "not a safety device and does not replace the judgement of a qualified technician."
    ),
)
