"""Reading round: choose a site, see the pumps due there in walking order (machine,
position), and step through them with the reading form: F3 saves and moves on to the
next pump, F4 skips one, Esc comes back here with the pumps read so far ticked."""

from __future__ import annotations

from datetime import date

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal
from textual.screen import Screen
from textual.widgets import DataTable, Select, Static

from logbook import fmt
from logbook.rounds import NextTest, plan_round
from logbook.tui.widgets.plain import Plain
from logbook.tui.widgets.keybar import KeyBar

WITHIN_STEP_DAYS = 7
DONE, TODO = "✓", "·"


class RoundScreen(Screen):
    """The round's list is fixed when the site or the period changes (a pump just read
    stays on it, ticked), so the order does not move under the technician's feet."""

    HELP_TITLE = "Reading round"
    # Screen-local layout (the app stylesheet belongs to the interface as a whole).
    DEFAULT_CSS = """
    RoundScreen #round-bar { height: 1; }
    RoundScreen #round-site { width: 32; }
    RoundScreen #round-table { height: 1fr; }
    RoundScreen #round-why { height: auto; max-height: 3; padding: 0 1; }
    """
    BINDINGS = [
        Binding("g", "start_round", "Start round", id="round.start"),
        Binding("plus", "widen", "+7 days", key_display="+", id="round.widen"),
        Binding("minus", "narrow", "-7 days", key_display="-", id="round.narrow"),
        Binding("escape", "back", "Back", id="round.back"),
    ]

    def __init__(self, site: str | None = None, within_days: int = 7) -> None:
        super().__init__()
        self.site = site
        self.within_days = within_days
        self.stops: list[NextTest] = []
        self._planned_for: tuple | None = None

    def compose(self) -> ComposeResult:
        yield Plain("Reading round", id="title")
        with Horizontal(id="round-bar"):
            yield Select([], prompt="Choose a site", id="round-site", compact=True)
            yield Plain("", id="round-period")
        yield DataTable(id="round-table", cursor_type="row", zebra_stripes=True)
        yield Plain("", id="round-why")
        yield Plain("Reading the logbook…", id="status-line")
        yield KeyBar()

    def on_mount(self) -> None:
        table = self.query_one("#round-table", DataTable)
        for label in ("", "machine/pos", "serial", "model", "last reading", "next test"):
            table.add_column(label)
        chosen = self.site is not None
        self.watch(self.app, "data_generation", self._data_changed, init=True)
        # opened without a site: the chooser first (its first site is shown meanwhile)
        (table if chosen else self.query_one("#round-site", Select)).focus()

    # -- data ---------------------------------------------------------------------------
    def _data_changed(self, generation: int) -> None:
        fleet = self.app.fleet
        if fleet is None:
            return
        sites = sorted({m.site for m in fleet.machines.values()})
        select = self.query_one("#round-site", Select)
        with select.prevent(Select.Changed):
            select.set_options([(fmt.text(s), s) for s in sites])
            if self.site in sites:
                select.value = self.site
            elif len(sites) == 1:
                self.site = select.value = sites[0]
        if self._planned_for != (self.site, self.within_days) or not self.stops:
            self.plan()
        else:
            self.show()

    def plan(self) -> None:
        """Choose the round's pumps for the site and period (today + within_days)."""
        fleet, forecast = self.app.fleet, self.app.forecast
        self.stops = [] if fleet is None or self.site is None else plan_round(
            fleet, forecast, self.app.today, site=self.site, within_days=self.within_days)
        self._planned_for = (self.site, self.within_days)
        self.show()

    def done(self) -> set[str]:
        """Pumps of the round with a reading newer than the one the round was planned on."""
        fleet = self.app.fleet
        if fleet is None:
            return set()
        newest: dict[str, date] = {}
        for r in fleet.readings:
            if r.superseded_by is None and (r.serial not in newest or r.taken_on > newest[r.serial]):
                newest[r.serial] = r.taken_on
        return {t.serial for t in self.stops if t.serial in newest
                and (t.last_reading_on is None or newest[t.serial] > t.last_reading_on)}

    def show(self) -> None:
        table = self.query_one("#round-table", DataTable)
        keep = table.cursor_row
        done = self.done()
        table.clear()
        for t in self.stops:
            table.add_row(DONE if t.serial in done else TODO,  # the mark: the program's own sign
                          *fmt.cells(f"{t.machine}/{t.position}", t.serial, t.model,
                                     t.last_reading_on.isoformat() if t.last_reading_on else "never", t.words(self.app.today)),
                          key=t.serial)
        if self.stops:
            table.move_cursor(row=min(keep or 0, len(self.stops) - 1), animate=False)
        self.query_one("#round-period", Static).update(
            f" due by today + {self.within_days} days (+/- to change)")
        where = self.site or "no site chosen"
        self.query_one("#title", Static).update(f"Reading round · {where} · {self.app.today.isoformat()}")
        if self.site is None:
            line = "Choose a site to see the pumps due for a reading there."
        elif not self.stops:
            line = f"No pump at {self.site} is due for a reading within {self.within_days} days."
        else:
            line = (f"{len(done)} of {len(self.stops)} read · Enter/g: read from here on "
                    "(F3 save+next, F4 skip, Esc back)")  # fits 80 columns
        self.query_one("#status-line", Static).update(line)
        self._show_why()

    def _show_why(self) -> None:
        t = self.selected()
        self.query_one("#round-why", Static).update(f"{t.serial}: {t.reason}" if t else "")

    def selected(self) -> NextTest | None:
        row = self.query_one("#round-table", DataTable).cursor_row
        return self.stops[row] if self.stops and row is not None and 0 <= row < len(self.stops) else None

    # -- events and actions ----------------------------------------------------------------
    @on(Select.Changed, "#round-site")
    def _site_changed(self, event: Select.Changed) -> None:
        self.site = None if event.value is Select.NULL else str(event.value)
        self.plan()
        self.query_one("#round-table", DataTable).focus()

    @on(DataTable.RowHighlighted, "#round-table")
    def _row_moved(self, event: DataTable.RowHighlighted) -> None:
        self._show_why()

    @on(DataTable.RowSelected, "#round-table")
    def _row_chosen(self, event: DataTable.RowSelected) -> None:
        self.action_start_round()

    def action_start_round(self) -> None:
        """Open the reading form on the selected pump; the pumps after it not yet read follow."""
        first = self.selected()
        if first is None:
            return
        done = self.done()
        i = self.stops.index(first)
        following = [t.serial for t in self.stops[i + 1:] if t.serial not in done]
        from logbook.tui.screens.reading import ReadingScreen

        self.app.push_screen(ReadingScreen(first.serial, following=following))

    def action_widen(self) -> None:
        self.within_days += WITHIN_STEP_DAYS
        self.plan()

    def action_narrow(self) -> None:
        self.within_days = max(0, self.within_days - WITHIN_STEP_DAYS)
        self.plan()

    def action_back(self) -> None:
        self.app.pop_screen()
