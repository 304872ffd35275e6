"""DataTables whose Enter key is named in the Footer (the stock binding is hidden)."""

from __future__ import annotations

from rich.segment import Segment
from textual.binding import Binding
from textual.widgets import DataTable


class Cell:
    """A plain-text table cell that renders as one segment and is never measured or
    parsed for markup: thousands of rows fill fast when the columns have fixed widths."""

    __slots__ = ("plain",)

    def __init__(self, plain: str) -> None:
        self.plain = plain

    def __str__(self) -> str:
        return self.plain

    def __repr__(self) -> str:
        return f"Cell({self.plain!r})"

    def __rich_console__(self, console, options):
        yield Segment(self.plain)


class OpenTable(DataTable):
    """Enter opens the row under the cursor; Home and End go to the first and last row."""

    BINDINGS = [
        Binding("enter", "select_cursor", "Open", tooltip="open the row under the cursor", id="table.open"),
        Binding("home", "row_at('first')", "First", show=False, key_display="Home", tooltip="the first row", id="table.first"),
        Binding("end", "row_at('last')", "Last", show=False, key_display="End", tooltip="the last row", id="table.last"),
    ]

    def action_row_at(self, which: str) -> None:
        if self.row_count:
            self.move_cursor(row=0 if which == "first" else self.row_count - 1, animate=False)


class EditTable(DataTable):
    """Enter edits the row under the cursor."""

    BINDINGS = [Binding("enter", "select_cursor", "Edit", tooltip="edit the row under the cursor", id="table.edit")]
