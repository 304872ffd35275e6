"""User text on the interface's screens: a technician, a note, an --as name, a file name
holding square brackets, markup-like tags, formula prefixes or control characters is
shown as typed (control characters as their escapes) on the fleet view, the reading form
(``r`` on that pump), the event form and the pump view, and no screen crashes."""

from __future__ import annotations

import re
import shutil

from hypothesis import HealthCheck, given, settings
from textual.app import App
from textual.widgets import DataTable, Select

from logbook import fmt
from logbook.model import Event, EventKind, Reading
from logbook.store import Store
from logbook.tui.app import make_app
from logbook.tui.screens.event import EventScreen
from logbook.tui.screens.fleet import FleetScreen
from logbook.tui.screens.pump import PumpScreen
from logbook.tui.screens.reading import ReadingScreen
from logbook.tui.widgets.plain import Plain
from tests.store.test_user_text import FREE_TEXT, NASTY, RAW_CONTROL
from tests.tui.conftest import TODAY, settle
from tests.tui.screen_text import screen_text
from tests.tui.test_entry import text

NAME = "Ann [night shift] [/]"


def _meter_now(fleet, machine: str) -> float:
    hours = [r.machine_hours for r in fleet.readings if r.machine == machine]
    hours += [e.hours for e in fleet.events if e.machine == machine and e.hours is not None]
    hours += [e.to_hours for e in fleet.events if e.to_machine == machine and e.to_hours is not None]
    return max(hours) + 12.0


#: The issue's cases (a closing tag, a stray one, a bracketed name, a link) and control characters.
ON_SCREENS = [t for t in NASTY if "[" in t and "\\" not in t][:4] + [t for t in NASTY if not t.isprintable()]


def _write_nasty(db, texts: list[str]) -> dict[str, str]:
    """One reading and one event with a nasty technician and note on a fitted pump for
    each text, entered under a nasty --as name; serial -> its text."""
    chosen = {}
    with Store(db, create=False, user=NAME) as store:
        fleet = store.fleet()
        fitted = sorted({f.serial: f for f in fleet.fitments if f.removed_on is None}.values(), key=lambda f: f.serial)
        for f, nasty in zip(fitted, texts):
            hours = _meter_now(fleet, f.machine)
            store.add_event(Event(None, EventKind.OIL_CHANGE, TODAY, f.serial, hours=hours, technician=nasty,
                                  note=nasty), today=TODAY)
            store.add_reading(Reading(None, f.serial, TODAY, hours + 1, servo_pressure_bar=25.0, technician=nasty,
                                      note=nasty), today=TODAY)
            chosen[f.serial] = nasty
    return chosen


def _clean(screen: str) -> None:
    assert not RAW_CONTROL.search(screen.replace("\n", "")), "a control character reached the screen"


async def _find(app, pilot, serial: str) -> None:
    app.screen.query_one("#find").value = serial
    await pilot.pause()
    app.screen.query_one("#fleet-table").focus()


async def test_r_on_a_pump_whose_technician_has_brackets_opens_the_form_with_the_text_verbatim(demo_db, tmp_path):
    chosen = _write_nasty(demo_db, ON_SCREENS)
    assert len(chosen) == 6
    with Store(demo_db, create=False, user="tester") as store:
        app = make_app(store, today=TODAY, poll_seconds=0, blink=False, export_dir=tmp_path)
        async with app.run_test(size=(160, 50)) as pilot:
            await settle(app, pilot)
            for serial, nasty in chosen.items():
                shown = fmt.visible(nasty)
                assert isinstance(app.screen, FleetScreen)
                await _find(app, pilot, serial)
                await pilot.press("r")  # killed the app with a closing tag in the technician
                await settle(app, pilot)
                form = app.screen
                assert isinstance(form, ReadingScreen) and form.serial == serial
                assert f"by {shown}" in text(form.query_one("#pump-line"))
                _clean(screen_text(app))
                await pilot.press("escape")
                await settle(app, pilot)
                await pilot.press("enter")  # the pump view
                await settle(app, pilot)
                view = app.screen
                assert isinstance(view, PumpScreen) and view.serial == serial
                readings = view.query_one("#readings-table", DataTable)
                newest = [str(c) for c in readings.get_row_at(0)]
                assert newest[-2:] == [shown, fmt.visible(NAME)]  # technician, entered by
                events = [str(c) for c in view.query_one("#events-table", DataTable).get_row_at(0)]
                assert events[5:] == [shown, shown, fmt.visible(NAME)]  # technician, note, entered by
                readings.focus()
                readings.move_cursor(row=0)
                await pilot.pause()
                detail = text(view.query_one("#reading-detail"))
                assert f"taken by {shown}, entered by {fmt.visible(NAME)}" in detail and f"note: {shown}" in detail
                await pilot.press("v")
                _clean(screen_text(app))
                await pilot.press("escape")
                await settle(app, pilot)
            await _find(app, pilot, next(iter(chosen)))
            await pilot.press("e")
            await settle(app, pilot)
            assert isinstance(app.screen, EventScreen)
            _clean(screen_text(app))


async def test_the_fleet_view_shows_a_database_file_name_as_typed(demo_db, tmp_path):
    named = tmp_path / "fleet [night shift] [bold]x\x1b[2J.db"  # no '/' in a file name
    shutil.copy(demo_db, named)
    with Store(named, create=False, user=NAME) as store:
        app = make_app(store, today=TODAY, poll_seconds=0, blink=False, export_dir=tmp_path)
        async with app.run_test(size=(160, 40)) as pilot:
            await settle(app, pilot)
            title = text(app.screen.query_one("#title"))
            assert fmt.visible(named.name) in title
            screen = screen_text(app)
            assert "[night shift] [bold]x\\x1b[2J.db" in screen
            _clean(screen)


class _Shown(App):
    """Every way the interface puts words on screen, holding one text: a Plain, a table row
    made by fmt.cells, a list choice made by fmt.text, a border title, a notification."""

    def __init__(self, value: str) -> None:
        super().__init__()
        self.value = value

    def compose(self):
        yield Plain(f"note: {self.value}\nsecond line", id="plain")
        yield DataTable(id="table")
        yield Select([(fmt.text(self.value), "v")], value="v", id="select")

    def on_mount(self) -> None:
        table = self.query_one("#table", DataTable)
        table.add_columns("a", "b")
        table.add_row(*fmt.cells("-", self.value))
        self.query_one("#plain").border_title = fmt.text(f"Saved: {self.value}")
        self.notify(fmt.visible(self.value), markup=False)


@settings(max_examples=30, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(value=FREE_TEXT.map(lambda s: s[:120]))
def test_any_free_text_is_shown_verbatim_by_every_kind_of_widget(value):
    import asyncio

    async def run():
        app = _Shown(value)
        async with app.run_test(size=(800, 12)) as pilot:
            await pilot.pause()
            shown = fmt.visible(value)
            assert text(app.query_one("#plain")) == f"note: {shown}\nsecond line"
            assert [str(c) for c in app.query_one("#table", DataTable).get_row_at(0)] == ["-", shown]
            screen = screen_text(app)
            _clean(screen)
            flat = re.sub(r"\s+", " ", screen)
            assert re.sub(r"\s+", " ", shown).strip() in flat

    asyncio.run(run())
