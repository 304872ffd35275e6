"""Fleet view: one row per pump in service, most urgent first; the screen logbook opens on."""

from __future__ import annotations

from collections import Counter
from pathlib import Path

from textual import events, on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal
from textual.screen import Screen
from textual.widgets import DataTable, Footer, Input, Select, Static

from logbook.tui import present
from logbook.tui.widgets.tables import OpenTable

ANY = Select.NULL


class FleetScreen(Screen):
    """Sort by any column, filter by site, model and status, type a serial to jump to it."""

    HELP_TITLE = "Fleet view"
    BINDINGS = [
        Binding("r", "record_reading", "Reading", tooltip="record a reading for the pump under the cursor (then the next ones)",
                id="fleet.reading"),
        Binding("e", "record_event", "Event", tooltip="record an overhaul, exchange, re-set, repair, oil change, move...",
                id="fleet.event"),
        Binding("s", "sort_next", "Sort", tooltip="sort by the next column (most urgent, P10, P50, hours, serial...)",
                id="fleet.sort"),
        Binding("S", "sort_reverse", "Reverse", show=False, tooltip="reverse the sort order", id="fleet.sort_reverse"),
        Binding("f", "filter", "Filter", tooltip="go to the filters: site, model, status (Tab moves on, Esc back)",
                id="fleet.filter"),
        Binding("slash", "find", "Find serial", show=False, tooltip="type a serial to jump to it; Enter opens it",
                id="fleet.find"),
        Binding("x", "clear_filters", "Clear filters", show=False, tooltip="show every pump again", id="fleet.clear"),
        Binding("m", "models", "Models", tooltip="pump models: limits and reference conditions", id="fleet.models"),
        Binding("p", "plan", "Plan", tooltip="the month-by-month overhaul plan and its export", id="fleet.plan"),
        Binding("o", "round", "Round", show=False, tooltip="a reading round: a site's pumps due for a reading, one after another",
                id="fleet.round"),
        Binding("escape", "back_to_table", "Table", show=False, tooltip="back to the table from a filter", id="fleet.table"),
    ]

    def __init__(self) -> None:
        super().__init__()
        self.sort_key = "status"
        self.reverse = False
        self.serials: list[str] = []  # serial of each table row, in row order
        self._layout: tuple = ()
        self._shown_generation = -1

    def compose(self) -> ComposeResult:
        yield Static("logbook", id="title")
        with Horizontal(id="filters"):
            yield Select([], prompt="All sites", id="site", compact=True)
            yield Select([], prompt="All models", id="model", compact=True)
            yield Select([], prompt="All statuses", id="status", compact=True)
            yield Input(placeholder="serial…", id="find", compact=True, select_on_focus=False)
        table = OpenTable(id="fleet-table", cursor_type="row", zebra_stripes=True, cell_padding=0)
        yield table
        yield Static("Reading the logbook and forecasting…", id="status-line")
        yield Footer(compact=True)

    def on_mount(self) -> None:
        self.query_one("#find", Input).cursor_blink = getattr(self.app, "blink", True)
        self.watch(self.app, "data_generation", self._data_changed, init=True)
        self.query_one("#fleet-table", DataTable).focus()

    # -- data -----------------------------------------------------------------------------
    def _data_changed(self, generation: int) -> None:
        forecast = self.app.forecast
        if forecast is None:
            if self.app.trouble:
                self.query_one("#status-line", Static).update(f"Cannot read the logbook: {self.app.trouble}")
            return
        self._fill_filters(forecast)
        self.refill()

    def _fill_filters(self, forecast) -> None:
        pumps = forecast.pumps
        from logbook.analysis.status import STATUS_ORDER

        options = {
            "site": sorted({p.site or "-" for p in pumps}),
            "model": sorted({p.model for p in pumps}),
            "status": [s for s in STATUS_ORDER if any(p.status == s for p in pumps)]
            + sorted({p.status for p in pumps} - set(STATUS_ORDER)),
        }
        for name, values in options.items():
            select = self.query_one(f"#{name}", Select)
            current = select.value
            with select.prevent(Select.Changed):
                select.set_options([(v, v) for v in values])
                if current in values:
                    select.value = current

    def _filter_value(self, name: str):
        value = self.query_one(f"#{name}", Select).value
        return None if value is ANY or value is Select.NULL else value

    def refill(self) -> None:
        """Re-select, re-sort and re-add the rows; keep the cursor on the same pump."""
        forecast = self.app.forecast
        if forecast is None:
            return
        table = self.query_one("#fleet-table", DataTable)
        keep = self.current_serial()
        pumps = present.select_pumps(
            forecast.pumps, site=self._filter_value("site"), model=self._filter_value("model"),
            status=self._filter_value("status"), sort_key=self.sort_key, reverse=self.reverse,
        )
        self._ensure_columns(table)
        table.clear()
        self.serials = [p.serial for p in pumps]
        table.add_rows([[c.cell(p) for c in self._layout] for p in pumps])
        if keep in self.serials:
            table.move_cursor(row=self.serials.index(keep), animate=False)
        self._update_title(forecast)
        self._update_status(pumps, forecast)

    def _ensure_columns(self, table: DataTable) -> bool:
        # One cell for the scrollbar, one for the separator after the last column.
        width = max(table.size.width or self.app.size.width, 40) - 2
        serial_width = max((len(s) for s in (p.serial for p in self.app.forecast.pumps)), default=7) if self.app.forecast else 7
        layout = present.fleet_layout(width, serial_width)
        if [(c.key, c.width, c.label) for c in layout] == [(c.key, c.width, c.label) for c in self._layout]:
            return False
        self._layout = layout
        table.clear(columns=True)
        for c in layout:
            table.add_column(self._header(c), width=c.width + 1, key=c.key)
        return True

    def _header(self, column) -> str:
        if column.key != self.sort_key:
            return column.label
        mark = "▼" if not self.reverse else "▲"
        return (column.label[: column.width - 1] + mark) if len(column.label) >= column.width else column.label + mark

    def _update_title(self, forecast) -> None:
        source = Path(forecast.source).name if forecast.source else "database"
        self.query_one("#title", Static).update(
            f"Fleet on {forecast.today.isoformat()} · {len(forecast.pumps)} pumps · {source}"
        )

    def _update_status(self, pumps, forecast) -> None:
        counts = Counter(p.status for p in pumps)
        parts = [f"{n} {s}" for s, n in sorted(counts.items(), key=lambda kv: present.status_rank(kv[0]))]
        order = present.SORT_WORDS[self.sort_key] + (", reversed" if self.reverse else "")
        line = f"{len(pumps)} of {len(forecast.pumps)} shown · sorted: {order} · " + "; ".join(parts)
        if self.app.trouble:
            line = f"Last refresh failed: {self.app.trouble}"
        self.query_one("#status-line", Static).update(line)

    def on_resize(self, event: events.Resize) -> None:
        if self.app.forecast is not None:
            self.call_after_refresh(self._relayout)

    def _relayout(self) -> None:
        if self._ensure_columns(self.query_one("#fleet-table", DataTable)):
            self._layout = ()
            self.refill()

    # -- lookups -----------------------------------------------------------------------------
    def current_serial(self) -> str | None:
        table = self.query_one("#fleet-table", DataTable)
        if not self.serials or table.cursor_row is None or not 0 <= table.cursor_row < len(self.serials):
            return None
        return self.serials[table.cursor_row]

    def following_serials(self) -> list[str]:
        """The pumps after the current one in the table's order (for the 'next pump' flow)."""
        current = self.current_serial()
        if current is None:
            return []
        i = self.serials.index(current)
        return self.serials[i + 1:]

    # -- events ------------------------------------------------------------------------------
    @on(Select.Changed)
    def _filter_changed(self, event: Select.Changed) -> None:
        self.refill()

    @on(Input.Changed, "#find")
    def _find_changed(self, event: Input.Changed) -> None:
        text = event.value.strip().lower()
        if not text or not self.serials:
            return
        match = next((i for i, s in enumerate(self.serials) if s.lower().startswith(text)), None)
        if match is None:
            match = next((i for i, s in enumerate(self.serials) if text in s.lower()), None)
        if match is not None:
            self.query_one("#fleet-table", DataTable).move_cursor(row=match, animate=False)

    @on(DataTable.HeaderSelected)
    def _header_clicked(self, event: DataTable.HeaderSelected) -> None:
        key = event.column_key.value
        if key == self.sort_key:
            self.reverse = not self.reverse
        else:
            self.sort_key, self.reverse = key, False
        self._layout = ()
        self.refill()

    def on_key(self, event: events.Key) -> None:
        """Typing a serial on the table (digits, capitals, '-') jumps to it."""
        table = self.query_one("#fleet-table", DataTable)
        if self.focused is not table or event.character is None:
            return
        ch = event.character
        if ch.isdigit() or (ch.isalpha() and ch.isupper() and ch != "S") or ch == "-":
            find = self.query_one("#find", Input)
            find.value = ch
            find.cursor_position = len(ch)
            find.focus()
            event.stop()

    # -- actions ---------------------------------------------------------------------------
    @on(DataTable.RowSelected)
    def _row_chosen(self, event: DataTable.RowSelected) -> None:
        self.action_open_pump()

    @on(Input.Submitted, "#find")
    def _find_submitted(self, event: Input.Submitted) -> None:
        self.query_one("#fleet-table", DataTable).focus()
        self.action_open_pump()

    def action_open_pump(self) -> None:
        serial = self.current_serial()
        if serial is None:
            return
        from logbook.tui.screens.pump import PumpScreen

        self.app.push_screen(PumpScreen(serial, following=self.following_serials()))

    def action_record_reading(self) -> None:
        serial = self.current_serial()
        if serial is not None:
            from logbook.tui.screens.reading import ReadingScreen

            self.app.push_screen(ReadingScreen(serial, following=self.following_serials()))

    def action_record_event(self) -> None:
        serial = self.current_serial()
        if serial is not None:
            from logbook.tui.screens.event import EventScreen

            self.app.push_screen(EventScreen(serial))

    def action_sort_next(self) -> None:
        order = present.SORT_ORDER
        keys = [c.key for c in self._layout] or list(order)
        candidates = [k for k in order if k in keys]
        self.sort_key = candidates[(candidates.index(self.sort_key) + 1) % len(candidates)] if self.sort_key in candidates else candidates[0]
        self.reverse = False
        self._layout = ()
        self.refill()

    def action_sort_reverse(self) -> None:
        self.reverse = not self.reverse
        self._layout = ()
        self.refill()

    def action_find(self) -> None:
        self.query_one("#find", Input).focus()

    def action_filter(self) -> None:
        self.query_one("#site", Select).focus()

    def action_clear_filters(self) -> None:
        for name in ("site", "model", "status"):
            select = self.query_one(f"#{name}", Select)
            with select.prevent(Select.Changed):
                select.clear()
        self.query_one("#find", Input).value = ""
        self.refill()

    def action_back_to_table(self) -> None:
        self.query_one("#fleet-table", DataTable).focus()

    def action_models(self) -> None:
        from logbook.tui.screens.models import ModelsScreen

        self.app.push_screen(ModelsScreen())

    def action_round(self) -> None:
        from logbook.tui.screens.round import RoundScreen

        self.app.push_screen(RoundScreen(site=self._filter_value("site")))

    def action_plan(self) -> None:
        from logbook.tui.screens.plan import PlanScreen

        self.app.push_screen(PlanScreen())
