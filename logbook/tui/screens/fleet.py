"""Fleet view: one row per pump in service, most urgent first; the screen logbook opens on.

Its first frame (title, filter line, column headers, footer) needs only Textual and
``layout``; ``present`` (and with it the model and analysis result modules) is
imported when the first rows are filled.
"""

from __future__ import annotations

from collections import Counter
from pathlib import Path

from rich.text import Text
from textual import events, on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal
from textual.coordinate import Coordinate
from textual.screen import ModalScreen, Screen
from textual.widgets import DataTable, Input, Static

from logbook.tui.layout import ColumnSpec, fleet_columns
from logbook.tui.widgets.plain import Plain
from logbook.tui.widgets.tables import Cell, OpenTable
from logbook.tui.widgets.keybar import KeyBar


#: The filter value (and status line words) for pumps whose next reading is due.
READING_DUE = "reading due"


def _present():
    from logbook.tui import present

    return present


class FleetScreen(Screen):
    """Sort by any column, filter by site, model, status and reading due, type a serial to jump to it."""

    HELP_TITLE = "Fleet view"
    AUTO_FOCUS = "#fleet-table"  # not the serial box, the first focusable (one focus change less at start)
    BINDINGS = [
        Binding("r", "record_reading", "Reading", tooltip="record a reading for the pump under the cursor (then the next ones)",
                id="fleet.reading"),
        Binding("e", "record_event", "Event", tooltip="record an overhaul, exchange, re-set, repair, oil change, move...",
                id="fleet.event"),
        Binding("o", "round", "Round", tooltip="a reading round: a site's pumps due for a reading, one after another",
                id="fleet.round"),
        Binding("s", "sort_next", "Sort", tooltip="sort by the next column (most urgent, P10, P50, hours, serial...)",
                id="fleet.sort"),
        Binding("S", "sort_reverse", "Reverse", show=False, tooltip="reverse the sort order", id="fleet.sort_reverse"),
        Binding("f", "filter", "Filter", tooltip="choose site, model, status or reading due",
                id="fleet.filter"),
        Binding("slash", "find", "Find serial", show=False, tooltip="type a serial to jump to it; Enter opens it",
                id="fleet.find"),
        Binding("x", "clear_filters", "Clear filters", show=False, tooltip="show every pump again", id="fleet.clear"),
        Binding("m", "models", "Models", tooltip="pump models: limits and reference conditions", id="fleet.models"),
        Binding("p", "plan", "Plan", tooltip="the month-by-month overhaul plan and its export", id="fleet.plan"),
        Binding("b", "backtest", "Backtest", tooltip="how past forecasts did, per pump model",
                id="fleet.backtest"),
        Binding("escape", "back_to_table", "Table", show=False, tooltip="back to the table from the serial box",
                id="fleet.table"),
    ]

    #: Left out of the key bar, in this order, when it is too narrow for every key (F1 lists them all).
    KEY_BAR_DROPS = ("fleet.sort", "fleet.models")
    #: What records something: not offered in the view of a past day (--as-of, read-only).
    WRITING_ACTIONS = frozenset({"record_reading", "record_event", "round"})

    def __init__(self) -> None:
        super().__init__()
        self.sort_key = "status"
        self.reverse = False
        self.serials: list[str] = []  # serial of each table row, in row order
        self._layout: tuple[ColumnSpec, ...] = ()  # the columns shown
        self._layout_size: tuple[int, int] = (0, 0)  # (width, serial width) they were laid out for
        self._jumping = False  # typing a serial on the table: the search box is filling
        self._forecast_shown = False  # the rows come from a forecast (not the provisional list)
        self._shown: list = []  # the pump forecast behind each row, in row order
        self._shown_tests: list = []  # the next reading (rounds.NextTest) behind each row
        self._shown_costs: list = []  # the expected cost of its planned month behind each row
        self._stale = False  # new data arrived while another screen covered this one
        self.filters: dict[str, str | None] = {"site": None, "model": None, "status": None, "due": None}

    def compose(self) -> ComposeResult:
        source = Path(self.app.gate.path).name if self.app.gate.path else "logbook"
        yield Plain(f"Fleet on {self.app.today.isoformat()} · {source}", id="title")
        with Horizontal(id="filters"):
            yield Plain(self._filter_words(), id="filter-summary")
            yield Input(placeholder="serial…", id="find", compact=True, select_on_focus=False)
        table = OpenTable(id="fleet-table", cursor_type="row", zebra_stripes=True, cell_padding=0)
        yield table
        yield Plain("Reading the logbook…", id="status-line")
        yield KeyBar()

    def on_mount(self) -> None:
        self.query_one("#find", Input).cursor_blink = getattr(self.app, "blink", True)
        table = self.query_one("#fleet-table", DataTable)
        self._ensure_columns(table)  # the columns are in the first frame, the rows follow
        self.watch(self.app, "data_generation", self._data_changed, init=True)

    # -- data -----------------------------------------------------------------------------
    def _data_changed(self, generation: int) -> None:
        if self._covered():  # under a pump or entry screen: refill when shown again
            self._stale = True
            return
        if self.app.forecast is None:
            if self.app.trouble:
                self.query_one("#status-line", Static).update(f"Cannot read the logbook: {self.app.trouble}")
            elif self.app.fleet is not None:
                self.refill()  # the pumps, while their forecast is computed
            return
        self.refill()

    def _covered(self) -> bool:
        """Another full screen is above this one (a modal such as Filter or Help is not:
        the table shows around it)."""
        for screen in reversed(self.app.screen_stack):
            if screen is self:
                return False
            if not isinstance(screen, ModalScreen):
                return True
        return True

    def on_screen_resume(self) -> None:
        if self._stale:
            self._stale = False
            self._data_changed(self.app.data_generation)

    def filter_options(self) -> dict[str, list[str]]:
        from logbook.analysis.status import STATUS_ORDER

        pumps = self.all_pumps()
        return {
            "site": sorted({p.site or "-" for p in pumps}),
            "model": sorted({p.model for p in pumps}),
            "status": [s for s in STATUS_ORDER if any(p.status == s for p in pumps)]
            + sorted({p.status for p in pumps} - set(STATUS_ORDER)),
            "due": [READING_DUE],
        }

    def _filter_words(self) -> str:
        f = self.filters
        words = [f["site"] or "all sites", f["model"] or "all models", f["status"] or "all statuses"]
        if f.get("due"):
            words.insert(0, READING_DUE)  # first: the line is clipped at 80 columns
        return "Filter (f): " + " · ".join(words)

    def set_filters(self, chosen: dict) -> int:
        """Apply filters (None = any); returns how many pumps are shown."""
        self.filters = {k: chosen.get(k) for k in ("site", "model", "status", "due")}
        self.query_one("#filter-summary", Static).update(self._filter_words())
        self.refill()
        return len(self.serials)

    def _filter_value(self, name: str):
        return self.filters.get(name)

    def all_pumps(self) -> list:
        """The forecast's pumps, or while it is computed, the pumps of the snapshot."""
        if self.app.forecast is not None:
            return list(self.app.forecast.pumps)
        return _present().provisional_pumps(self.app.fleet) if self.app.fleet is not None else []

    def refill(self) -> None:
        """Re-select, re-sort and re-add the rows; keep the cursor on the same pump."""
        if self.app.fleet is None:
            return
        present = _present()
        forecast = self.app.forecast
        everything = self.all_pumps()
        table = self.query_one("#fleet-table", DataTable)
        # Keep the cursor on its pump, except when the first forecast replaces the provisional list.
        keep = self.current_serial() if self._forecast_shown or forecast is None else None
        self._forecast_shown = forecast is not None
        pumps = present.select_pumps(
            everything, site=self._filter_value("site"), model=self._filter_value("model"),
            status=self._filter_value("status"), sort_key=self.sort_key if forecast is not None else "where",
            reverse=self.reverse, due=bool(self._filter_value("due")), tests=self.app.tests, today=self.app.today,
            costs=self.app.month_costs,
        )
        tests = self.app.tests or {}
        shown_tests = [tests.get(p.serial) for p in pumps]
        shown_costs = [self.app.month_costs.get(p.serial) for p in pumps]
        rebuilt = self._ensure_columns(table)
        columns = present.fleet_layout(*self._layout_size, tests=self.app.tests, today=self.app.today,
                                       costs=self.app.month_costs)
        if not (not rebuilt and self._update_in_place(table, columns, pumps, shown_tests, shown_costs)):
            table.clear()
            self.serials = [p.serial for p in pumps]
            table.add_rows([[Cell(c.cell(p)) for c in columns] for p in pumps])
            if keep in self.serials:
                table.move_cursor(row=self.serials.index(keep), animate=False)
        self._shown, self._shown_tests, self._shown_costs = pumps, shown_tests, shown_costs
        self._update_title(everything)
        self._update_status(pumps, everything)

    #: Above this many changed rows the table is refilled rather than updated cell by cell.
    IN_PLACE_ROWS = 20

    def _update_in_place(self, table: DataTable, columns, pumps, tests, costs) -> bool:
        """Rewrite only the rows whose forecast changed (one saved pump) when the order
        is the same; False when the table has to be refilled."""
        if [p.serial for p in pumps] != self.serials or len(self._shown) != len(pumps) or table.row_count != len(pumps):
            return False
        if len(self._shown_tests) != len(tests) or len(self._shown_costs) != len(costs):
            return False
        changed = [i for i, (was, now, was_t, now_t) in enumerate(zip(self._shown, pumps, self._shown_tests, tests))
                   if was is not now or was_t != now_t]
        if len(changed) > self.IN_PLACE_ROWS:
            return False
        for row in changed:
            for col, column in enumerate(columns):
                table.update_cell_at(Coordinate(row, col), Cell(column.cell(pumps[row])))
        # the costs arrive after the forecast: only their cells change, however many
        cost = next((col for col, column in enumerate(columns) if column.key == "cost"), None)
        if cost is not None:
            done = set(changed)
            for row, (was_c, now_c) in enumerate(zip(self._shown_costs, costs)):
                if was_c != now_c and row not in done:
                    table.update_cell_at(Coordinate(row, cost), Cell(columns[cost].cell(pumps[row])))
        return True

    def _ensure_columns(self, table: DataTable) -> bool:
        # One cell for the scrollbar, one for the separator after the last column.
        width = max(table.size.width or self.app.size.width, 40) - 2
        serial_width = max((len(s) for s in self.app.fleet.pumps), default=7) if self.app.fleet else 7
        layout = fleet_columns(width, serial_width).columns
        self._layout_size = (width, serial_width)
        if layout == self._layout:
            return False
        self._layout = layout
        table.clear(columns=True)
        for c in layout:  # a Text label: no markup to parse
            table.add_column(Text(self._header(c)), width=c.width + 1, key=c.key)
        return True

    def _header(self, column) -> str:
        if column.key != self.sort_key:
            return column.label
        mark = "▼" if not self.reverse else "▲"
        return (column.label[: column.width - 1] + mark) if len(column.label) >= column.width else column.label + mark

    def _update_title(self, everything) -> None:
        source = Path(self.app.fleet.source).name if self.app.fleet.source else "database"
        self.query_one("#title", Static).update(
            f"Fleet on {self.app.today.isoformat()} · {len(everything)} pumps · {source}"
        )

    def _update_status(self, pumps, everything) -> None:
        if self.app.forecast is None:
            self.query_one("#status-line", Static).update(f"{len(pumps)} pumps · forecasting their wear trends…")
            return
        counts = Counter(p.status for p in pumps)
        present = _present()
        parts = [f"{n} {s}" for s, n in sorted(counts.items(), key=lambda kv: present.status_rank(kv[0]))]
        order = present.SORT_WORDS[self.sort_key] + (", reversed" if self.reverse else "")
        due = sum(1 for p in pumps if present.is_reading_due(self.app.tests, p.serial, self.app.today))
        money = self.app.money
        cost = [f"cost in {money.currency or 'no currency'}"] \
            if money is not None and money.costs is not None else []
        line = " · ".join([f"{len(pumps)} of {len(everything)} shown", f"{due} {READING_DUE}", f"sorted: {order}"]
                          + cost)
        if self.app.refreshing:
            line += " · re-forecasting the other pumps…"
        if parts:  # a line of their own (wrapped when narrow: the status line grows, never cuts them off)
            line += "\n" + "; ".join(parts)
        if self.app.trouble:
            line = f"Last refresh failed: {self.app.trouble}"
        self.query_one("#status-line", Static).update(line)

    def on_resize(self, event: events.Resize) -> None:
        self.call_after_refresh(self._relayout)

    def _relayout(self) -> None:
        if self._ensure_columns(self.query_one("#fleet-table", DataTable)) and self.app.fleet is not None:
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
    #: Keys that, typed after a serial in the serial box, act on the pump found (as on the table).
    FIND_KEYS = {"r": "record_reading", "e": "record_event"}

    @on(Input.Changed, "#find")
    def _find_changed(self, event: Input.Changed) -> None:
        text = event.value.strip().lower()
        if not text or not self.serials:
            return
        key, before = text[-1], text[:-1]
        if key in self.FIND_KEYS and before and not any(text in s.lower() for s in self.serials) \
                and any(before in s.lower() for s in self.serials):
            # r after a serial: the pump found gets its reading form (the letter is no part of any serial)
            event.input.value = event.value[:-1]
            self.query_one("#fleet-table", DataTable).focus()
            getattr(self, f"action_{self.FIND_KEYS[key]}")()
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

    def check_action(self, action: str, parameters) -> bool | None:
        """As of a past day (--as-of) the keys that record are off the key bar (the keys say why)."""
        return not (action in self.WRITING_ACTIONS and self.app.as_of is not None)

    def on_key(self, event: events.Key) -> None:
        """Typing a serial on the table (digits, capitals, '-') jumps to it."""
        if self.app.read_only_key(self, event):
            return
        table = self.query_one("#fleet-table", DataTable)
        if self.focused is not table or event.character is None:
            return
        ch = event.character
        # a letter no key is bound to (a lowercase c) is part of a serial too
        free = ch.isalpha() and ch.islower() and ch not in self.app.active_bindings
        if ch.isdigit() or (ch.isalpha() and ch.isupper() and ch != "S") or ch == "-" or free:
            find = self.query_one("#find", Input)
            if not self._jumping:  # a new search; keys typed before the focus moves are appended
                self._jumping = True
                find.value = ""
            find.insert_text_at_cursor(ch)
            find.focus()
            event.stop()

    @on(events.DescendantFocus)
    def _focus_moved(self, event: events.DescendantFocus) -> None:
        if isinstance(event.widget, DataTable):
            self._jumping = False

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
        order = _present().SORT_ORDER
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
        from logbook.tui.screens.filters import FilterScreen

        if self.app.fleet is not None:
            self.app.push_screen(FilterScreen(self.filter_options(), self.filters, self.set_filters))

    def action_clear_filters(self) -> None:
        self.query_one("#find", Input).value = ""
        self.set_filters({})

    def action_back_to_table(self) -> None:
        self.query_one("#fleet-table", DataTable).focus()

    def action_models(self) -> None:
        from logbook.tui.screens.models import ModelsScreen

        self.app.push_screen(ModelsScreen())

    def action_round(self) -> None:
        from logbook.tui.screens.round import RoundScreen

        self.app.push_screen(RoundScreen(site=self._filter_value("site")))

    def action_backtest(self) -> None:
        from logbook.tui.screens.backtest import BacktestScreen

        self.app.push_screen(BacktestScreen())

    def action_plan(self) -> None:
        from logbook.tui.screens.plan import PlanScreen

        self.app.push_screen(PlanScreen())
