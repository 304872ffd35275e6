"""Costs in the interface: the fleet view's cost column, the plan screen's money, the models
screen's costs and cost-optimal age, and editing a model's costs (audited, field-naming messages)."""

from __future__ import annotations

from textual.widgets import DataTable

from logbook.costing import fleet_money
from logbook.plan import PlanSettings, add_months, make_plan, month_start
from logbook.tui import present
from tests.tui.conftest import TODAY, settle


def _money_and_plan(store, months: int = 6):
    """The plan the command line makes from the same store (costing and plan, not the interface)."""
    from logbook.analysis.fleet import forecast_fleet

    fleet, book = store.fleet(), store.costs()
    forecast = forecast_fleet(fleet, TODAY)
    settings = PlanSettings(start_month=month_start(TODAY), horizon_months=months)
    money = fleet_money(book, fleet, forecast, (add_months(settings.start_month, months) - TODAY).days)
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
