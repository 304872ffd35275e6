"""The backtest in the interface: `b` in the fleet view opens the summary per model (readable at
80x24), `b` on the pump view says how the pump's past forecasts did; as of a past day nothing
is recorded. The figures are the command's (``analysis.backtest``); here: that they are shown."""

from __future__ import annotations

from datetime import date

from textual.widgets import DataTable

from logbook.analysis.backtest import default_span, origin_dates, run_backtest
from logbook.tui.app import make_app
from logbook.tui.screens.backtest import BacktestScreen, PastForecasts, pump_words
from logbook.tui.screens.fleet import FleetScreen
from logbook.tui.screens.pump import PumpScreen
from tests.tui.conftest import TODAY, settle
from tests.tui.screen_text import screen_text


async def test_b_opens_the_backtest_per_model_at_80_by_24(demo_app, demo_store):
    app = demo_app
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        await pilot.press("b")
        assert isinstance(app.screen, BacktestScreen)
        await settle(app, pilot)
        table = app.screen.query_one("#backtest-table", DataTable)
        models = sorted(demo_store.models())
        assert [str(k.value) for k in table.rows] == ["all", *models]
        shown = screen_text(app)
        for word in ("Later readings", "<P10", ">P90", "KM<P10", "PIT histogram", "Plan misses", *models):
            assert word in shown
        assert all(len(line) <= 80 for line in shown.splitlines())
        # the figures are the analysis' own: the whole fleet at the default monthly origins
        now = demo_store.fleet()
        history, known = demo_store.fleet_history()
        result = run_backtest(now, history, known, origin_dates(*default_span(now, TODAY), 1, "months"))
        row = table.get_row("all")
        assert row[1] == f"{result.overall.readings:,}" and row[2] == f"{result.overall.below_p10:.2f}"
        for key in table.rows:  # no crossing: no Kaplan-Meier share before P10, as after P90
            cells = table.get_row(key)
            if cells[5] == "0":
                assert cells[6] == "-" and cells[7] == "-", cells
        await pilot.press("escape")
        assert isinstance(app.screen, FleetScreen)


async def test_pump_view_says_how_its_past_forecasts_did(demo_app):
    app = demo_app
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        serial = next(p.serial for p in app.forecast.pumps if p.last_reading_on and p.last_reading_on < date(2026, 12, 1))
        app.push_screen(PumpScreen(serial))
        await settle(app, pilot)
        line = app.screen.query_one(PastForecasts)
        assert str(line.render()) == PastForecasts.HINT
        await pilot.press("b")
        await settle(app, pilot)
        words = str(line.render())
        model = app.fleet.pumps[serial].model
        assert words == pump_words(app.backtests[(model, app.fleet.change_count, None)], serial)
        assert "later readings" in words and "below P10" in words and len(words) < 160


async def test_as_of_a_past_day_the_view_is_that_day_and_records_nothing(demo_store):
    day = date(2025, 6, 1)
    app = make_app(demo_store, today=TODAY, poll_seconds=0, blink=False, as_of=day)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        assert app.today == day
        assert all(r.taken_on <= day for r in app.fleet.readings)
        assert "Fleet on 2025-06-01" in screen_text(app)
        for key in ("r", "e", "o"):
            await pilot.press(key)
            await pilot.pause()
            assert isinstance(app.screen, FleetScreen), key
        assert any("read-only" in n.message for n in app._notifications)
