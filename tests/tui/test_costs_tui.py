"""Costs in the interface: the fleet view's cost column, the plan screen's money, the models
screen's costs and cost-optimal age, and editing a model's costs (audited, field-naming messages)."""

from __future__ import annotations

from textual.widgets import DataTable

from logbook.costing import fleet_money
from logbook.plan import add_months, make_plan, month_start
from logbook.tui import present
from tests.tui.conftest import TODAY, settle


def _money_and_plan(store):
    """The plan the command line makes from the same store and stored plan settings (costing and
    plan, not the interface)."""
    from logbook.analysis.fleet import forecast_fleet

    fleet, book = store.fleet(), store.costs()
    forecast = forecast_fleet(fleet, TODAY)
    settings = store.plan_setup().settings(month_start(TODAY))
    end = add_months(settings.start_month, settings.horizon_months)
    money = fleet_money(book, fleet, forecast, (end - TODAY).days)
    return money, make_plan(forecast, settings, money.costs)


def test_short_money_fits_five_cells():
    # our own wording (common practice, no published source): k for thousands, M for millions
    assert [present.short_money(v) for v in (0, 980, 8_420, 12_499, 125_000, 1_240_000, 35_000_000, None)] == [
        "0", "980", "8.4k", "12k", "125k", "1.2M", "35M", ""]
    assert all(len(present.short_money(10 ** k * 9.99)) <= 5 for k in range(0, 9))


async def test_fleet_view_shows_the_planned_months_expected_cost(demo_app, demo_store):
    money, plan = _money_and_plan(demo_store)
    expected = {line.serial: line.expected_cost for line in plan.lines if line.expected_cost is not None}
    assert money.costs is not None and expected  # the demo operator has costs and pumps to plan
    async with demo_app.run_test(size=(80, 24)) as pilot:
        await settle(demo_app, pilot)
        table = demo_app.screen.query_one("#fleet-table", DataTable)
        serials = [str(v) for v in table.get_column("serial")]
        cells = [str(v) for v in table.get_column("cost")]
        for serial, cell in zip(serials, cells):
            assert cell == present.short_money(expected.get(serial)), serial
        assert sum(1 for c in cells if c) == len([s for s in serials if s in expected]) > 0
        assert "cost in EUR" in str(demo_app.screen.query_one("#status-line").render())


async def test_fleet_cost_column_is_blank_without_costs(demo_app, demo_store):
    demo_store.conn.execute("DELETE FROM costs")  # a logbook with no costs entered
    async with demo_app.run_test(size=(80, 24)) as pilot:
        await settle(demo_app, pilot)
        table = demo_app.screen.query_one("#fleet-table", DataTable)
        assert set(str(v) for v in table.get_column("cost")) == {""}
        assert demo_app.money is not None and demo_app.money.costs is None


async def test_plan_screen_shows_each_lines_cost_the_policies_and_spend(demo_app, demo_store):
    from logbook.plan import month_label

    money, plan = _money_and_plan(demo_store)
    async with demo_app.run_test(size=(80, 24)) as pilot:
        await settle(demo_app, pilot)
        await pilot.press("p")
        await settle(demo_app, pilot)
        screen = demo_app.screen
        shown = screen.plan
        assert shown.placement == plan.placement == "least expected cost"
        table = screen.query_one("#plan-table", DataTable)
        rows = {str(table.get_row_at(i)[1]): [str(c) for c in table.get_row_at(i)] for i in range(table.row_count)}
        for line in plan.lines:
            row = rows[line.serial]
            assert row[4] == present.short_money(line.expected_cost)
            assert row[8] == present.either_way(line)
        text = str(screen.query_one("#plan-money").render())
        p = plan.costs.policies
        assert f"this plan {present.short_money(p['cost_optimal'])}" in text
        assert f"all run to failure {present.short_money(p['run_to_failure'])}" in text
        spend = plan.spend_per_month()
        for month in plan.settings.months:
            assert f"{month_label(month)} {present.short_money(spend.get(month, 0.0))}" in text
        # the least-cost plan never costs more than placing each pump at its P10 month (issue 16's property)
        assert p["cost_optimal"] <= p["at_p10"] + 1e-6


