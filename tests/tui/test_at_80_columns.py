"""At 80x24 nothing is cut in the middle: the fleet status line wraps, the key bars leave out
whole keys (F1 lists them all), the plan's Note and the History tab's Before -> after get the
room on screen and wrap, the reading form's saved line stays whole above the form, the
Models view shows the costs in full, and a view of a past day offers no key that records."""

from __future__ import annotations

from datetime import date

from rich.cells import cell_len
from textual.widgets import DataTable

from logbook.tui.app import make_app
from logbook.tui.present import whole_money
from logbook.tui.screens.confirm import AskReason
from logbook.tui.screens.fleet import FleetScreen
from logbook.tui.screens.help import HelpScreen, binding_lines
from logbook.tui.screens.plan import NOTE, plan_widths
from logbook.tui.screens.pump import PumpScreen, history_widths
from logbook.tui.widgets.keybar import fit_keys
from tests.tui.conftest import TODAY, press_on_fleet, settle
from tests.tui.screen_text import screen_text
from tests.tui.test_entry import crossing_pump, fill, meter_now, open_form, text

WIDTH, HEIGHT = 80, 24


def _flat(words: str) -> str:
    return " ".join(words.split())


def keys_on_bar(app) -> list[str]:
    """The key bar's keys as they read ("d Remove"), each wholly on screen."""
    keys = list(app.screen.query("FooterKey"))
    assert keys and all(k.region.right <= WIDTH for k in keys), [(k.key, k.region) for k in keys]
    return [f"{k.key_display} {k.description}" for k in keys]


def bar_line(app) -> str:
    return screen_text(app).splitlines()[-1]


async def test_the_fleet_status_line_wraps_instead_of_cutting_the_statuses(demo_app):
    app = demo_app
    async with app.run_test(size=(WIDTH, HEIGHT)) as pilot:
        await settle(app, pilot)
        line = text(app.screen.query_one("#status-line"))
        assert "cost in EUR" in line
        statuses = line.split("\n")[-1]
        assert statuses.count(";") >= 2 and "steady" in statuses
        shown = _flat(" ".join(screen_text(app).splitlines()[-5:-1]))
        assert _flat(line) in shown  # every word of it on screen, none cut at the edge


async def test_the_fleet_key_bar_shows_round_and_backtest_and_help_lists_the_rest(demo_app):
    app = demo_app
    async with app.run_test(size=(WIDTH, HEIGHT)) as pilot:
        await settle(app, pilot)
        keys = keys_on_bar(app)
        assert {"o Round", "b Backtest", "r Reading", "e Event", "p Plan", "F1 Help", "q Quit"} <= set(keys)
        assert all(k in bar_line(app) for k in keys)
        await pilot.press("o")
        assert type(app.screen).__name__ == "RoundScreen"
        await pilot.press("escape")
        await pilot.press("f1")
        await settle(app, pilot)
        assert isinstance(app.screen, HelpScreen)
        listed = {key: words for key, words in binding_lines(app.screen.under)}
        for key, left_out in (("s", "Sort:"), ("m", "Models:"), ("t", "Theme:"), ("b", "Backtest:"), ("o", "Round:")):
            assert listed[key].startswith(left_out)


async def test_a_wide_terminal_shows_every_key(demo_app):
    app = demo_app
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        assert {"s Sort", "m Models", "t Theme", "o Round", "b Backtest"} <= {
            f"{k.key_display} {k.description}" for k in app.screen.query("FooterKey")}


def test_keys_are_left_out_whole_in_the_order_given_and_only_as_many_as_needed():
    items = [("a", "x", "Alpha"), ("b", "y", "Beta"), ("c", "z", "Gamma")]  # 7 + 6 + 7 cells, 2 between
    assert fit_keys(items, 22, ("b", "a")) == items
    assert fit_keys(items, 21, ("b", "a")) == [items[0], items[2]]
    assert fit_keys(items, 7, ("b", "a")) == [items[2]]
    assert fit_keys(items, 3, ("b",)) == [items[0], items[2]]  # a key not named is never left out


async def test_the_pump_key_bar_reads_whole_words(demo_app):
    app = demo_app
    async with app.run_test(size=(WIDTH, HEIGHT)) as pilot:
        await settle(app, pilot)
        await open_form(app, pilot, crossing_pump(app).serial, "enter")
        assert isinstance(app.screen, PumpScreen)
        keys = keys_on_bar(app)
        assert {"d Remove", "c Correct", "h History", "r Reading", "e Event", "F1 Help"} <= set(keys)
        assert bar_line(app).endswith("d Remove F1 Help")


async def test_the_plan_note_column_has_the_room_at_80_columns(demo_app):
    app = demo_app
    async with app.run_test(size=(WIDTH, HEIGHT)) as pilot:
        await press_on_fleet(app, pilot, "p")
        plan = app.screen.plan
        shown = screen_text(app)
        notes = [line.note or line.action for line in plan.lines]
        assert notes and all(note in shown for note in notes)  # whole, as the plan words them
        header = next(line for line in shown.splitlines() if "Serial" in line)
        assert header.rstrip().endswith("Note")  # the column after it starts past the edge, not cut on screen


