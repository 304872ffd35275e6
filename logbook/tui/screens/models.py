"""Models and limits: every pump model's reference conditions, test window and limits."""

from __future__ import annotations

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import DataTable, Static

from logbook import fmt
from logbook.model import ALL_KINDS
from logbook.tui.widgets.plain import Plain
from logbook.tui.widgets.tables import EditTable
from logbook.tui.widgets.keybar import KeyBar


class ModelsScreen(Screen):
    """A table of models; Enter edits the one under the cursor."""

    HELP_TITLE = "Models and limits"
    DEFAULT_CSS = """
    ModelsScreen #model-money { height: auto; padding: 0 1; }
    """
    BINDINGS = [
        Binding("escape", "back", "Back", tooltip="back to the fleet view", id="models.back"),
        Binding("c", "costs", "Costs", tooltip="the planned and failure cost of the model under the cursor (audited)",
                id="models.costs"),
    ]

    def compose(self) -> ComposeResult:
        yield Static("Pump models: reference conditions and limits (limits apply at reference)", id="title")
        yield EditTable(id="models-table", cursor_type="row", zebra_stripes=True)
        yield Plain("", id="model-money")
        yield Plain("", id="status-line")
        yield KeyBar()

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
            for label in ("Model", "Drain limit", "Servo limit", "Drift limit", "Planned", "Failure", "Best age",
                          "Ref. temp", "Ref. press.", "Oil",
                          "Test speed", "Test oil temp", "Interval", "Pumps", "Description"):
                table.add_column(label, key=label)
        row = table.cursor_row
        table.clear()
        in_use = {}
        for p in fleet.pumps.values():
            in_use[p.model] = in_use.get(p.model, 0) + 1
        money = self.app.money
        economies = money.economies if money is not None else {}
        for code, m in fleet.models.items():
            limits = [fmt.value(k, m.limit(k).value, u) if m.limit(k) else "none" for k in ALL_KINDS]
            interval = " / ".join(
                x for x in (f"{m.reading_interval_hours:g} h" if m.reading_interval_hours else "",
                            f"{m.reading_interval_days} d" if m.reading_interval_days else "") if x
            ) or "-"
            table.add_row(*fmt.cells(
                code, *limits, *_money_cells(economies.get(code)), fmt.temperature(m.ref_temp_c, u), fmt.pressure(m.ref_pressure_bar, u),
                f"VG {m.oil_grade} VI {m.oil_vi:g}", f"{m.test_speed_rpm:g} rpm",
                f"{fmt.temperature(m.test_temp_min_c, u)}-{fmt.temperature(m.test_temp_max_c, u)}", interval,
                str(in_use.get(code, 0)), m.description), key=code,
            )
        if row is not None and 0 <= row < table.row_count:
            table.move_cursor(row=row, animate=False)
        self.query_one("#model-money", Static).update(fmt.text(*_money_lines(money)))
        self.query_one("#status-line", Static).update(
            f"{len(fleet.models)} models · Enter edits the limits, c the costs · a changed limit re-forecasts every "
            "pump of that model"
        )

    @on(DataTable.RowSelected)
    def _edit(self, event: DataTable.RowSelected) -> None:
        from logbook.tui.screens.model_edit import ModelEditScreen

        self.app.push_screen(ModelEditScreen(event.row_key.value))

    def action_back(self) -> None:
        self.app.pop_screen()

    def action_costs(self) -> None:
        table = self.query_one("#models-table", DataTable)
        if self.app.fleet is None or table.row_count == 0 or table.cursor_row is None:
            return
        from logbook.tui.screens.model_costs import ModelCostsScreen

        code = str(table.coordinate_to_cell_key((table.cursor_row, 0)).row_key.value)
        money = self.app.money
        known = money.book.models.get(code) if money is not None else None
        self.app.push_screen(ModelCostsScreen(code, known.planned if known else None, known.failure if known else None,
                                              money.currency if money is not None else ""))


def _money_cells(eco) -> tuple[str, str, str]:
    """Planned and failure cost (whole figures, as typed in: 12,500) and the cost-optimal
    overhaul age of a model ('' without costs)."""
    from logbook.tui.present import whole_money

    if eco is None:
        return "", "", ""
    opt = eco.optimum
    age = "no fit" if eco.shape is None else f"{opt.age_hours:,.0f} h" if opt is not None and opt.age_hours is not None \
        else "none"
    return whole_money(eco.planned), whole_money(eco.failure), age


def _money_lines(money) -> list[str]:
    """Under the table: the currency, and per model why it has no cost-optimal age (or what its costs mean)."""
    if money is None:
        return ["Costs: weighing…"]
    if money.costs is None:
        return ["No costs entered: c sets a model's planned and failure cost (downtime: logbook costs)."]
    lines = [f"Costs in {money.currency or 'no currency set'} · Best age: overhaul then or at failure, whichever "
             "comes first, for the least cost per hour (fleet-life Weibull)"]
    lines += [f"{code}: {eco.note}" for code, eco in money.economies.items() if eco.note]
    return lines
