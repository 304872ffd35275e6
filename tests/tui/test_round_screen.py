"""The round screen: a site's due pumps in walking order, stepped through with the reading form."""

from __future__ import annotations

from tests.tui.screen_text import screen_text

from logbook.store import Store
from logbook.tui.app import make_app
from logbook.tui.screens.reading import ReadingScreen
from logbook.tui.screens.round import DONE, TODO, RoundScreen
from tests.store.conftest import MACHINES, MODELS, PUMPS, READINGS, TODAY, load


def _store(tmp_path) -> Store:
    store = Store(tmp_path / "round.db", user="tester")
    for table, data in (("models", MODELS), ("machines", MACHINES), ("pumps", PUMPS), ("readings", READINGS)):
        load(store, table, data)
    # every 600 days: S-200 (read 2025-03-01) due 2026-10-22, overdue; S-100 (read 2025-05-01) due 2026-12-22
    store.update_model("TX-90", reading_interval_days=600)
    return store


async def _loaded(app, pilot) -> None:
    await app.workers.wait_for_complete()
    await pilot.pause()


async def test_a_round_steps_through_its_pumps_and_ticks_the_ones_read(tmp_path):
    store = _store(tmp_path)
    app = make_app(store, today=TODAY, poll_seconds=0, blink=False)
    async with app.run_test(size=(120, 36)) as pilot:
        screen = await _round(app, pilot, 0)
        assert [t.serial for t in screen.stops] == ["S-200"]  # only the overdue one today
        await pilot.press("plus", "plus", "plus")  # 21 days ahead, to 2026-12-22: S-100 comes in, first by machine
        assert [(t.machine, t.serial) for t in screen.stops] == [("M-1", "S-100"), ("M-2", "S-200")]
        await pilot.press("enter")
        await pilot.pause()
        form = app.screen
        assert isinstance(form, ReadingScreen) and (form.serial, form.following) == ("S-100", ["S-200"])
        form.fields["machine_hours"].set_text("2900")
        form.fields["servo_pressure"].set_text("24.9")
        for name in ("case_drain", "oil_temp"):
            form.fields[name].set_text("")
        await pilot.press("f3")  # save and on to the next pump of the round
        await app.workers.wait_for_complete()
        await pilot.pause()
        assert form.serial == "S-200"
        assert [r.servo_pressure_bar for r in store.readings("S-100") if r.taken_on == TODAY] == [24.9]
        await pilot.press("escape")
        await _loaded(app, pilot)
        assert app.screen is screen
        marks = [screen.query_one("#round-table").get_row_at(i)[0] for i in range(2)]
        assert marks == [DONE, TODO]
        assert "1 of 2 read" in str(screen.query_one("#status-line").render())
    store.close()


async def test_no_site_no_pumps_and_a_word_why(tmp_path):
    store = _store(tmp_path)
    app = make_app(store, today=TODAY, poll_seconds=0, blink=False)
    async with app.run_test(size=(120, 36)) as pilot:
        await _loaded(app, pilot)
        app.push_screen(RoundScreen(within_days=0))
        await pilot.pause()
        screen = app.screen
        # a single site is chosen for the person
        assert screen.site == "North Yard" and [t.serial for t in screen.stops] == ["S-200"]
        assert "every 600 days" in str(screen.query_one("#round-why").render())
    store.close()


async def test_key_o_on_the_fleet_view_opens_the_round(tmp_path):
    store = _store(tmp_path)
    app = make_app(store, today=TODAY, poll_seconds=0, blink=False)
    async with app.run_test(size=(120, 36)) as pilot:
        await _loaded(app, pilot)
        await pilot.press("o")
        await pilot.pause()
        assert isinstance(app.screen, RoundScreen) and app.screen.site == "North Yard"
        await pilot.press("escape")
        await pilot.pause()
        assert not isinstance(app.screen, RoundScreen)
    store.close()


async def _round(app, pilot, within_days: int) -> RoundScreen:
    """The North Yard round once the fleet is loaded."""
    await _loaded(app, pilot)
    app.push_screen(RoundScreen(site="North Yard", within_days=within_days))
    await pilot.pause()
    return app.screen


async def test_the_round_status_line_fits_80_columns(tmp_path):
    app = make_app(_store(tmp_path), today=TODAY, poll_seconds=0, blink=False)
    async with app.run_test(size=(80, 24)) as pilot:
        await _round(app, pilot, 21)
        line = " ".join(str(app.screen.query_one("#status-line").render()).split())
        assert line.endswith("Esc back)") and "F4 skip" in line
        assert "F4 skip, Esc back)" in screen_text(app)  # on screen whole, not cut at the edge
