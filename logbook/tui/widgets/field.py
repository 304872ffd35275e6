"""A labelled one-line input with its unit and the message of what is wrong with it."""

from __future__ import annotations

from typing import Callable

from textual import on
from textual.app import ComposeResult
from textual.containers import Horizontal, Vertical
from textual.widgets import Input, Label, Static

from logbook.model import Problem
from logbook.validate import say
from logbook.tui.widgets.plain import Plain

Parser = Callable[[str], tuple[object, Problem | None]]


def no_check(text: str) -> tuple[object, Problem | None]:
    return text.strip(), None


class FieldInput(Input):
    """An input that runs its own editing keys (Backspace, Delete, Ctrl+U, Home, Left...)
    where it handles characters, in key order. The framework runs a widget's bindings
    only once the key has bubbled up to the app, by which time the characters typed
    after it have been inserted: "26.3", Backspace, "2" typed fast became 26.32."""

    async def _on_key(self, event) -> None:
        for binding in self._bindings.key_to_bindings.get(event.key, ()):
            if not binding.priority:
                event.stop()
                event.prevent_default()
                await self.run_action(binding.action)
                return
        await super()._on_key(event)


class FormField(Vertical):
    """``parse`` turns the text into (value, problem); the problem is shown under the field.

    Store problems found by a dry run are shown the same way (``show_problem``).
    """

    def __init__(self, name: str, label: str, parse: Parser = no_check, *, value: str = "", unit: str = "",
                 placeholder: str = "", input_widget: Input | None = None) -> None:
        super().__init__(id=f"field-{name}")
        self.field_name = name
        self.label_text = label
        self.parse = parse
        self.unit = unit
        self._input = input_widget or FieldInput(value=value, placeholder=placeholder, compact=True, id=f"in-{name}")
        self._own_problem: Problem | None = None
        self._store_problem: str = ""
        self._programmatic: str | None = value  # a prefill's own change event is not the user's edit
        self._prefill = value  # what the program put there; marked as prefilled until changed

    def on_mount(self) -> None:
        self._input.cursor_blink = getattr(self.app, "blink", True)
        self._mark()

    @property
    def edited(self) -> bool:
        """The text differs from what the program put there (the person typed something)."""
        return self._input.value != self._prefill

    @property
    def prefilled(self) -> bool:
        return bool(self._prefill) and not self.edited

    def _mark(self) -> None:
        self.set_class(self.prefilled, "-prefilled")

    def compose(self) -> ComposeResult:
        with Horizontal(classes="field-row"):
            yield Label(self.label_text, classes="field-label")
            yield self._input
            yield Static(self.unit, classes="field-unit")
        yield Plain("", classes="field-message")

    @property
    def input(self) -> Input:
        return self._input

    @property
    def text(self) -> str:
        return self._input.value

    def set_text(self, text: str) -> None:
        """Set the text from the program (a prefill): not checked until the user edits it."""
        self._programmatic = text
        self._prefill = text
        self._own_problem = None
        self._store_problem = ""
        self._input.value = text
        self._show()
        self._mark()

    def check(self) -> tuple[object, Problem | None]:
        """Parse the text now and show or clear its message."""
        value, problem = self.parse(self._input.value)
        self._own_problem = problem
        self._show()
        return value, problem

    def show_problem(self, text: str) -> None:
        """A problem the store found with this field ('' clears it)."""
        self._store_problem = text
        self._show()

    def _show(self) -> None:
        message = say(self._own_problem, self.label_text) if self._own_problem else self._store_problem
        self.query_one(".field-message", Static).update(message)
        self.set_class(bool(message), "-bad")
        mark = ("?" if message.startswith("?") else "✗") if message else ""
        self.query_one(".field-unit", Static).update(f"{self.unit} {mark}".strip() if mark else self.unit)

    @on(Input.Changed)
    def _changed(self, event: Input.Changed) -> None:
        if self._programmatic is not None and event.value == self._programmatic:
            event.prevent_default()
            self._programmatic = None
            event.programmatic = True
            return
        self._programmatic = None
        event.programmatic = False
        self._store_problem = ""
        self._mark()
        self.check()
