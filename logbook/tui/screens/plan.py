"""Plan view: the month-by-month overhaul plan of logbook.plan, and its export to a file."""

from __future__ import annotations

from pathlib import Path

from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.message import Message
from textual.screen import Screen
from textual.widgets import DataTable, Footer, Static

from logbook import fmt
from logbook.tui import present
from logbook.tui.gate import trouble_text
from logbook.tui.widgets.plain import Plain
from logbook.tui.widgets.tables import OpenTable

HORIZONS = (6, 12, 24)


class PlanScreen(Screen):
    """Months in order; in each, pumps most urgent first. Enter opens the pump."""

    HELP_TITLE = "Overhaul plan"
    BINDINGS = [
        Binding("escape", "back", "Back", tooltip="back to the fleet view", id="plan.back"),
        Binding("h", "horizon", "Horizon", tooltip="plan 6, 12 or 24 months ahead", id="plan.horizon"),
        Binding("x", "export", "Export", tooltip="write the plan as Markdown and CSV files (the path is shown)",
                id="plan.export"),
    ]

    class Exported(Message):
        def __init__(self, paths: list[Path], text: str = "") -> None:
            super().__init__()
            self.paths = paths
            self.text = text

    def __init__(self) -> None:
        super().__init__()
        self.horizon = HORIZONS[0]
        self.plan = None
        self.serials: list[str | None] = []

    def compose(self) -> ComposeResult:
        yield Static("Overhaul plan", id="title")
        yield OpenTable(id="plan-table", cursor_type="row", zebra_stripes=True)
        yield Plain("", id="status-line")
        yield Footer(compact=True)

    def on_mount(self) -> None:
        self.watch(self.app, "data_generation", self._data_changed, init=True)
        self.query_one("#plan-table", DataTable).focus()

    def settings(self):
        from logbook.plan import PlanSettings, month_start

        return PlanSettings(start_month=month_start(self.app.today), horizon_months=self.horizon)

    def _data_changed(self, generation: int) -> None:
        forecast = self.app.forecast
        if forecast is None:
            return
        from logbook.plan import make_plan, month_label

        self.plan = plan = make_plan(forecast, self.settings())
        table = self.query_one("#plan-table", DataTable)
        if not table.columns:
            for label in ("Month", "Serial", "Machine", "Reading", "Chance", "P10 date", "P50 date", "Site", "Note"):
                table.add_column(label, key=label)
        table.clear()
        self.serials = []
        for month in plan.settings.months:
            lines = plan.month_lines(month)
            shop = sum(1 for line in lines if line.shop)
            label = month_label(month)
            if not lines:
                table.add_row(*fmt.cells(label, "-", "nothing due", "", "", "", "", "", ""))
                self.serials.append(None)
                continue
            for i, line in enumerate(lines):
                self._add_line(table, f"{label} ({shop})" if i == 0 else "", line)
        for i, line in enumerate(plan.unplaced):
            self._add_line(table, "not placed" if i == 0 else "", line)
        self.query_one("#title", Static).update(
            f"Overhaul plan from {month_label(plan.settings.start_month)}, {self.horizon} months · forecast of {fmt.day(forecast.today)}"
        )
        self.query_one("#status-line", Static).update(
            f"{len(plan.lines)} planned ({sum(1 for x in plan.lines if x.shop)} in the shop), {len(plan.unplaced)} not placed · "
            "Month (n) = shop jobs that month · Chance = of crossing by the month's end"
        )

    def _add_line(self, table: DataTable, month_text: str, line) -> None:
        chance = f"{100 * line.chance_by_month_end:.0f} %" if line.chance_by_month_end is not None else "-"
        where = f"{line.machine or 'not fitted'}"
        note = line.note or line.action
        if line.month is None:
            note = line.note
        table.add_row(*fmt.cells(month_text, line.serial, where, present.KIND_SHORT[line.kind], chance, fmt.day(line.p10_date),
                                 fmt.day(line.p50_date), line.site or "-", note))
        self.serials.append(line.serial)

    @on(DataTable.RowSelected)
    def _open(self, event: DataTable.RowSelected) -> None:
        serial = self.serials[event.cursor_row] if 0 <= event.cursor_row < len(self.serials) else None
        if serial:
            from logbook.tui.screens.pump import PumpScreen

            self.app.push_screen(PumpScreen(serial))

    def action_back(self) -> None:
        self.app.pop_screen()

    def action_horizon(self) -> None:
        self.horizon = HORIZONS[(HORIZONS.index(self.horizon) + 1) % len(HORIZONS)]
        self._data_changed(self.app.data_generation)

    def action_export(self) -> None:
        if self.plan is None or self.app.forecast is None:
            return
        self.query_one("#status-line", Static).update("Writing the plan…")
        self._export(self.app.fleet, self.app.forecast, self.plan)

    @work(thread=True, exclusive=True, group="export")
    def _export(self, fleet, forecast, plan) -> None:
        """Render with logbook.exports (Markdown for reading, CSV for a spreadsheet)."""
        try:
            from logbook.analysis.life import fleet_life
            from logbook.exports import Provenance, Report, render
            from logbook.plan import add_months

            horizon_days = (add_months(plan.settings.start_month, plan.settings.horizon_months) - forecast.today).days
            life = fleet_life(fleet, forecast, horizon_days=max(horizon_days, 1))
            provenance = Provenance.from_models(str(fleet.source), forecast.today, fleet.models)
            report = Report(forecast, plan, life, provenance, charts=False)
            from logbook.outfile import write_bytes

            folder = Path(getattr(self.app, "export_dir", None) or Path.cwd())
            paths = []
            for kind in ("md", "csv"):  # atomic, never over the database (logbook.outfile)
                path = folder / f"logbook-plan-{forecast.today.isoformat()}.{kind}"
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
        where = " and ".join(str(p) for p in message.paths)
        line.update(f"Plan written to {where}")
        self.notify(fmt.visible(f"Plan written to {where}"), title="Exported", timeout=8, markup=False)
