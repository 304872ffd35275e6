"""Plan view: the month-by-month overhaul plan of logbook.plan, and its export to a file."""

from __future__ import annotations

from pathlib import Path

from rich.cells import cell_len
from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.message import Message
from textual.screen import Screen
from textual.widgets import DataTable, Static

from logbook import fmt
from logbook.tui import present
from logbook.tui.gate import trouble_text
from logbook.tui.widgets.plain import Plain
from logbook.tui.widgets.tables import OpenTable
from logbook.tui.widgets.keybar import KeyBar

HORIZONS = (6, 12, 24)
COLUMNS = ("Month", "Serial", "Reading", "Chance", "Cost", "Note", "P10 date", "Site", "Earlier/later", "Machine",
           "P50 date")
NOTE = COLUMNS.index("Note")
#: The Note column is never narrower than this (a narrower terminal scrolls the table sideways).
NOTE_LEAST = 20


def plan_widths(rows: list[list[str]], width: int) -> list[int | None]:
    """Column widths for ``width`` cells: the columns before Note as wide as their widest
    cell, Note the room left on screen (its widest cell when that is less and the next
    column fits whole beside it), the columns after it as wide as their cells (None: the
    table measures them). Every column is padded by one cell either side, and one cell is
    left for the scrollbar."""
    def widest(i: int) -> int:
        return max([cell_len(COLUMNS[i])] + [cell_len(r[i]) for r in rows])

    before = [widest(i) for i in range(NOTE)]
    room = width - sum(w + 2 for w in before) - 2 - 1
    note = min(widest(NOTE), max(room, NOTE_LEAST))
    if room - note < widest(NOTE + 1) + 2:  # the next column would show cut at the edge: Note takes the room
        note = max(note, room)
    return [*before, note, *([None] * (len(COLUMNS) - NOTE - 1))]