def test_either_way_says_what_a_month_earlier_or_later_adds():
    from types import SimpleNamespace

    line = SimpleNamespace(expected_cost=10_000.0, cost_month_earlier=10_400.0, cost_month_later=16_000.0)
    assert present.either_way(line) == "+400/+6.0k"
    assert present.either_way(SimpleNamespace(expected_cost=10_000.0, cost_month_earlier=None,
                                              cost_month_later=9_100.0)) == "-/-900"
    assert present.either_way(SimpleNamespace(expected_cost=None, cost_month_earlier=1.0, cost_month_later=2.0)) == ""


async def test_models_screen_shows_costs_and_the_cost_optimal_age(demo_app, demo_store):
    from logbook.tui.screens.models import ModelsScreen

    money, _ = _money_and_plan(demo_store)
    async with demo_app.run_test(size=(80, 24)) as pilot:
        await settle(demo_app, pilot)
        await pilot.press("m")
        await settle(demo_app, pilot)
        assert isinstance(demo_app.screen, ModelsScreen)
        table = demo_app.screen.query_one("#models-table", DataTable)
        for key in table.rows:
            row = [str(c) for c in table.get_row(key)]
            eco = money.economies.get(str(key.value))
            assert eco is not None  # the demo operator priced every model
            opt = eco.optimum
            age = "no fit" if eco.shape is None else f"{opt.age_hours:,.0f} h" if opt.age_hours is not None else "none"
            assert row[4:7] == [present.whole_money(eco.planned), present.whole_money(eco.failure), age]
        assert "Costs in EUR" in str(demo_app.screen.query_one("#model-money").render())


async def test_editing_a_models_costs_names_the_field_and_saves_through_the_store(demo_app, demo_store):
    from logbook.tui.screens.model_costs import ModelCostsScreen

    PLANNED, FAILURE = "planned_cost", "failure_cost"

    before = demo_store.costs().models["TQ-90"]
    audits = demo_store.conn.execute("SELECT count(*) FROM audit WHERE table_name = 'costs'").fetchone()[0]
    async with demo_app.run_test(size=(80, 24)) as pilot:
        await settle(demo_app, pilot)
        await pilot.press("m")
        await settle(demo_app, pilot)
        table = demo_app.screen.query_one("#models-table", DataTable)
        table.move_cursor(row=[str(k.value) for k in table.rows].index("TQ-90"))
        await pilot.press("c")
        await settle(demo_app, pilot)
        form = demo_app.screen
        assert isinstance(form, ModelCostsScreen)
        assert (form.fields[PLANNED].text, form.fields[FAILURE].text) == (f"{before.planned:g}", f"{before.failure:g}")
        form.fields[PLANNED].input.value = "-5"
        await pilot.pause()
        message = str(form.fields[PLANNED].query_one(".field-message").render())
        assert "Planned cost" in message and "-5" in message
        await pilot.press("f2")
        await settle(demo_app, pilot)
        assert demo_store.costs().models["TQ-90"] == before  # nothing written
        form.fields[PLANNED].input.value = "6000"
        form.fields[FAILURE].input.value = "5000"  # a failure costing less: accepted, the consequence said
        await pilot.pause()
        await pilot.press("f2")
        await settle(demo_app, pilot)
        after = demo_store.costs().models["TQ-90"]
        assert (after.planned, after.failure) == (6000.0, 5000.0)
        assert "run to failure is cheapest" in str(form.query_one("#result").render())
        assert demo_store.conn.execute("SELECT count(*) FROM audit WHERE table_name = 'costs'").fetchone()[0] == audits + 1
        await pilot.press("escape")
        await settle(demo_app, pilot)
        eco = demo_app.money.economies["TQ-90"]
        assert (eco.planned, eco.failure) == (6000.0, 5000.0) and eco.optimum.age_hours is None
