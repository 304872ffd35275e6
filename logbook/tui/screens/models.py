"""Models and limits: every pump model's reference conditions, test window and limits."""

from __future__ import annotations

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import DataTable, Footer, Static

from logbook import fmt
from logbook.model import ALL_KINDS
from logbook.tui.widgets.plain import Plain
from logbook.tui.widgets.tables import EditTable


class ModelsScreen(Screen):
    """A table of models; Enter edits the one under the cursor."""

    HELP_TITLE = "Models and limits"
    BINDINGS = [Binding("escape", "back", "Back", tooltip="back to the fleet view", id="models.back")]

    def compose(self) -> ComposeResult:
        yield Static("Pump models: reference conditions and limits (limits apply at reference)", id="title")
        yield EditTable(id="models-table", cursor_type="row", zebra_stripes=True)
        yield Plain("", id="status-line")
        yield Footer(compact=True)

    def on_mount(self) -> None:
        self.watch(self.app, "data_generation", self._data_changed, init=True)
        self.query_one("#models-table", DataTable).focus()

    def _data_changed(self, generation: int) -> None:
        fleet = self.app.fleet
        if fleet is None:
            return
        u = self.app.units
        table = self.query_one("#models-table", DataTable)
        if not table.columns:
            for label in ("Model", "Drain limit", "Servo limit", "Drift limit", "Ref. temp", "Ref. press.", "Oil",
                          "Test speed", "Test oil temp", "Interval", "Pumps", "Description"):
                table.add_column(label, key=label)
        row = table.cursor_row
        table.clear()
        in_use = {}
        for p in fleet.pumps.values():
            in_use[p.model] = in_use.get(p.model, 0) + 1
        for code, m in fleet.models.items():
            limits = [fmt.value(k, m.limit(k).value, u) if m.limit(k) else "none" for k in ALL_KINDS]
            interval = " / ".join(
                x for x in (f"{m.reading_interval_hours:g} h" if m.reading_interval_hours else "",
                            f"{m.reading_interval_days} d" if m.reading_interval_days else "") if x
            ) or "-"
            table.add_row(*fmt.cells(
                code, *limits, fmt.temperature(m.ref_temp_c, u), fmt.pressure(m.ref_pressure_bar, u),
                f"VG {m.oil_grade} VI {m.oil_vi:g}", f"{m.test_speed_rpm:g} rpm",
                f"{fmt.temperature(m.test_temp_min_c, u)}-{fmt.temperature(m.test_temp_max_c, u)}", interval,
                str(in_use.get(code, 0)), m.description), key=code,
            )
        if row is not None and 0 <= row < table.row_count:
            table.move_cursor(row=row, animate=False)
        self.query_one("#status-line", Static).update(
            f"{len(fleet.models)} models · Enter edits · a changed limit re-forecasts every pump of that model"
        )

    @on(DataTable.RowSelected)
    def _edit(self, event: DataTable.RowSelected) -> None:
        from logbook.tui.screens.model_edit import ModelEditScreen

        self.app.push_screen(ModelEditScreen(event.row_key.value))

    def action_back(self) -> None:
        self.app.pop_screen()
