"""Pump view, models and limits, plan and export, help, theme, other users' changes,
and trouble with the database: shown in words, never as a traceback."""

from __future__ import annotations

import io
import sqlite3

from rich.console import Console

from textual.widgets import DataTable

from logbook.analysis.results import Outcome
from logbook.model import ALL_KINDS, Kind, Reading
from logbook.store import Store
from logbook.tui.screens.help import HelpScreen, binding_lines
from logbook.tui.screens.model_edit import ModelEditScreen
from logbook.tui.screens.models import ModelsScreen
from logbook.tui.screens.plan import PlanScreen
from logbook.tui.screens.pump import PumpScreen
from logbook.tui.screens.reading import ReadingScreen
from logbook.tui.widgets.chart import TrendChart
from logbook.tui.widgets.tables import OpenTable
from tests.tui.conftest import TODAY, settle
from tests.tui.test_entry import crossing_pump, meter_now, text


async def test_pump_view_says_which_hours_a_day_its_dates_assume(demo_app):
    # Issue 12: the forecast says which utilisation it assumed. On the demo fleet one machine's hour meter
    # shows a stand-still (no parked event): its pumps' view says so in place of the model's line, at 80x24.
    app = demo_app
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        said = [pf for pf in app.forecast.pumps if pf.utilisation_basis]
        plain = next(pf for pf in app.forecast.pumps if not pf.utilisation_basis)
        assert said and any("by its hour meter" in pf.utilisation_basis for pf in said)
        for pf, shown in ((said[0], True), (plain, False)):
            app.push_screen(PumpScreen(pf.serial))
            await settle(app, pilot)
            identity = " ".join(text(app.screen.query_one("#identity")).split())
            assert (f"{pf.machine} {pf.utilisation_basis}" in identity) is shown
            assert ("cm3/rev" in identity) is not shown
            app.pop_screen()
            await settle(app, pilot)


async def test_pump_view_shows_history_readings_and_a_chart_per_kind(demo_app, demo_store):
    app = demo_app
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        pf = crossing_pump(app)
        app.push_screen(PumpScreen(pf.serial))
        await settle(app, pilot)
        screen = app.screen
        readings = demo_store.readings(pf.serial)
        assert screen.query_one("#readings-table", DataTable).row_count == len(readings)
        assert screen.query_one("#fitted-table", DataTable).row_count == len(demo_store.fitments(serial=pf.serial))
        assert pf.status in text(screen.query_one("#identity"))
        chart = screen.query_one("#chart", TrendChart)
        assert chart.kf.kind is pf.worst.kind  # opens on the kind closest to its limit
        drawn = text(chart)
        for words in ("● reading", "median of the wear paths", "P10-P90 band", "─ limit", "┊ today", "◆ P50 crossing"):
            assert words in drawn
        assert "●" in drawn.split("\n")[0] + drawn  # points are drawn
        assert any(0x2800 < ord(ch) <= 0x28FF for ch in drawn)  # the fitted path in braille
        await pilot.press("k")
        assert chart.kf.kind is ALL_KINDS[(ALL_KINDS.index(pf.worst.kind) + 1) % 3]
        summary = text(screen.query_one("#kind-summary"))
        assert chart.kf.kind.label in summary
        await pilot.press("v")
        assert screen.query_one("#pump-tabs").active == "readings"
        await pilot.press("3")
        assert screen.query_one("#pump-tabs").active == "events"


async def test_the_chart_marks_a_reading_the_engine_set_aside(demo_app):
    app = demo_app
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        flagged = [(p, k) for p in app.forecast.pumps for k in p.kinds if k.fit is not None and not all(k.fit.used)]
        assert flagged, "the demo fleet has readings the engine set aside"
        pf, kf = flagged[0]
        screen = PumpScreen(pf.serial)
        app.push_screen(screen)
        await settle(app, pilot)
        screen.kind = kf.kind
        screen._show_chart()
        await pilot.pause()
        assert "×" in text(screen.query_one("#chart")).split("× set aside")[0]
        assert "set aside" in text(screen.query_one("#kind-summary"))


async def test_editing_a_limit_changes_the_statuses(demo_app, demo_store):
    app = demo_app
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        over_before = sum(1 for p in app.forecast.pumps if p.status == "✖ over limit")
        await pilot.press("m")
        await settle(app, pilot)
        assert isinstance(app.screen, ModelsScreen)
        table = app.screen.query_one("#models-table", DataTable)
        table.move_cursor(row=[str(k.value) for k in table.rows].index("TQ-250"))
        await pilot.press("enter")
        await settle(app, pilot)
        form = app.screen
        assert isinstance(form, ModelEditScreen) and form.fields["case_drain_limit"].text == "24"
        form.fields["case_drain_limit"].input.value = "-3"
        await pilot.pause()
        assert "Case drain limit '-3'" in text(form.fields["case_drain_limit"].query_one(".field-message"))  # the label
        await pilot.press("f2")
        await settle(app, pilot)
        assert demo_store.models()["TQ-250"].limit(Kind.CASE_DRAIN).value == 24.0  # nothing written
        form.fields["case_drain_limit"].input.value = "12"
        await pilot.press("f2")
        await settle(app, pilot)
        assert demo_store.models()["TQ-250"].limit(Kind.CASE_DRAIN).value == 12.0
        tq250 = [p for p in app.forecast.pumps if p.model == "TQ-250"]
        over = [p for p in tq250 if p.status == "✖ over limit"]
        drains = [next(k for k in p.kinds if k.kind is Kind.CASE_DRAIN) for p in tq250]
        assert all(k.limit.value == 12.0 for k in drains)
        assert sum(1 for p in app.forecast.pumps if p.status == "✖ over limit") > over_before
        assert len(over) >= sum(1 for k in drains if k.outcome is Outcome.PAST_LIMIT) > 0
        await pilot.press("escape", "escape")
        await settle(app, pilot)
        statuses = [str(v) for v in app.screen.query_one("#fleet-table", DataTable).get_column("status")]
        assert statuses.count("✖ over limit") == sum(1 for p in app.forecast.pumps if p.status == "✖ over limit")


