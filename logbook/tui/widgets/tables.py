"""DataTables whose Enter key is named in the Footer (the stock binding is hidden)."""

from __future__ import annotations

from textual.binding import Binding
from textual.widgets import DataTable


class OpenTable(DataTable):
    """Enter opens the row under the cursor."""

    BINDINGS = [Binding("enter", "select_cursor", "Open", tooltip="open the row under the cursor", id="table.open")]


class EditTable(DataTable):
    """Enter edits the row under the cursor."""

    BINDINGS = [Binding("enter", "select_cursor", "Edit", tooltip="edit the row under the cursor", id="table.edit")]
