"""Choose the fleet view's filters: site, model, status and reading due (a small window over the view)."""

from __future__ import annotations

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.screen import ModalScreen
from textual.widgets import Label, Select, Static

from logbook import fmt
from logbook.tui.widgets.plain import Plain
from logbook.tui.widgets.keybar import KeyBar

FILTERS = (("site", "Site", "All sites"), ("model", "Model", "All models"), ("status", "Status", "All statuses"),
           ("due", "Next reading", "Any date"))


class FilterScreen(ModalScreen[dict]):
    """``options`` and ``chosen`` map filter name to its values and the current one (None = all).
    Each change applies at once through ``apply``; Esc closes."""

    HELP_TITLE = "Filters"
    BINDINGS = [
        Binding("escape", "close", "Close", tooltip="close the filters (the choice stays)", id="filters.close"),
        Binding("x", "clear", "Clear", tooltip="show every pump again", id="filters.clear"),
    ]

    def __init__(self, options: dict[str, list[str]], chosen: dict[str, str | None], apply) -> None:
        super().__init__()
        self.options = options
        self.chosen = dict(chosen)
        self.apply = apply

    def compose(self) -> ComposeResult:
        with Vertical(id="filter-box") as box:
            box.border_title = "Filter the fleet view"
            box.border_subtitle = "Enter opens a list · Tab next · Esc closes"
            for name, label, prompt in FILTERS:
                with Horizontal(classes="field-row"):
                    yield Label(label, classes="field-label")
                    values = self.options.get(name, [])
                    current = self.chosen.get(name)
                    yield Select([(fmt.text(v), v) for v in values], prompt=prompt, compact=True, id=name,
                                 value=current if current in values else Select.NULL)
            yield Plain("", id="filter-count")
        yield KeyBar()

    def on_mount(self) -> None:
        self.query_one("#site", Select).focus()
        self._count(self.apply(self.chosen))

    @on(Select.Changed)
    def _changed(self, event: Select.Changed) -> None:
        self.chosen[event.select.id] = None if event.value is Select.NULL else event.value
        self._count(self.apply(self.chosen))

    def _count(self, shown: int) -> None:
        self.query_one("#filter-count", Static).update(f"{shown} pump{'' if shown == 1 else 's'} match{'es' if shown == 1 else ''}")

    def action_clear(self) -> None:
        for name, _, _ in FILTERS:
            self.query_one(f"#{name}", Select).clear()

    def action_close(self) -> None:
        self.dismiss(self.chosen)
