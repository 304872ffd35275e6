"""The safety box of the entry forms: short by default (the warning, plus one more item
where the work needs it), the whole list (logbook.cautions) a key away.

A screen shows it with ``yield SafetyBox(...)`` and lets the key reach it by adding
``SAFETY_BINDING`` to its bindings and ``SafetyKey`` to its bases.
"""

from __future__ import annotations

from rich.text import Text
from textual.binding import Binding
from textual.widgets import Static

from logbook.cautions import SAFETY

SAFETY_KEY = "f6"
SAFETY_BINDING = Binding(SAFETY_KEY, "toggle_safety", "Safety", key_display="F6",
                         tooltip="show the whole safety list, or only the warning", id="entry.safety")


class SafetyBox(Static):
    """``extra``: items shown with the warning in the short form (e.g. the running-machine
    item for a neutral re-set); the key shows every item and the deferral line."""

    def __init__(self, extra: tuple[str, ...] = (), **kwargs) -> None:
        kwargs.setdefault("id", "safety")
        super().__init__("", markup=False, **kwargs)
        self.expanded = False
        self.extra = extra
        self.border_title = SAFETY.title

    def on_mount(self) -> None:
        # The whole list once each time the program starts (on the first form opened), then
        # the warning alone: a bordered list would push the fields out of an 80x24 screen.
        if not getattr(self.app, "safety_list_shown", False):
            self.app.safety_list_shown = True
            self.expanded = True
        self._show()

    def set_extra(self, extra: tuple[str, ...]) -> None:
        self.extra = extra
        self._show()

    def toggle(self) -> None:
        self.expanded = not self.expanded
        self._show()

    def _show(self) -> None:
        if self.expanded:
            rest = [*(f"• {item}" for item in SAFETY.items), SAFETY.deferral]
            self.border_subtitle = "F6 shorter"
        else:
            rest = [f"• {item}" for item in self.extra]
            self.border_subtitle = "F6 the whole list"
        text = Text(SAFETY.warning_line, style="bold")  # the warning tier, apart from the rest
        for line in rest:
            text.append("\n" + line)
        self.update(text)
        self.set_class(self.expanded, "-expanded")


class SafetyKey:
    """Mixin for a screen holding a ``SafetyBox``: the key toggles it."""

    def action_toggle_safety(self) -> None:
        box = self.query_one(SafetyBox)
        box.toggle()
        if box.expanded:
            box.scroll_visible(animate=False)
