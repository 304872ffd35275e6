"""Issue 7: the next reading in the fleet view (column, filter, status line) and in the
pump view, checked against ``rounds.next_tests`` on the same snapshot and forecast."""

from __future__ import annotations

from datetime import timedelta

import pytest
from textual.widgets import DataTable, Select

from logbook.model import Kind
from logbook.rounds import next_tests
from logbook.tui.app import make_app
from logbook.tui.screens.filters import FilterScreen
from logbook.tui.screens.fleet import FleetScreen
from logbook.tui.screens.pump import PumpScreen
from logbook.tui.screens.reading import ReadingScreen
from tests.tui.conftest import TODAY, settle
from tests.tui.test_entry import fill, meter_now, open_form

#: Twenty days after the demo's last readings some pumps are due and most are not.
LATER = TODAY + timedelta(days=20)


@pytest.fixture
def later_app(demo_store, tmp_path):
    return make_app(demo_store, today=LATER, poll_seconds=0, blink=False, export_dir=tmp_path)


def _column(app, key: str) -> list[str]:
    return [str(v) for v in app.screen.query_one("#fleet-table", DataTable).get_column(key)]


def _due(app) -> set[str]:
    """Due pumps by the rounds module itself, on the snapshot and forecast the app shows."""
    tests = next_tests(app.fleet, app.forecast, app.today)
    return {s for s, t in tests.items() if t.is_due(app.today)}


async def test_the_filter_lists_only_pumps_due_for_a_reading(later_app):
    app = later_app
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        fleet = app.screen
        due = _due(app)
        assert 0 < len(due) < len(app.forecast.pumps)
        line = str(fleet.query_one("#status-line").render())
        assert f"{len(due)} reading due" in line  # all pumps shown: the whole fleet's count
        await pilot.press("f")
        assert isinstance(app.screen, FilterScreen)
        await pilot.press("tab", "tab", "tab", "enter", "down", "enter")  # the fourth list: next reading
        assert app.screen.query_one("#due", Select).value == "reading due"
        assert f"{len(due)} pumps match" in str(app.screen.query_one("#filter-count").render())
        await pilot.press("escape")
        assert app.screen is fleet
        assert set(fleet.serials) == due and len(fleet.serials) == len(due)
        assert set(_column(app, "next")) <= {"due", "now!"}
        assert "reading due" in str(fleet.query_one("#filter-summary").render())
        line = str(fleet.query_one("#status-line").render())
        assert f"{len(due)} of {len(app.forecast.pumps)} shown · {len(due)} reading due" in line
        await pilot.press("x")  # clearing brings every pump back
        assert len(fleet.serials) == len(app.forecast.pumps)


async def test_the_next_column_and_the_pump_view_word_a_due_pump(later_app):
    app = later_app
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        fleet = app.screen
        tests = next_tests(app.fleet, app.forecast, app.today)
        serial = sorted(s for s, t in tests.items() if t.is_due(app.today) and not t.asap)[0]
        cells = dict(zip(fleet.serials, _column(app, "next")))
        assert cells[serial] == "due"
        later = next(s for s, t in tests.items() if t.test_on is not None and t.test_on > app.today)
        assert cells[later] == f"{(tests[later].test_on - app.today).days}d"
        fleet.query_one("#find").value = serial
        await pilot.pause()
        fleet.query_one("#fleet-table").focus()
        await pilot.press("enter")
        await settle(app, pilot)
        assert isinstance(app.screen, PumpScreen) and app.screen.serial == serial
        identity = str(app.screen.query_one("#identity").render())
        assert tests[serial].words(app.today) in identity
        assert tests[serial].reason[:40] in identity.replace("\n", " ")


async def test_a_saved_reading_updates_that_pumps_next_reading(later_app):
    app = later_app
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        tests = next_tests(app.fleet, app.forecast, app.today)
        serial = sorted(s for s, t in tests.items() if t.is_due(app.today) and not t.asap)[0]
        pf = app.pump_forecast(serial)
        model = app.fleet.models[pf.model]
        drain = next(k for k in pf.kinds if k.kind is Kind.CASE_DRAIN).latest_value
        form = await open_form(app, pilot, serial, "r")
        assert isinstance(form, ReadingScreen)
        # at the model's reference conditions the normalized value equals the reading (laminar leakage scaling, Rabie, Fluid Power Engineering, 2009, eq. 2.19)
        fill(form, machine_hours=f"{meter_now(app, pf.machine) + 20 * 16:.0f}", case_drain=f"{drain:.2f}",
             oil_temp=f"{model.ref_temp_c:g}", test_pressure=f"{model.ref_pressure_bar:g}",
             test_speed=f"{model.test_speed_rpm:g}", oil_grade=str(model.oil_grade), oil_vi=f"{model.oil_vi:g}")
        await settle(app, pilot)
        await pilot.press("f2")
        await settle(app, pilot)
        after = app.next_test(serial)
        assert after.last_reading_on == app.today and after == next_tests(app.fleet, app.forecast, app.today)[serial]
        assert not after.is_due(app.today) and after.test_on > app.today  # read today: next one later
        await pilot.press("escape")
        await settle(app, pilot)
        assert isinstance(app.screen, FleetScreen)
        cells = dict(zip(app.screen.serials, _column(app, "next")))
        assert cells[serial] == f"{(after.test_on - app.today).days}d"
