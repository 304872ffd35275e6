"""The safety box of the entry forms: headed "Safety", the warning always on screen, the
whole list a key (F6) away; on the event form the running-machine point joins the warning
for a neutral re-set or a control repair."""

from __future__ import annotations

from textual.widgets import Select

from logbook.cautions import RUNNING_MACHINE, SAFETY
from logbook.tui.screens.event import EventScreen
from logbook.tui.screens.reading import ReadingScreen
from logbook.tui.widgets.safety import SafetyBox
from tests.tui.conftest import settle
from tests.tui.screen_text import screen_text
from tests.tui.test_entry import crossing_pump, open_form


def shown(form) -> str:
    box = form.query_one(SafetyBox)
    return str(box.render())


def words(text: str) -> str:
    """Screen text with the box's wrapping and borders taken out."""
    return " ".join(text.replace("│", " ").replace("▌", " ").split())


async def opened(app, pilot, key: str, screen):
    """The form ``key`` opens at 80x24: the first form of the program shows the whole list,
    every later one the warning alone (checked on a second opening)."""
    await settle(app, pilot)
    form = await open_form(app, pilot, crossing_pump(app).serial, key)
    assert isinstance(form, screen)
    assert form.query_one(SafetyBox).border_title == "Safety"
    text = shown(form)
    assert text.splitlines()[0] == SAFETY.warning_line  # the whole list, once per program start
    assert all(item in text for item in SAFETY.items) and text.endswith(SAFETY.deferral)
    await pilot.press("escape")
    await settle(app, pilot)
    form = await open_form(app, pilot, crossing_pump(app).serial, key)
    assert shown(form) == SAFETY.warning_line  # short: the warning only
    assert SAFETY.warning_line in words(screen_text(app))
    return form


async def test_the_reading_form_shows_the_warning_and_the_whole_list_on_f6(demo_app):
    app = demo_app
    async with app.run_test(size=(80, 24)) as pilot:
        form = await opened(app, pilot, "r", ReadingScreen)
        await pilot.press("f6")
        await pilot.pause()
        text = shown(form)
        assert text.splitlines()[0] == SAFETY.warning_line
        assert all(item in text for item in SAFETY.items) and text.endswith(SAFETY.deferral)
        await pilot.press("f6")
        await pilot.pause()
        assert shown(form) == SAFETY.warning_line


async def test_the_event_form_shows_the_warning_and_adds_the_running_point_for_neutral_work(demo_app):
    app = demo_app
    async with app.run_test(size=(80, 24)) as pilot:
        form = await opened(app, pilot, "e", EventScreen)
        for kind in ("neutral_reset", "control_repair"):
            form.query_one("#kind", Select).value = kind
            await pilot.pause()
            assert shown(form).splitlines() == [SAFETY.warning_line, f"• {RUNNING_MACHINE}"], kind
        form.query_one("#kind", Select).value = "oil_change"
        await pilot.pause()
        assert shown(form) == SAFETY.warning_line
        await pilot.press("f6")
        await pilot.pause()
        text = shown(form)
        assert all(item in text for item in SAFETY.items) and text.endswith(SAFETY.deferral)
