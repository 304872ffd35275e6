"""Pump view: who the pump is, where it sat, what happened to it, its readings and,
per reading kind, a chart of the engine's fitted trend with the projected dates."""

from __future__ import annotations

from rich.cells import cell_len
from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import DataTable, Static, TabbedContent, TabPane

from logbook import fmt
from logbook.analysis.results import outcome_words
from logbook.model import ALL_KINDS, Kind
from logbook.tui import present
from logbook.tui.widgets.chart import TrendChart
from logbook.tui.screens.backtest import PastForecasts
from logbook.tui.widgets.plain import Plain
from logbook.tui.widgets.keybar import KeyBar

TABS = ("trends", "readings", "events", "fitted", "history")
HISTORY_COLUMNS = ("When (UTC)", "Who", "What", "Before -> after", "Reason")
#: Widest Who and What before they wrap; Before -> after is never narrower than CHANGE_LEAST.
WHO_MOST, WHAT_MOST, CHANGE_LEAST = 14, 24, 24


def history_widths(rows: list[list[str]], width: int) -> list[int | None]:
    """Column widths of the History tab for ``width`` cells: When as wide as a time, Who and
    What as their widest cell up to a limit (longer ones wrap), Before -> after the room
    left on screen (it wraps; all of it unless Reason fits whole beside it), Reason measured
    by the table (the line under the table has it in full).
    Every column is padded by one cell either side; one cell is left for the scrollbar."""
    def widest(i: int) -> int:
        return max([cell_len(HISTORY_COLUMNS[i])] + [cell_len(r[i]) for r in rows])

    when, who, what = widest(0), min(widest(1), WHO_MOST), min(widest(2), WHAT_MOST)
    room = width - (when + 2) - (who + 2) - (what + 2) - 2 - 1
    change = min(widest(3), max(room, CHANGE_LEAST))
    if room - change < widest(4) + 2:  # Reason would show cut at the edge: the change takes the room
        change = max(change, room)
    return [when, who, what, change, None]
EVENT_WORDS = {
    "overhaul": "overhaul", "exchange": "exchange", "neutral_reset": "neutral re-set", "control_repair": "control repair",
    "oil_change": "oil change", "move": "move", "meter_replaced": "hour meter replaced",
}


