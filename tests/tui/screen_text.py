"""Our own screen comparison: the screen as plain text, compared with a reviewed file
in tests/tui/__snapshots__/. LOGBOOK_UPDATE_SNAPSHOTS=1 rewrites the files."""

from __future__ import annotations

import io
import os
from pathlib import Path

from rich.console import Console

SNAPSHOTS = Path(__file__).parent / "__snapshots__"


def screen_text(app) -> str:
    """The visible screen as text, one line per terminal row, trailing spaces removed."""
    width, height = app.size
    console = Console(width=width, height=height, file=io.StringIO(), force_terminal=True, color_system="truecolor",
                      record=True, legacy_windows=False, safe_box=False)
    console.print(app.screen._compositor.render_update(full=True, screen_stack=app._background_screens, simplify=False))
    lines = console.export_text(styles=False).split("\n")
    return "\n".join(line.rstrip() for line in lines[:height]) + "\n"


def assert_snapshot(name: str, text: str) -> None:
    path = SNAPSHOTS / f"{name}.txt"
    if os.environ.get("LOGBOOK_UPDATE_SNAPSHOTS") == "1" or not path.exists():
        if os.environ.get("LOGBOOK_UPDATE_SNAPSHOTS") != "1":
            raise AssertionError(f"no baseline {path}: run with LOGBOOK_UPDATE_SNAPSHOTS=1, then review the file")
        SNAPSHOTS.mkdir(exist_ok=True)
        path.write_text(text, encoding="utf-8")
        return
    expected = path.read_text(encoding="utf-8")
    if text != expected:
        import difflib

        diff = "".join(difflib.unified_diff(expected.splitlines(True), text.splitlines(True), "baseline", "now"))
        raise AssertionError(f"screen differs from {path.name}:\n{diff}")
