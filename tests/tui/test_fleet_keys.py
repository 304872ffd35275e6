"""Small keyboard points of the fleet view: r after a typed serial opens that pump's
reading form (it is not typed into the serial box), a serial typed in lower case keeps
its letters, Home and End go to the first and last pump."""

from __future__ import annotations

from logbook.tui.screens.reading import ReadingScreen
from tests.tui.conftest import settle


async def test_r_after_a_typed_serial_opens_its_reading_form(demo_app):
    app = demo_app
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        fleet = app.screen
        serial = fleet.serials[5]
        fleet.query_one("#fleet-table").focus()
        await pilot.press(*serial, "r")
        await settle(app, pilot)
        assert isinstance(app.screen, ReadingScreen) and app.screen.serial == serial
        assert fleet.query_one("#find").value == serial  # nothing typed into the box


async def test_a_lowercase_serial_keeps_its_letters(demo_app):
    app = demo_app
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        fleet = app.screen
        serial = next(s for s in fleet.serials if s[0].lower() not in app.active_bindings)  # e.g. c-28412
        fleet.query_one("#fleet-table").focus()
        await pilot.press(*serial.lower())
        await pilot.pause()
        assert fleet.query_one("#find").value == serial.lower()
        assert fleet.current_serial() == serial


async def test_home_and_end_go_to_the_first_and_last_pump(demo_app):
    app = demo_app
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        fleet = app.screen
        table = fleet.query_one("#fleet-table")
        table.focus()
        await pilot.press("end")
        assert table.cursor_row == table.row_count - 1 and fleet.current_serial() == fleet.serials[-1]
        await pilot.press("home")
        assert table.cursor_row == 0 and fleet.current_serial() == fleet.serials[0]


async def test_the_round_screen_opens_on_its_site_chooser(demo_app):
    from textual.widgets import Select

    app = demo_app
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        app.screen.query_one("#fleet-table").focus()
        await pilot.press("o")
        await settle(app, pilot)
        assert isinstance(app.focused, Select) and app.focused.id == "round-site"
