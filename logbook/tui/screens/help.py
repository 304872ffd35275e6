"""Help overlay: every key of the screen underneath (read from its bindings) and the app's."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.screen import ModalScreen, Screen
from textual.widgets import Static

KEY_NAMES = {
    "escape": "Esc", "enter": "Enter", "slash": "/", "question_mark": "?", "tab": "Tab", "shift+tab": "Shift+Tab",
    "up": "Up", "down": "Down", "left": "Left", "right": "Right", "pageup": "PgUp", "pagedown": "PgDn",
}

EXTRA = {
    "FleetScreen": (
        ("A-Z 0-9 -", "typing a serial (capital letters, digits, '-') on the table jumps to it"),
        ("Tab", "moves between the filters (site, model, status), the serial box and the table"),
        ("click header", "sorts by that column; again reverses"),
        ("Up/Down PgUp/PgDn", "move through the pumps"),
    ),
    "PumpScreen": (
        ("Up/Down", "on the reading table: choose the kind shown in the chart"),
        ("Tab", "moves to the tabs; Left/Right then switch them"),
    ),
    "ReadingScreen": (
        ("Tab / Enter", "next field; Shift+Tab goes back"),
        ("Up/Down", "previous / next field"),
    ),
    "EventScreen": (("Tab / Enter", "next field; Shift+Tab goes back"),),
}


def key_name(key: str) -> str:
    return "/".join(KEY_NAMES.get(k, k.upper() if k.startswith("f") and k[1:].isdigit() else k) for k in key.split(","))


def binding_lines(screen: Screen) -> list[tuple[str, str]]:
    """(key, what it does) for the screen's own bindings, then the app's; hidden ones too."""
    seen: set[str] = set()
    lines: list[tuple[str, str]] = []
    sources = [type(screen).BINDINGS, type(screen.app).BINDINGS]
    for bindings in sources:
        for b in bindings:
            b = b if isinstance(b, Binding) else Binding(*b)
            if b.key in seen or not b.description:
                continue
            seen.add(b.key)
            lines.append((key_name(b.key), b.description))
    for key, words in EXTRA.get(type(screen).__name__, ()):
        lines.append((key, words))
    return lines


class HelpScreen(ModalScreen):
    """Lists every key that works on the screen it was opened over."""

    BINDINGS = [
        Binding("escape", "close", "Close", id="help.close"),
        Binding("f1", "close", "Close", show=False, id="help.close_f1"),
        Binding("question_mark", "close", "Close", show=False, id="help.close_q"),
        Binding("q", "close", "Close", show=False, id="help.close_qq"),
    ]

    def __init__(self, under: Screen) -> None:
        super().__init__()
        self.under = under

    def compose(self) -> ComposeResult:
        title = getattr(self.under, "HELP_TITLE", type(self.under).__name__.removesuffix("Screen"))
        rows = binding_lines(self.under)
        width = max(len(k) for k, _ in rows) + 2 if rows else 8
        text = "\n".join(f"{k.ljust(width)}{v}" for k, v in rows)
        with VerticalScroll(id="help-box") as box:
            box.border_title = f"Keys: {title}"
            box.border_subtitle = "Esc closes"
            yield Static(text, id="help-text")
            yield Static(
                "\nStatus words come with a symbol (✖ ⚠ ▲ △ … ✓ -) so they read without colour. "
                "P10/P50/P90: the limit is crossed by then with 10/50/90 % probability. "
                "The trend arrow shows whether the value rises (↑) or falls (↓); → steady.",
                id="help-notes",
            )

    def action_close(self) -> None:
        self.dismiss()