async def test_plan_view_lists_months_and_exports_the_plan(demo_app, tmp_path):
    app = demo_app
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        await pilot.press("p")
        await settle(app, pilot)
        screen = app.screen
        assert isinstance(screen, PlanScreen)
        planned = [line.serial for line in screen.plan.lines]
        assert planned and [s for s in screen.serials if s] == planned + [line.serial for line in screen.plan.unplaced]
        first_month = str(screen.query_one("#plan-table", DataTable).get_row_at(0)[0])
        assert first_month.startswith(TODAY.strftime("%Y-%m"))
        await pilot.press("h")
        assert screen.horizon == 12 and len(screen.plan.settings.months) == 12
        await pilot.press("x")
        await settle(app, pilot)
        await pilot.press("enter")  # the suggested name, without suffix: every format
        await settle(app, pilot)
        stem = tmp_path / f"logbook-plan-{TODAY.isoformat()}"
        written = {kind: stem.with_name(f"{stem.name}.{kind}") for kind in ("md", "csv", "html", "json")}
        assert all(path.exists() for path in written.values())
        assert all(planned[0] in path.read_text() for path in written.values())
        assert written["md"].name in " ".join(text(screen.query_one("#status-line")).split())


async def test_help_lists_every_key_of_the_screen(demo_app):
    app = demo_app
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        fleet = app.screen
        await pilot.press("f1")
        assert isinstance(app.screen, HelpScreen)
        console = Console(width=100, record=True, file=io.StringIO())
        console.print(app.screen.query_one("#help-text").content)
        shown = console.export_text()
        for binding in [*type(fleet).BINDINGS, *type(app).BINDINGS, *OpenTable.BINDINGS]:
            assert f"{binding.description}: {binding.tooltip}" in " ".join(shown.split())
        assert ("A-Z 0-9 -", "typing a serial (letters, digits, '-') on the table jumps to it; r or e after it opens "
                "its form") in binding_lines(fleet)
        await pilot.press("escape")
        assert app.screen is fleet


async def test_theme_toggles_between_light_and_dark(demo_app):
    app = demo_app
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        first = app.theme
        await pilot.press("t")
        assert app.theme != first and ("light" in app.theme) != ("light" in first)
        await pilot.press("t")
        assert app.theme == first


async def test_another_users_reading_appears_without_a_restart(demo_store, demo_db):
    from logbook.tui.app import make_app

    app = make_app(demo_store, today=TODAY, poll_seconds=0.2, blink=False)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        pf = crossing_pump(app)
        generation = app.data_generation
        other = Store(demo_db, create=False, user="someone-else")
        other.add_reading(Reading(None, pf.serial, TODAY, meter_now(app, pf.machine), servo_pressure_bar=23.0), today=TODAY)
        other.close()
        for _ in range(30):
            await pilot.pause(0.1)
            await app.workers.wait_for_complete()
            if app.data_generation > generation:
                break
        await settle(app, pilot)
        assert app.data_generation > generation
        assert any(r.entered_by == "someone-else" for r in app.fleet.readings)


async def test_a_database_that_cannot_be_read_gives_a_message(demo_store):
    from logbook.tui.app import make_app

    app = make_app(demo_store, today=TODAY, poll_seconds=0, blink=False)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        demo_store.conn.close()
        app.reload("asked")
        await settle(app, pilot)
        line = text(app.screen.query_one("#status-line"))
        assert "Last refresh failed: the logbook database could not be read" in line
        assert app.forecast is not None  # the last good data stays on screen


async def test_a_locked_database_refuses_the_save_in_words(demo_app, demo_store, demo_db):
    app = demo_app
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        pf = crossing_pump(app)
        before = demo_store.counts()["readings"]
        demo_store.WRITE_ATTEMPTS = 1
        demo_store.conn.execute("PRAGMA busy_timeout = 50")
        app.push_screen(ReadingScreen(pf.serial))
        await settle(app, pilot)
        form = app.screen
        form.fields["machine_hours"].input.value = f"{meter_now(app, pf.machine):.0f}"
        form.fields["servo_pressure"].input.value = "24"
        holder = sqlite3.connect(demo_db, isolation_level=None)
        holder.execute("BEGIN IMMEDIATE")  # another user holds the write lock
        try:
            await pilot.press("f2")
            await settle(app, pilot)
            await pilot.press("f2")  # 24 bar is asked about first (issue 14): F2 again saves as typed
            await settle(app, pilot)
        finally:
            holder.execute("ROLLBACK")
            holder.close()
        assert "stayed locked by another user; nothing was written" in text(form.query_one("#check"))
        assert demo_store.counts()["readings"] == before


def test_a_database_from_a_newer_version_is_refused_with_a_message(demo_db, capsys):
    from logbook.cli import main

    conn = sqlite3.connect(demo_db)
    conn.execute("PRAGMA user_version = 999")
    conn.close()
    code = main(["--db", str(demo_db), "--today", TODAY.isoformat()])
    err = capsys.readouterr().err
    assert code == 1 and "newer than this logbook understands" in err and "Traceback" not in err
