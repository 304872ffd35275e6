"""Fleet view: one row per pump in service, most urgent first; sort, filter, jump, open."""

from __future__ import annotations

from datetime import date

from textual.widgets import DataTable, Select

from logbook.analysis.status import STATUS_ORDER
from logbook.tui.screens.filters import FilterScreen
from logbook.tui.screens.fleet import FleetScreen
from logbook.tui.screens.pump import PumpScreen
from tests.tui.conftest import settle


def _table(app) -> DataTable:
    return app.screen.query_one("#fleet-table", DataTable)


def _column(app, key: str) -> list[str]:
    table = _table(app)
    return [str(v) for v in table.get_column(key)]


async def test_one_row_per_pump_most_urgent_first(demo_app):
    async with demo_app.run_test(size=(120, 40)) as pilot:
        await settle(demo_app, pilot)
        app = demo_app
        assert isinstance(app.screen, FleetScreen)
        pumps = app.forecast.pumps
        assert _table(app).row_count == len(pumps) > 100
        statuses = _column(app, "status")
        ranks = [STATUS_ORDER.index(s) for s in statuses]
        assert ranks == sorted(ranks)  # most urgent status first, never a more urgent one below a lesser
        assert statuses[0] == "✖ over limit"
        # each row shows that pump's engine figures
        serials = _column(app, "serial")
        for row, serial in enumerate(serials[:15]):
            pf = app.forecast.pump(serial)
            cells = [str(c) for c in _table(app).get_row_at(row)]
            assert pf.status in cells and pf.model in cells and pf.machine in cells[1]
            if pf.worst and pf.worst.p10_date:
                assert pf.worst.p10_date.isoformat() in cells


async def test_sort_by_p10_date_then_reverse(demo_app):
    async with demo_app.run_test(size=(120, 40)) as pilot:
        await settle(demo_app, pilot)
        await pilot.press("s")  # next sort column after "most urgent": the P10 date
        assert app_sort(demo_app) == ("p10", False)
        dates = [d for d in _column(demo_app, "p10") if d != "-"]
        assert dates == sorted(dates) and len(dates) > 10
        assert _column(demo_app, "p10")[-1] == "-"  # no date last
        await pilot.press("S")
        assert app_sort(demo_app) == ("p10", True)
        dates = [d for d in _column(demo_app, "p10") if d != "-"]
        assert dates == sorted(dates, reverse=True)


def app_sort(app) -> tuple[str, bool]:
    return app.screen.sort_key, app.screen.reverse


async def test_sort_by_clicking_a_header(demo_app):
    async with demo_app.run_test(size=(120, 40)) as pilot:
        await settle(demo_app, pilot)
        await pilot.click("#fleet-table", offset=(2, 0))  # the Serial header
        await pilot.pause()
        serials = _column(demo_app, "serial")
        assert app_sort(demo_app) == ("serial", False) and serials == sorted(serials)


async def test_filter_by_site_model_and_status(demo_app):
    async with demo_app.run_test(size=(120, 40)) as pilot:
        await settle(demo_app, pilot)
        app = demo_app
        fleet = app.screen
        await pilot.press("f")  # the filter window
        assert isinstance(app.screen, FilterScreen)
        sites = sorted({p.site for p in app.forecast.pumps})
        await pilot.press("enter", "down", "down", "enter")  # open the site list, take the second site
        site = sites[1]
        assert app.screen.query_one("#site", Select).value == site
        expected = sorted(p.serial for p in app.forecast.pumps if p.site == site)
        assert sorted(fleet.serials) == expected and 0 < len(expected) < len(app.forecast.pumps)
        assert f"{len(expected)} pumps match" in str(app.screen.query_one("#filter-count").render())
        app.screen.query_one("#model", Select).value = "TQ-90"
        await pilot.pause()
        expected = sorted(p.serial for p in app.forecast.pumps if p.site == site and p.model == "TQ-90")
        assert sorted(fleet.serials) == expected
        await pilot.press("escape")
        assert app.screen is fleet
        assert site in str(fleet.query_one("#filter-summary").render())
        assert sorted(_column(app, "serial")) == expected
        await pilot.press("x")  # clear the filters
        assert len(fleet.serials) == len(app.forecast.pumps)
        fleet.set_filters({"status": "△ plan overhaul"})
        await pilot.pause()
        shown = _column(app, "status")
        assert set(shown) == {"△ plan overhaul"}
        assert len(shown) == sum(1 for p in app.forecast.pumps if p.status == "△ plan overhaul")
        assert "of 111 shown" in str(fleet.query_one("#status-line").render())


async def test_typing_a_serial_jumps_to_it_and_enter_opens_it(demo_app):
    async with demo_app.run_test(size=(80, 24)) as pilot:
        await settle(demo_app, pilot)
        target = sorted(p.serial for p in demo_app.forecast.pumps)[-1]
        await pilot.press(*target)  # capitals and digits on the table start the search
        screen = demo_app.screen
        assert screen.current_serial() == target
        assert screen.query_one("#find").value == target
        await pilot.press("enter")
        await settle(demo_app, pilot)
        assert isinstance(demo_app.screen, PumpScreen) and demo_app.screen.serial == target


async def test_open_a_pump_from_the_table(demo_app):
    async with demo_app.run_test(size=(80, 24)) as pilot:
        await settle(demo_app, pilot)
        await pilot.press("down", "down")
        serial = demo_app.screen.current_serial()
        assert serial == _column(demo_app, "serial")[2]
        await pilot.press("enter")
        await settle(demo_app, pilot)
        assert isinstance(demo_app.screen, PumpScreen) and demo_app.screen.serial == serial
        await pilot.press("escape")
        assert isinstance(demo_app.screen, FleetScreen) and demo_app.screen.current_serial() == serial


async def test_narrow_layout_shows_months_and_the_next_reading(demo_app):
    async with demo_app.run_test(size=(80, 24)) as pilot:
        await settle(demo_app, pilot)
        table = _table(demo_app)
        keys = [c.value for c in table.columns]
        # at 80 columns the trend arrow and the model give way to the next reading and the cost; the status stays whole
        assert keys == ["serial", "where", "hours", "kind", "p50", "p10", "status", "next", "cost"]
        assert "△ plan overhaul" in _column(demo_app, "status")
        assert sum(c.width for c in table.columns.values()) <= 79
        p10 = [d for d in _column(demo_app, "p10") if d != "-"]
        assert p10 and all(date.fromisoformat(d + "-01") for d in p10)  # YYYY-MM at 80 columns