def test_a_long_note_wraps_in_the_room_left_and_the_next_column_never_shows_cut():
    rows = [["2026-12 (1)", "D-15264", "drain", "100 %", "15k", "pulled forward 1 month(s); " * 3, "2027-01-10",
             "Saltbrook Cut", "", "", ""]]
    widths = plan_widths(rows, 80)
    used = sum(w + 2 for w in widths[:NOTE]) + widths[NOTE] + 2 + 1
    assert used == 80 and widths[NOTE] < cell_len(rows[0][NOTE])  # the screen's width, the rest wraps
    rows[0][NOTE] = "on the machine"
    widths = plan_widths(rows, 120)
    assert widths[NOTE] == len("on the machine")  # room for the columns after it


async def test_the_history_tab_gives_before_and_after_the_room_and_says_the_entry_in_full(demo_app, demo_store):
    app = demo_app
    async with app.run_test(size=(WIDTH, HEIGHT)) as pilot:
        await settle(app, pilot)
        pf = crossing_pump(app)
        view = await open_form(app, pilot, pf.serial, "enter")
        await pilot.press("h")
        await settle(app, pilot)
        table = view.query_one("#history-table", DataTable)
        widths = [c.get_render_width(table) for c in table.ordered_columns]
        assert [str(c.label) for c in table.ordered_columns][3] == "Before -> after"
        assert sum(widths[:4]) <= WIDTH - 1  # the change column ends on screen (it wraps)
        newest = demo_store.pump_trail(pf.serial)[-1]
        from logbook.commands.history import describe

        what, change = describe(newest)
        assert _flat(f"{what} · {change}") in _flat(text(view.query_one("#history-detail")))
        assert "reason:" in text(view.query_one("#history-detail"))


def test_history_widths_fill_the_screen_when_the_reason_would_show_cut():
    rows = [["2026-12-01 10:00", "tester", "insert reading 12", "taken_on 2026-12-01, machine_hours 20700, "
             "servo_pressure_bar 18", "typed again"]]
    widths = history_widths(rows, 80)
    assert sum(w + 2 for w in widths[:4]) + 1 == 80


async def test_after_f3_the_saved_line_stays_whole_above_the_next_pumps_form(demo_app, demo_store):
    app = demo_app
    async with app.run_test(size=(WIDTH, HEIGHT)) as pilot:
        order, form = await press_on_fleet(app, pilot, "r")
        fill(form, machine_hours=f"{meter_now(app, app.pump_forecast(order[0]).machine):.0f}",
             servo_pressure="24.5", case_drain="", oil_temp="")
        await pilot.press("f3")
        await settle(app, pilot)
        assert form.serial == order[1]
        saved = _flat(text(form.query_one("#saved-line")))
        assert saved.startswith(f"✓ Saved {order[0]}:")
        for scroll in (form.query_one("#form").scroll_home, form.query_one("#form").scroll_end):
            scroll(animate=False)
            await pilot.pause()
            lines = screen_text(app).splitlines()
            assert lines[1].startswith(f" ✓ Saved {order[0]}:")  # the sentence from its start, under the title
            assert saved in _flat(" ".join(lines[1:5]))


async def test_the_models_view_shows_costs_in_full(demo_app):
    app = demo_app
    async with app.run_test(size=(WIDTH, HEIGHT)) as pilot:
        await press_on_fleet(app, pilot, "m")
        table = app.screen.query_one("#models-table", DataTable)
        economies = app.money.economies
        for code, eco in economies.items():
            row = [str(c) for c in table.get_row(code)]
            assert row[4:6] == [whole_money(eco.planned), whole_money(eco.failure)]
        shown = screen_text(app)
        assert "12,500" in shown and "14,500" in shown and "12k" not in shown  # the demo's TQ-250, TQ-55
    assert whole_money(12500) == "12,500" and whole_money(7900.5) == "7,900.50" and whole_money(None) == ""


async def test_a_past_day_offers_no_key_that_records(demo_store):
    app = make_app(demo_store, today=TODAY, poll_seconds=0, blink=False, as_of=date(2025, 6, 1))
    async with app.run_test(size=(WIDTH, HEIGHT)) as pilot:
        await settle(app, pilot)
        keys = keys_on_bar(app)
        assert not {"r Reading", "e Event", "o Round"} & set(keys) and "p Plan" in keys
        serial = app.screen.serials[0]
        await open_form(app, pilot, serial, "enter")
        assert isinstance(app.screen, PumpScreen)
        keys = keys_on_bar(app)
        assert not {"r Reading", "e Event", "c Correct", "d Remove"} & set(keys) and "h History" in keys
        await pilot.press("2")
        app.screen.query_one("#readings-table").focus()
        await pilot.press("d")  # no removal from the past: the key says why
        await settle(app, pilot)
        assert isinstance(app.screen, PumpScreen) and not isinstance(app.screen, AskReason)
        assert any("read-only" in n.message for n in app._notifications)
        await pilot.press("f1")
        await settle(app, pilot)
        listed = {key: words for key, words in binding_lines(app.screen.under)}
        assert listed["d"].startswith("Remove: remove the reading or event") and listed["d"].endswith("is read-only)")
        assert "(off:" not in listed["h"]
        await pilot.press("escape")
        await pilot.press("escape")
        await settle(app, pilot)
        assert isinstance(app.screen, FleetScreen)
