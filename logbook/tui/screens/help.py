"""Help overlay: every key of the screen underneath (read from its bindings) and the app's."""

from __future__ import annotations

from rich.table import Table
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import VerticalScroll
from textual.screen import ModalScreen, Screen
from textual.widgets import Static

from logbook.analysis.status import STATUS_ORDER
from logbook.tui.widgets.keybar import KeyBar

KEY_NAMES = {
    "escape": "Esc", "enter": "Enter", "slash": "/", "question_mark": "?", "tab": "Tab", "shift+tab": "Shift+Tab",
    "up": "Up", "down": "Down", "left": "Left", "right": "Right", "pageup": "PgUp", "pagedown": "PgDn",
}

EXTRA = {
    "FleetScreen": (
        ("A-Z 0-9 -", "typing a serial (letters, digits, '-') on the table jumps to it; r or e after it opens its form"),
        ("Tab", "moves between the table and the serial box"),
        ("click header", "sorts by that column; again reverses"),
        ("Up/Down", "move through the pumps (PgUp/PgDn: a page)"),
        ("Columns", "Hours: operating hours since the last overhaul. Worst: the reading closest to its limit "
                    "(drain = case drain, servo = servo pressure, drift = neutral drift). P50/P10: dates by which that "
                    "limit is crossed with 50 % / 10 % probability (months when the terminal is narrow). T: trend arrow "
                    "(wider terminals). Next: the next reading, due, days to go or now! after a jump."),
    ),
    "PumpScreen": (
        ("Up/Down", "on the reading table: choose the kind shown in the chart"),
        ("Tab", "moves to the tabs; Left/Right then switch them"),
    ),
    "ReadingScreen": (("Tab / Enter", "next field; Shift+Tab goes back"),),
    "EventScreen": (("Tab / Enter", "next field; Shift+Tab goes back"),),
    "ModelEditScreen": (("Tab / Enter", "next field; Shift+Tab goes back"),),
}


def key_name(key: str) -> str:
    return "/".join(KEY_NAMES.get(k, k.upper() if k.startswith("f") and k[1:].isdigit() else k) for k in key.split(","))


def _own_bindings(cls) -> list[Binding]:
    """Bindings a class and its logbook base classes declare (not Textual's stock ones)."""
    out = []
    for klass in cls.__mro__:
        if not klass.__module__.startswith("logbook."):
            continue
        for b in klass.__dict__.get("BINDINGS", ()):
            out.append(b if isinstance(b, Binding) else Binding(*b))
    return out


def binding_lines(screen: Screen) -> list[tuple[str, str]]:
    """(key, what it does) for the focused widget, the screen and the app; hidden keys too."""
    seen: set[str] = set()
    lines: list[tuple[str, str]] = []
    sources: list[list[Binding]] = []
    node = screen.focused
    while node is not None and node is not screen:
        sources.append(_own_bindings(type(node)))
        node = node.parent
    sources += [_own_bindings(type(screen)), _own_bindings(type(screen.app))]
    keys_of: dict[str, list[str]] = {}  # one line per action: "F1 ?" both open help
    past_day = getattr(screen.app, "as_of", None) is not None  # --as-of: the keys that record are off
    off = {b.action for b in _own_bindings(type(screen))
           if past_day and screen.check_action(b.action, ()) is False}
    for bindings in sources:
        for b in bindings:
            if b.key in seen or not b.description:
                continue
            typing = getattr(screen, "HOLDS_INPUT", False)
            if typing and (len(b.key) == 1 or b.key == "question_mark"):
                continue  # letters go into the form's fields there
            seen.add(b.key)
            words = b.description + (f": {b.tooltip}" if b.tooltip else "")
            if b.action in off:
                words += " (off: this view of a past day, --as-of, is read-only)"
            if words not in keys_of:
                keys_of[words] = []
                lines.append(("", words))
            keys_of[words].append(b.key_display or key_name(b.key))
    lines = [(" ".join(keys_of[words]), words) for _, words in lines]
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
        table = Table(box=None, show_header=False, padding=(0, 1), expand=True)
        table.add_column("key", style="bold", max_width=12)
        table.add_column("what", ratio=1)
        for key, words in binding_lines(self.under):
            table.add_row(key, words)
        with VerticalScroll(id="help-box") as box:
            box.border_title = f"Keys: {title}"
            box.border_subtitle = "Esc closes"
            yield Static(table, id="help-text")
            yield Static(
                f"\nStatus words come with a symbol ({' '.join(w.split()[0] for w in STATUS_ORDER)}) so they read "
                "without colour. "
                "P10/P50/P90: the limit is crossed by then with 10/50/90 % probability. "
                "The trend arrow shows whether the value rises (↑) or falls (↓); → steady.",
                id="help-notes",
            )
        yield KeyBar()

    def action_close(self) -> None:
        self.dismiss()