class PlanScreen(Screen):
    """Months in order; in each, pumps most urgent first. Enter opens the pump."""

    HELP_TITLE = "Overhaul plan"
    DEFAULT_CSS = """
    PlanScreen #assumptions { height: auto; padding: 0 1; }
    PlanScreen #plan-money { height: auto; padding: 0 1; }
    """
    BINDINGS = [
        Binding("escape", "back", "Back", tooltip="back to the fleet view", id="plan.back"),
        Binding("h", "horizon", "Horizon", tooltip="plan 6, 12 or 24 months ahead (this view only; s stores one)",
                id="plan.horizon"),
        Binding("s", "settings", "Settings", tooltip="shop capacity, site capacity, exchange pumps, turnaround, horizon",
                id="plan.settings"),
        Binding("x", "export", "Export", tooltip="write the plan to a file you name: Markdown, CSV, HTML (to print) or JSON",
                id="plan.export"),
    ]

    class SetupRead(Message):
        def __init__(self, setup, sites, models) -> None:
            super().__init__()
            self.setup, self.sites, self.models = setup, sites, models

    class Exported(Message):
        def __init__(self, paths: list[Path], text: str = "") -> None:
            super().__init__()
            self.paths = paths
            self.text = text

    def __init__(self) -> None:
        super().__init__()
        self.horizon: int | None = None  # h: this view's horizon; None: the stored one
        self.setup = None  # the stored plan settings (plan_setup.PlanSetup), read when the screen opens
        self.sites: list[str] = []
        self.models: list[str] = []
        self.plan = None
        self.serials: list[str | None] = []
        self._widths: list[int | None] = []  # the column widths laid out
        self._rows: list[list[str]] = []  # the cells shown, laid out again on a resize

    def compose(self) -> ComposeResult:
        yield Static("Overhaul plan", id="title")
        yield Plain("", id="assumptions")
        yield OpenTable(id="plan-table", cursor_type="row", zebra_stripes=True)
        yield Plain("", id="plan-money")
        yield Plain("", id="status-line")
        yield KeyBar()

    def on_mount(self) -> None:
        self.watch(self.app, "data_generation", self._read_setup, init=True)
        self.query_one("#plan-table", DataTable).focus()

    def _read_setup(self, generation: int) -> None:
        self._setup_worker()

    @work(thread=True, exclusive=True, group="plan-setup")
    def _setup_worker(self) -> None:
        """The stored plan settings (and the sites and models they may name), read again
        whenever the data changes (a save here, or another user's)."""
        try:
            with self.app.gate.open() as store:
                setup = store.plan_setup()
                sites = sorted({m.site for m in store.machines().values()})
                models = sorted(store.models())
        except Exception as exc:
            self.app.call_from_thread(self.query_one("#status-line", Static).update,
                                      f"Plan settings not read: {trouble_text(exc)}")
            return
        self.post_message(self.SetupRead(setup, sites, models))

    def on_plan_screen_setup_read(self, message: SetupRead) -> None:
        self.setup, self.sites, self.models = message.setup, message.sites, message.models
        self._data_changed(self.app.data_generation)

    def current_setup(self):
        from logbook.plan_setup import PlanSetup

        return (self.setup or PlanSetup()).override(horizon=self.horizon)

    def settings(self):
        from logbook.plan import month_start

        return self.current_setup().settings(month_start(self.app.today))

    def _data_changed(self, generation: int) -> None:
        forecast = self.app.forecast
        if forecast is None or self.setup is None:
            return
        from logbook.plan import make_plan, month_label

        money = self.app.money  # costing.FleetMoney once weighed; the least-cost plan when costs are set
        self.plan = plan = make_plan(forecast, self.settings(), money.costs if money is not None else None)
        rows: list[list[str]] = []
        self.serials = []
        for month in plan.settings.months:
            lines = plan.month_lines(month)
            shop = sum(1 for line in lines if line.shop)
            label = month_label(month)
            if not lines:
                rows.append([label, "-", "", "", "", "nothing due", "", "", "", "", ""])
                self.serials.append(None)
                continue
            for i, line in enumerate(lines):
                rows.append(self._line_cells(f"{label} ({shop})" if i == 0 else "", line))
                self.serials.append(line.serial)
        for i, line in enumerate(plan.unplaced):
            rows.append(self._line_cells("not placed" if i == 0 else "", line))
            self.serials.append(line.serial)
        self._fill(rows)
        setup = self.current_setup()
        self.query_one("#title", Static).update(
            f"Overhaul plan from {month_label(plan.settings.start_month)}, {setup.horizon_months} months · "
            f"forecast of {fmt.day(forecast.today)}"
        )
        this_view = " (h: this view only)" if self.horizon is not None and self.horizon != self.setup.horizon_months else ""
        self.query_one("#assumptions", Static).update(fmt.text(f"Assumed: {present.setup_words(setup, self.models)}{this_view} · s changes these"))
        shop = sum(1 for x in plan.lines if x.shop)
        self.query_one("#status-line", Static).update(
            f"{len(plan.lines)} planned ({shop} in the shop, {len(plan.lines) - shop} on the machine), "
            f"{len(plan.unplaced)} not placed · Month (n) = shop jobs that month · Chance = of crossing by the month's end"
        )
        self.query_one("#plan-money", Static).update(fmt.text(*present.plan_money_lines(plan)))

    def _line_cells(self, month_text: str, line) -> list[str]:
        chance = f"{100 * line.chance_by_month_end:.0f} %" if line.chance_by_month_end is not None else "-"
        where = f"{line.machine or 'not fitted'}"
        note = line.note or line.action
        if line.month is None:
            note = line.note
        return [month_text, line.serial, present.KIND_SHORT[line.kind], chance, present.short_money(line.expected_cost),
                note, fmt.day(line.p10_date), line.site or "-", present.either_way(line), where, fmt.day(line.p50_date)]

    def _fill(self, rows: list[list[str]]) -> None:
        """The rows under columns laid out for the width: the Note column (the sixth) gets
        the room the five before it leave on screen, and a longer note wraps in it."""
        self._rows = rows
        table = self.query_one("#plan-table", DataTable)
        widths = plan_widths(rows, table.size.width or self.app.size.width)
        if widths != self._widths:
            self._widths = widths
            table.clear(columns=True)
            for label, width in zip(COLUMNS, widths):
                table.add_column(label, key=label, width=width)
        else:
            table.clear()
        note_width = widths[NOTE]
        for cells in rows:
            table.add_row(*fmt.cells(*cells), height=None if cell_len(cells[NOTE]) > note_width else 1)

    def on_resize(self) -> None:
        self.call_after_refresh(lambda: self._rows and self._fill(self._rows))

    @on(DataTable.RowSelected)
    def _open(self, event: DataTable.RowSelected) -> None:
        serial = self.serials[event.cursor_row] if 0 <= event.cursor_row < len(self.serials) else None
        if serial:
            from logbook.tui.screens.pump import PumpScreen

            self.app.push_screen(PumpScreen(serial))

    def action_back(self) -> None:
        self.app.pop_screen()

    def action_horizon(self) -> None:
        now = self.current_setup().horizon_months
        self.horizon = next((h for h in HORIZONS if h > now), HORIZONS[0])
        self._data_changed(self.app.data_generation)

    def action_settings(self) -> None:
        if self.setup is None:
            return
        from logbook.tui.screens.plan_settings import PlanSettingsScreen

        self.horizon = None  # the stored horizon, as edited there
        self.app.push_screen(PlanSettingsScreen(self.setup, self.sites, self.models))

    def action_export(self) -> None:
        if self.plan is None or self.app.forecast is None:
            return
        from logbook.tui.screens.export_dialog import ExportDialog

        folder = Path(getattr(self.app, "export_dir", None) or Path.cwd())
        suggested = folder / f"logbook-plan-{self.app.forecast.today.isoformat()}"
        fleet, forecast, plan = self.app.fleet, self.app.forecast, self.plan

        def chosen(targets) -> None:
            if targets:
                self.query_one("#status-line", Static).update("Writing the plan…")
                self._export(fleet, forecast, plan, targets)

        self.app.push_screen(ExportDialog(suggested), chosen)

    @work(thread=True, exclusive=True, group="export")
    def _export(self, fleet, forecast, plan, targets) -> None:
        """Render with logbook.exports to each (path, format) chosen, in order; the first
        refusal stops (nothing after it is written)."""
        try:
            from logbook.analysis.life import fleet_life
            from logbook.exports import Provenance, Report, render
            from logbook.plan import add_months

            horizon_days = (add_months(plan.settings.start_month, plan.settings.horizon_months) - forecast.today).days
            life = fleet_life(fleet, forecast, horizon_days=max(horizon_days, 1))
            provenance = Provenance.from_models(str(fleet.source), forecast.today, fleet.models)
            money = self.app.money
            report = Report(forecast, plan, life, provenance, charts=False,
                            economies=money.economies if money is not None else {}, units=self.app.units)
            from logbook.outfile import write_bytes

            paths = []
            for path, kind in targets:  # atomic, never over the database (logbook.outfile)
                write_bytes(path, render(report, kind), protect=[self.app.gate.path, fleet.source], label="plan export")
                paths.append(path.resolve())
        except Exception as exc:
            from logbook.outfile import OutputError  # its message names the file and why

            self.post_message(self.Exported([], str(exc) if isinstance(exc, OutputError) else trouble_text(exc)))
            return
        self.post_message(self.Exported(paths))

    def on_plan_screen_exported(self, message: Exported) -> None:
        line = self.query_one("#status-line", Static)
        if message.text:
            line.update(f"Not exported: {message.text}")
            self.notify(fmt.visible(message.text), title="Export failed", severity="error", markup=False)
            return
        folders = {p.parent for p in message.paths}
        if len(folders) == 1:
            where = f"{folders.pop()}: " + ", ".join(p.name for p in message.paths)
        else:
            where = ", ".join(str(p) for p in message.paths)
        line.update(fmt.text(f"Plan written in {where}"))
        self.notify(fmt.visible(f"Plan written in {where}"), title="Exported", timeout=8, markup=False)