class PumpScreen(Screen):
    """One pump; ``following`` are the pumps after it in the fleet view (for 'next pump')."""

    HELP_TITLE = "Pump view"
    BINDINGS = [
        Binding("escape", "back", "Back", tooltip="back to the list you came from", id="pump.back"),
        Binding("r", "record_reading", "Reading", tooltip="record a reading for this pump", id="pump.reading"),
        Binding("e", "record_event", "Event", tooltip="record an event for this pump", id="pump.event"),
        Binding("k", "next_kind", "Kind", tooltip="chart the next reading kind (case drain, servo, drift)", id="pump.kind"),
        Binding("v", "next_tab", "View", tooltip="next tab: trends, readings, events, fitted in", id="pump.view"),
        Binding("b", "past_forecasts", "Past", show=False, tooltip="how past forecasts of this pump did (the backtest "
                "of its model)", id="pump.past"),
        Binding("n", "next_pump", "Next pump", tooltip="the next pump in the fleet view's order", id="pump.next"),
        Binding("1", "tab('trends')", "Trends", show=False, tooltip="the trends tab", id="pump.tab1"),
        Binding("2", "tab('readings')", "Readings", show=False, tooltip="the readings tab", id="pump.tab2"),
        Binding("3", "tab('events')", "Events", show=False, tooltip="the events tab", id="pump.tab3"),
        Binding("4", "tab('fitted')", "Fitted in", show=False, tooltip="the machines it sat in", id="pump.tab4"),
        Binding("5", "tab('history')", "History", show=False, tooltip="who recorded, corrected or removed what",
                id="pump.tab5"),
        Binding("h", "tab('history')", "History", tooltip="who recorded, corrected or removed what, and why",
                id="pump.history"),
        Binding("c", "correct", "Correct", tooltip="correct the reading under the cursor (Readings tab)",
                id="pump.correct"),
        Binding("d", "remove", "Remove", tooltip="remove the reading or event under the cursor, with a reason",
                id="pump.remove"),
    ]

    #: Left out of the key bar, in this order, when it is too narrow for every key (F1 lists them all).
    KEY_BAR_DROPS = ("pump.view", "pump.kind", "app.quit")
    #: What records, corrects or removes something: not offered in the view of a past day (--as-of).
    WRITING_ACTIONS = frozenset({"record_reading", "record_event", "correct", "remove"})

    def __init__(self, serial: str, following: list[str] | None = None) -> None:
        super().__init__()
        self.serial = serial
        self.following = list(following or [])
        self.kind: Kind | None = None  # chosen kind; None = the one closest to its limit
        self._readings: dict = {}
        self._model = None

    def compose(self) -> ComposeResult:
        yield Plain(f"Pump {self.serial}", id="title")
        yield Plain("", id="identity")
        with TabbedContent(id="pump-tabs", initial="trends"):
            with TabPane("Trends", id="trends"):
                yield DataTable(id="kind-table", cursor_type="row", cell_padding=1)
                yield Plain("", id="kind-summary")
                yield PastForecasts(self.serial, id="past-forecasts")
                yield TrendChart(self.app.units, id="chart")
            with TabPane("Readings", id="readings"):
                yield Plain("", id="readings-note", classes="form-hint")
                yield DataTable(id="readings-table", cursor_type="row", zebra_stripes=True)
                yield Plain("", id="reading-detail", classes="form-hint")
            with TabPane("Events", id="events"):
                yield DataTable(id="events-table", cursor_type="row", zebra_stripes=True)
            with TabPane("Fitted in", id="fitted"):
                yield DataTable(id="fitted-table", cursor_type="row", zebra_stripes=True)
            with TabPane("History", id="history"):
                yield DataTable(id="history-table", cursor_type="row", zebra_stripes=True)
                yield Plain("", id="history-detail", classes="form-hint")
        yield KeyBar()

    def on_mount(self) -> None:
        self.watch(self.app, "data_generation", self._data_changed, init=True)
        self.query_one("#kind-table", DataTable).focus()

    # -- data --------------------------------------------------------------------------
    def _data_changed(self, generation: int) -> None:
        fleet, pf = self.app.fleet, self.app.pump_forecast(self.serial)
        if fleet is None or self.serial not in fleet.pumps:
            self.query_one("#identity", Static).update(self.app.trouble or "Reading the logbook…")
            return
        history = fleet.history(self.serial)
        self._show_identity(history, pf)
        self._show_kinds(pf)
        self._show_readings(history)
        self._show_events(history)
        self._show_fitted(history, fleet)
        self._events = {str(e.id): e for e in history.events}
        if self.query_one("#pump-tabs", TabbedContent).active == "history":
            self._load_history()

    def _show_identity(self, history, pf) -> None:
        m, u = history.model, self.app.units
        where = present.where(pf) if pf else ("forecast being computed" if self.app.forecast is None else "not in service")
        site = f" ({pf.site})" if pf and pf.site else ""
        self.query_one("#title", Static).update(f"Pump {self.serial} · {m.code} · {where}{site}")
        status = pf.status if pf else "-"
        since = fmt.hours(pf.hours_since_overhaul) if pf else "-"
        per_day = f"{pf.hours_per_day:.1f} h/day" if pf and pf.hours_per_day else "utilisation unknown"
        last = fmt.day(pf.last_reading_on) if pf else "-"
        lines = [
            f"{status} · {since} since overhaul · {per_day} · last read {last}",
            present.next_words(self.app.next_test(self.serial), self.app.today) if self.app.tests is not None
            else "Next: reading date being worked out…",
            f"{m.code} {m.displacement_cc:g} cm3/rev, rated {fmt.pressure(m.rated_pressure_bar, u)} · reference "
            f"{fmt.temperature(m.ref_temp_c, u)}, {fmt.pressure(m.ref_pressure_bar, u)}, VG {m.oil_grade} VI {m.oil_vi:g}",
        ]
        if pf and pf.utilisation_basis:  # parked, by season, stood still: which hours a day the dates assume
            lines[-1] = f"{pf.machine} {pf.utilisation_basis}"  # in place of the model's line (the models view has it)
        self.query_one("#identity", Static).update("\n".join(lines))

    def _kinds(self, pf):
        return {kf.kind: kf for kf in pf.kinds} if pf else {}

    def _show_kinds(self, pf) -> None:
        table = self.query_one("#kind-table", DataTable)
        u = self.app.units
        if not table.columns:
            for label in ("Reading", "Latest", "Limit", "Use", "P10", "P50", "P90", "Path", "n"):
                table.add_column(label, key=label)
        table.clear()
        kinds = self._kinds(pf)
        for kind in ALL_KINDS:
            kf = kinds.get(kind)
            if kf is None:
                table.add_row(*fmt.cells(present.KIND_SHORT[kind], "-", "-", "", "", "", "", "", ""), key=kind.value)
                continue
            share = fmt.limit_use(kind, kf.latest_value, kf.limit, u)
            table.add_row(
                *fmt.cells(present.KIND_SHORT[kind], fmt.value(kind, kf.latest_value, u),
                           fmt.value(kind, kf.limit.value, u) if kf.limit else "none", share,
                           fmt.day(kf.p10_date), fmt.day(kf.p50_date), fmt.day(kf.p90_date),
                           kf.path if kf.path != "none" else "-", str(kf.n_readings)), key=kind.value,
            )
        if self.kind is None:
            self.kind = pf.worst.kind if pf and pf.worst else Kind.CASE_DRAIN
        table.move_cursor(row=ALL_KINDS.index(self.kind), animate=False)
        self._show_chart()

    def _show_chart(self) -> None:
        pf = self.app.pump_forecast(self.serial)
        kf = self._kinds(pf).get(self.kind)
        chart = self.query_one("#chart", TrendChart)
        chart.show(kf)
        summary = self.query_one("#kind-summary", Static)
        if kf is None:
            summary.update(f"{self.kind.label}: no forecast")
            return
        words = outcome_words(kf)
        left = f"; {fmt.hours(kf.p50_hours)} left at P50" if kf.p50_hours is not None else ""
        flags = present.flag_words(kf.flags)
        trend = " ".join(present.trend(kf))
        segment = f"since {fmt.day(kf.segment_start)}" if kf.segment_start else "no segment"
        path = ""
        if kf.path != "none":
            path = f" · {kf.path} path {kf.path_share:.0%}" if kf.path_share is not None else f" · {kf.path} path"
        if kf.percent_of_theoretical is not None:
            left += f" · {kf.percent_of_theoretical:.1f} % of theoretical flow"
        summary.update(
            f"{kf.kind.label}: {words}{left}{path} · trend {trend} · {kf.n_readings} reading(s) {segment}"
            + (f" · flags: {flags}" if flags else "")
        )

    def _show_readings(self, history) -> None:
        from logbook.analysis.normalize import normalized_value

        table = self.query_one("#readings-table", DataTable)
        u, m = self.app.units, history.model
        if not table.columns:
            for label in ("Date", "Machine", "Meter h", "Case drain", "at ref.", "Servo", "Drift", "Oil",
                          "Test p", "Speed", "ISO 4406", "Technician", "Entered by"):
                table.add_column(label, key=label)
        table.clear()
        self._readings = {str(r.id): r for r in history.readings}
        self._model = m
        for r in reversed(history.readings):
            at_ref = normalized_value(r, Kind.CASE_DRAIN, m) if r.case_drain_lpm is not None else None
            at_ref = None if at_ref is not None and at_ref != at_ref else at_ref  # NaN: conditions missing
            table.add_row(*fmt.cells(
                fmt.day(r.taken_on), r.machine or "", fmt.hours(r.machine_hours),
                fmt.value(Kind.CASE_DRAIN, r.case_drain_lpm, u), fmt.value(Kind.CASE_DRAIN, at_ref, u),
                fmt.value(Kind.SERVO_PRESSURE, r.servo_pressure_bar, u), fmt.value(Kind.NEUTRAL_DRIFT, r.neutral_drift_bar, u),
                fmt.temperature(r.oil_temp_c, u), fmt.pressure(r.test_pressure_bar, u),
                f"{r.test_speed_rpm:g}" if r.test_speed_rpm else "-", r.iso4406 or "-", r.technician or "-",
                r.entered_by or "-"), key=str(r.id),
            )
        self.query_one("#readings-note", Static).update(
            f"{len(history.readings)} readings, newest first. 'at ref.' = case drain normalized to {fmt.temperature(m.ref_temp_c, u)}, "
            f"{fmt.pressure(m.ref_pressure_bar, u)} and the reference oil; servo pressure and |drift| are trended as read."
        )

    def _show_events(self, history) -> None:
        table = self.query_one("#events-table", DataTable)
        if not table.columns:
            for label in ("Date", "Event", "Machine", "Hours", "To", "Technician", "Note", "Entered by"):
                table.add_column(label, key=label)
        table.clear()
        for e in reversed(history.events):
            to = f"{e.to_machine} {e.to_position or ''}".strip() if e.to_machine else (fmt.hours(e.to_hours) if e.to_hours is not None else "")
            table.add_row(*fmt.cells(fmt.day(e.happened_on), EVENT_WORDS.get(e.kind.value, e.kind.value), e.machine or "",
                                     fmt.hours(e.hours), to, e.technician or "-", e.note or "", e.entered_by or "-"),
                          key=str(e.id))
        if not history.events:
            table.add_row(*fmt.cells("-", "no events recorded", "", "", "", "", "", ""))

    def _show_fitted(self, history, fleet) -> None:
        table = self.query_one("#fitted-table", DataTable)
        if not table.columns:
            for label in ("Machine", "Position", "Site", "From", "Until", "Meter at fit", "Pump h at fit"):
                table.add_column(label, key=label)
        table.clear()
        for f in reversed(history.fitments):
            machine = fleet.machines.get(f.machine)
            table.add_row(*fmt.cells(f.machine, f.position, machine.site if machine else "-", fmt.day(f.fitted_on),
                                     fmt.day(f.removed_on) if f.removed_on else "now", fmt.hours(f.machine_hours_at_fit),
                                     fmt.hours(f.pump_hours_at_fit)))

    # -- events ----------------------------------------------------------------------------
    def check_action(self, action: str, parameters) -> bool | None:
        """As of a past day (--as-of) the keys that write are off the key bar (the keys say why)."""
        return not (action in self.WRITING_ACTIONS and self.app.as_of is not None)

    def on_key(self, event) -> None:
        self.app.read_only_key(self, event)

    @on(DataTable.RowHighlighted, "#readings-table")
    def _reading_highlighted(self, event: DataTable.RowHighlighted) -> None:
        """Everything about the reading under the cursor, for narrow terminals."""
        r = self._readings.get(event.row_key.value) if event.row_key is not None else None
        if r is None:
            return
        u = self.app.units
        when = r.entered_at.strftime("%Y-%m-%d %H:%M") if r.entered_at else "?"
        oil = f"VG {r.oil_grade or self._model.oil_grade} VI {r.oil_vi or self._model.oil_vi:g}"
        self.query_one("#reading-detail", Static).update(
            f"Reading {r.id} of {fmt.day(r.taken_on)}: taken by {r.technician or '-'}, entered by {r.entered_by or '-'} "
            f"at {when} UTC · oil {fmt.temperature(r.oil_temp_c, u)}, {oil} · test {fmt.pressure(r.test_pressure_bar, u)}, "
            f"{r.test_speed_rpm or 0:g} rpm · charge {fmt.pressure(r.charge_pressure_bar, u)} · ISO 4406 {r.iso4406 or '-'}"
            + (f" · note: {r.note}" if r.note else "")
        )

    @on(DataTable.RowHighlighted, "#kind-table")
    def _kind_highlighted(self, event: DataTable.RowHighlighted) -> None:
        kind = Kind(event.row_key.value)
        if kind is not self.kind:
            self.kind = kind
            self._show_chart()

    # -- history, corrections, removals (the store's, as on the command line) ---------------
    @on(TabbedContent.TabActivated, "#pump-tabs")
    def _tab_shown(self, event: TabbedContent.TabActivated) -> None:
        if event.pane.id == "history":
            self._load_history()

    @work(thread=True, exclusive=True, group="pump-history")
    def _load_history(self) -> None:
        from logbook.tui.gate import trouble_text

        try:
            with self.app.gate.open() as store:
                trail = store.pump_trail(self.serial)
        except Exception as exc:
            self.app.call_from_thread(self.notify, trouble_text(exc), severity="error")
            return
        self.app.call_from_thread(self._show_history, trail)

    def _show_history(self, trail) -> None:
        from logbook.commands.history import describe

        rows = [[entry.at.strftime("%Y-%m-%d %H:%M"), entry.who, *describe(entry), entry.reason or ""]
                for entry in reversed(trail)] or [["-", "", "no recorded changes", "", ""]]
        table = self.query_one("#history-table", DataTable)
        widths = history_widths(rows, table.size.width or self.app.size.width)
        table.clear(columns=True)
        for label, width in zip(HISTORY_COLUMNS, widths):
            table.add_column(label, key=label, width=width)
        self._history = {}
        for i, cells in enumerate(rows):
            wraps = any(w is not None and cell_len(c) > w for c, w in zip(cells, widths))
            table.add_row(*fmt.cells(*cells), height=None if wraps else 1, key=str(i))
            self._history[str(i)] = cells
        self._show_history_detail(rows[0])

    @on(DataTable.RowHighlighted, "#history-table")
    def _history_highlighted(self, event: DataTable.RowHighlighted) -> None:
        cells = getattr(self, "_history", {}).get(event.row_key.value) if event.row_key is not None else None
        if cells is not None:
            self._show_history_detail(cells)

    def _show_history_detail(self, cells: list[str]) -> None:
        """The entry under the cursor in full (its reason is past the screen's edge at 80 columns)."""
        when, who, what, change, reason = cells
        self.query_one("#history-detail", Static).update(
            f"{when} UTC by {who or '-'}: {what}" + (f" · {change}" if change else "") + f" · reason: {reason or '-'}"
            if when != "-" else "No recorded changes for this pump.")

    def _under_cursor(self, table_id: str, records: dict):
        table = self.query_one(table_id, DataTable)
        if table.row_count == 0:
            return None
        key = table.coordinate_to_cell_key(table.cursor_coordinate).row_key
        return records.get(key.value) if key is not None else None

    def action_correct(self) -> None:
        tabs = self.query_one("#pump-tabs", TabbedContent)
        reading = self._under_cursor("#readings-table", self._readings) if tabs.active == "readings" else None
        if reading is None:
            tabs.active = "readings"
            self.notify("Choose the reading to correct (Readings tab), then c.", timeout=4)
            return
        from logbook.tui.screens.correct import CorrectReadingScreen

        self.app.push_screen(CorrectReadingScreen(reading))

    def action_remove(self) -> None:
        from logbook.tui.screens.confirm import AskReason

        tabs = self.query_one("#pump-tabs", TabbedContent)
        if tabs.active == "readings":
            r = self._under_cursor("#readings-table", self._readings)
            if r is None:
                return
            question = (f"Remove reading {r.id} of {fmt.day(r.taken_on)} ({fmt.hours(r.machine_hours)})? It is kept, "
                        "marked removed, and leaves every trend and check. Why?")
            self.app.push_screen(AskReason(question), lambda why: why and self._remove("reading", r.id, why))
        elif tabs.active == "events":
            e = self._under_cursor("#events-table", getattr(self, "_events", {}))
            if e is None:
                return
            question = (f"Remove the {EVENT_WORDS.get(e.kind.value, e.kind.value)} of {fmt.day(e.happened_on)} "
                        f"(event {e.id})? It is kept, marked removed. Why?")
            self.app.push_screen(AskReason(question), lambda why: why and self._remove("event", e.id, why))
        else:
            self.notify("Choose a reading (Readings tab) or an event (Events tab) to remove, then d.", timeout=4)

    @work(thread=True, group="pump-remove")
    def _remove(self, what: str, record_id: int, why: str) -> None:
        from logbook.model import InputRejected
        from logbook.tui.gate import trouble_text
        from logbook.validate import say

        try:
            with self.app.gate.open() as store:
                if what == "reading":
                    store.remove_reading(record_id, reason=why)
                else:
                    store.remove_event(record_id, reason=why)
        except InputRejected as exc:
            text = "; ".join(say(p) for p in exc.problems)
            self.app.call_from_thread(self.notify, f"Not removed: {text}", severity="error", timeout=8)
            return
        except Exception as exc:
            self.app.call_from_thread(self.notify, f"Not removed: {trouble_text(exc)}", severity="error", timeout=8)
            return
        self.app.call_from_thread(self.notify, f"Removed {what} {record_id} (kept in the history).", timeout=5)
        self.app.call_from_thread(self.app.reload, "removed")

    # -- actions -----------------------------------------------------------------------------
    def action_back(self) -> None:
        self.app.pop_screen()

    def action_next_kind(self) -> None:
        self.kind = ALL_KINDS[(ALL_KINDS.index(self.kind) + 1) % len(ALL_KINDS)] if self.kind else ALL_KINDS[0]
        self.query_one("#kind-table", DataTable).move_cursor(row=ALL_KINDS.index(self.kind), animate=False)
        self._show_chart()

    def action_next_tab(self) -> None:
        tabs = self.query_one("#pump-tabs", TabbedContent)
        tabs.active = TABS[(TABS.index(tabs.active) + 1) % len(TABS)]

    def action_tab(self, name: str) -> None:
        self.query_one("#pump-tabs", TabbedContent).active = name

    def action_record_reading(self) -> None:
        from logbook.tui.screens.reading import ReadingScreen

        self.app.push_screen(ReadingScreen(self.serial, following=self.following))

    def action_record_event(self) -> None:
        from logbook.tui.screens.event import EventScreen

        self.app.push_screen(EventScreen(self.serial))

    def action_past_forecasts(self) -> None:
        self.query_one(PastForecasts).score()

    def action_next_pump(self) -> None:
        if not self.following:
            self.notify("This is the last pump in the fleet view's order.")
            return
        nxt, rest = self.following[0], self.following[1:]
        self.app.switch_screen(PumpScreen(nxt, following=rest))
