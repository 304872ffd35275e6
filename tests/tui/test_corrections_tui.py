"""Fixing a mistake where it was made: from the pump view, correct a reading (its values
on the form, a reason required), remove a reading or an event with a reason, and see the
pump's history; all through the store's own correct/remove, audited as on the CLI."""

from __future__ import annotations

from tests.tui.screen_text import screen_text

from logbook.tui.screens.confirm import AskReason
from logbook.tui.screens.correct import CorrectReadingScreen
from logbook.tui.screens.pump import PumpScreen
from tests.tui.conftest import settle
from tests.tui.test_entry import crossing_pump, open_form, text


async def pump_view(app, pilot, serial):
    return await open_form(app, pilot, serial, "enter")


async def test_a_reading_is_corrected_from_the_pump_view(demo_app, demo_store):
    app = demo_app
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        pf = crossing_pump(app)
        view = await pump_view(app, pilot, pf.serial)
        assert isinstance(view, PumpScreen)
        await pilot.press("2")  # readings, newest first
        await pilot.pause()
        view.query_one("#readings-table").focus()
        await pilot.pause()
        newest = demo_store.readings(pf.serial)[-1]
        await pilot.press("c")
        await settle(app, pilot)
        form = app.screen
        assert isinstance(form, CorrectReadingScreen) and form.original.id == newest.id
        assert form.fields["machine_hours"].text == f"{newest.machine_hours:g}"
        assert app.focused is form.fields["reason"].input
        bar = screen_text(app)  # one reading is corrected: no next pump, so no F3 or F4 on its key bar
        assert "Save+next" not in bar and "Skip pump" not in bar and "F2" in bar
        await pilot.press("f2")  # no reason: refused, nothing written
        await settle(app, pilot)
        assert "Reason (empty): is required" in text(form.query_one("#check"))
        assert demo_store.reading(newest.id).superseded_by is None
        await pilot.press(*"typed into the wrong box")
        form.fields["note"].input.value = "checked again"
        await pilot.press("f2")
        await settle(app, pilot)
        old = demo_store.reading(newest.id)
        assert old.superseded_by is not None, text(form.query_one("#check"))
        new = demo_store.reading(old.superseded_by)
        assert new.note == "checked again" and new.machine_hours == newest.machine_hours
        assert new.case_drain_lpm == newest.case_drain_lpm  # a value left alone is not rewritten by its rounding
        trail = demo_store.pump_trail(pf.serial)
        assert trail[-1].action == "correct" and trail[-1].reason == "typed into the wrong box"
        await pilot.press("escape")
        await settle(app, pilot)
        await pilot.press("h")
        await settle(app, pilot)
        table = view.query_one("#history-table")
        first = [str(c) for c in table.get_row_at(0)]
        assert f"correct reading {newest.id} -> {new.id}" in first and "typed into the wrong box" in first


async def test_a_reading_is_removed_with_a_reason(demo_app, demo_store):
    app = demo_app
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        pf = crossing_pump(app)
        view = await pump_view(app, pilot, pf.serial)
        await pilot.press("2")
        view.query_one("#readings-table").focus()
        await pilot.pause()
        newest = demo_store.readings(pf.serial)[-1]
        await pilot.press("d")
        await pilot.pause()
        assert isinstance(app.screen, AskReason)
        await pilot.press("enter")  # no reason: asked again
        await pilot.pause()
        assert isinstance(app.screen, AskReason)
        await pilot.press(*"duplicate of the paper sheet", "enter")
        await settle(app, pilot)
        assert demo_store.reading(newest.id).removed_reason == "duplicate of the paper sheet"
        assert newest.id not in [r.id for r in demo_store.readings(pf.serial)]


async def test_removing_is_cancelled_with_esc(demo_app, demo_store):
    app = demo_app
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        pf = crossing_pump(app)
        view = await pump_view(app, pilot, pf.serial)
        await pilot.press("3")  # events
        view.query_one("#events-table").focus()
        await pilot.pause()
        events = app.fleet.history(pf.serial).events  # its own and its machines' meter replacements
        await pilot.press("d")
        await pilot.pause()
        if events:
            assert isinstance(app.screen, AskReason)
            await pilot.press(*"oops")
            await pilot.press("escape")
            await settle(app, pilot)
        assert app.screen is view
        assert all(demo_store.event(e.id).removed_reason is None for e in events)
