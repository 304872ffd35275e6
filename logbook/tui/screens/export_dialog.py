"""Where the plan goes: a path the planner chooses, the format from its suffix, or every
format at once (no suffix). Written by the plan screen through ``logbook.outfile``."""

from __future__ import annotations

from pathlib import Path

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Vertical
from textual.screen import ModalScreen
from textual.widgets import Input, Static

from logbook.tui.widgets.plain import Plain

SUFFIX_FORMATS = {".md": "md", ".csv": "csv", ".html": "html", ".htm": "html", ".json": "json"}
ALL_FORMATS = ("md", "csv", "html", "json")


def targets(text: str) -> tuple[list[tuple[Path, str]], str]:
    """(path, format) pairs for what was typed, or a reason it cannot be written."""
    text = text.strip()
    if not text:
        return [], "type a file name, e.g. plan.html, or a name without suffix for every format"
    path = Path(text).expanduser()
    suffix = path.suffix.lower()
    if suffix in SUFFIX_FORMATS:
        return [(path, SUFFIX_FORMATS[suffix])], ""
    if suffix:
        return [], f"{suffix} is not a format the plan is written in: .md, .csv, .html or .json, or no suffix for all four"
    return [(path.with_name(f"{path.name}.{kind}"), kind) for kind in ALL_FORMATS], ""


class ExportDialog(ModalScreen):
    """Enter writes, Esc cancels. Dismisses with the list of (path, format), or None."""

    HOLDS_INPUT = True
    DEFAULT_CSS = """
    ExportDialog { align: center middle; }
    ExportDialog #export-dialog { width: 90%; max-width: 100; height: auto; border: round $accent; padding: 0 1;
                                  background: $surface; }
    ExportDialog #export-title { text-style: bold; }
    ExportDialog #export-problem { height: auto; }
    """
    BINDINGS = [Binding("escape", "cancel", "Cancel", tooltip="close without writing", id="export.cancel")]

    def __init__(self, suggested: Path) -> None:
        super().__init__()
        self.suggested = suggested

    def compose(self) -> ComposeResult:
        with Vertical(id="export-dialog"):
            yield Static("Export the plan", id="export-title")
            yield Plain("File: the suffix picks the format (.md, .csv, .html for printing, .json); "
                        "no suffix writes all four. Enter writes, Esc cancels.", id="export-help")
            yield Input(value=str(self.suggested), id="export-path")
            yield Plain("", id="export-problem")

    def on_mount(self) -> None:
        self.query_one("#export-path", Input).cursor_blink = getattr(self.app, "blink", True)
        self.query_one("#export-path", Input).focus()

    @on(Input.Submitted, "#export-path")
    def _write(self, event: Input.Submitted) -> None:
        event.stop()
        chosen, why = targets(event.value)
        if why:
            self.query_one("#export-problem", Static).update(f"✗ {why}")
            return
        self.dismiss(chosen)

    def action_cancel(self) -> None:
        self.dismiss(None)
