"""Questions the forms ask before something typed is dropped."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen

from logbook.tui.widgets.plain import Plain


class ConfirmLeave(ModalScreen[bool]):
    """'Leave the form and drop what was typed?' y leaves, n or Esc stays."""

    HOLDS_INPUT = True
    DEFAULT_CSS = """
    ConfirmLeave { align: center middle; }
    ConfirmLeave > Vertical { width: 60; height: auto; border: round $warning; padding: 0 1; background: $surface; }
    """
    BINDINGS = [
        Binding("y", "leave", "Leave, drop it", id="confirm.leave"),
        Binding("n", "stay", "Stay", id="confirm.stay"),
        Binding("escape", "stay", "Stay", id="confirm.escape"),
    ]

    def __init__(self, question: str = "Leave the form? What you typed is not saved and will be dropped.") -> None:
        super().__init__()
        self.question = question

    def compose(self) -> ComposeResult:
        with Vertical():
            yield Plain(self.question)
            yield Plain("y: leave and drop it · n or Esc: back to the form (F2 saves)")

    def action_leave(self) -> None:
        self.dismiss(True)

    def action_stay(self) -> None:
        self.dismiss(False)


class AskReason(ModalScreen[str | None]):
    """'Remove reading 123? Why:' with a one-line reason; Enter removes, Esc keeps it."""

    HOLDS_INPUT = True
    DEFAULT_CSS = """
    AskReason { align: center middle; }
    AskReason > Vertical { width: 70; height: auto; border: round $warning; padding: 0 1; background: $surface; }
    AskReason Input { width: 1fr; }
    """
    BINDINGS = [Binding("escape", "keep", "Keep it", id="reason.keep")]

    def __init__(self, question: str) -> None:
        super().__init__()
        self.question = question

    def compose(self) -> ComposeResult:
        from textual.widgets import Input

        with Vertical():
            yield Plain(self.question)
            yield Input(placeholder="reason (kept in the pump's history)", id="reason")
            yield Plain("Enter: remove it (kept, marked removed) · Esc: keep it", id="reason-hint")

    def on_mount(self) -> None:
        self.query_one("#reason").focus()

    def on_input_submitted(self, event) -> None:
        event.stop()
        text = event.value
        if not text.strip():
            self.query_one("#reason-hint", Plain).update("A reason is required (it stays in the history). Esc keeps it.")
            return
        self.dismiss(text)

    def action_keep(self) -> None:
        self.dismiss(None)
