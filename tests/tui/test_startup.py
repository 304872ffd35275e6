"""Start-up: the fleet view paints its frame before the store is opened, the store and
the forecast follow from a worker; a saved reading's pump is re-forecast first."""

from __future__ import annotations

import sqlite3
import threading
from dataclasses import dataclass, field
from pathlib import Path

from textual.widgets import DataTable, Static

from logbook.model import Kind
from logbook.tui.app import LogbookApp, make_app
from logbook.tui.gate import StoreOpener
from logbook.tui.messages import DataLoaded, PumpUpdated
from logbook.tui.screens.reading import ReadingScreen
from tests.tui.conftest import TODAY, settle
from tests.tui.screen_text import assert_snapshot, screen_text
from tests.tui.test_entry import crossing_pump, fill, meter_now, open_form


@dataclass
class HeldOpener:
    """A StoreOpener that waits for the test's go-ahead, so the first frame can be looked at."""

    path: Path
    go: threading.Event = field(default_factory=threading.Event)
    opened: list = field(default_factory=list)

    def __call__(self):
        self.go.wait(timeout=30)
        store = StoreOpener(self.path, "tester")()
        self.opened.append(store)
        return store


def _status(app) -> str:
    return str(app.screen.query_one("#status-line", Static).render())


async def test_the_first_frame_shows_the_columns_before_the_store_is_opened(demo_db):
    opener = HeldOpener(demo_db)
    app = make_app(opener, today=TODAY, poll_seconds=0, blink=False)
    async with app.run_test(size=(80, 24)) as pilot:
        try:
            await pilot.pause()
            table = app.screen.query_one("#fleet-table", DataTable)
            assert app.store is None and opener.opened == []  # nothing opened yet
            first = [str(c.label) for c in table.columns.values()]
            assert first[0] == "Serial" and len(first) >= 6
            assert table.row_count == 0 and "Reading the logbook" in _status(app)
            assert_snapshot("fleet-first-frame-small", screen_text(app))
        finally:
            opener.go.set()
        await settle(app, pilot)
        assert app.store is opener.opened[0]
        assert table.row_count == len(app.forecast.pumps) > 100
        assert [str(c.label) for c in table.columns.values()] == first  # the rows fill the same columns
        assert "shown" in _status(app)
    app.gate.close()  # the gate opened it, the gate closes it
    assert app.store is None


async def test_a_database_too_new_for_this_logbook_is_explained_in_the_view(demo_db):
    conn = sqlite3.connect(demo_db)
    conn.execute("PRAGMA user_version = 999")
    conn.close()
    app = make_app(StoreOpener(demo_db, "tester"), today=TODAY, poll_seconds=0, blink=False)
    async with app.run_test(size=(80, 24)) as pilot:
        await settle(app, pilot)
        assert app.store is None and app.fleet is None
        status = _status(app)
        assert status.startswith("Cannot read the logbook") and "newer than this logbook understands" in status


def test_a_missing_database_is_reported_before_the_interface_starts(tmp_path, monkeypatch, capsys):
    import logbook.tui.app as tui_app
    from logbook.cli import main
    from logbook.tui import launch

    monkeypatch.setattr(launch.os, "isatty", lambda fd: True)

    def no_app(*args, **kwargs):
        raise AssertionError("the interface must not start without a database")

    monkeypatch.setattr(tui_app, "make_app", no_app)
    code = main(["--db", str(tmp_path / "none.db"), "--today", TODAY.isoformat()])
    err = capsys.readouterr().err
    assert code == 1 and "no logbook database at" in err and "Traceback" not in err
    assert not (tmp_path / "none.db").exists()  # nothing created


class RecordingApp(LogbookApp):
    """Notes the data messages in arrival order (Textual also calls the base class's
    handlers, so these only record)."""

    def on_pump_updated(self, message: PumpUpdated) -> None:
        self.seen.append(message)

    def on_data_loaded(self, message: DataLoaded) -> None:
        self.seen.append(message)


async def test_a_saved_reading_updates_its_pump_before_the_whole_fleet(demo_store, tmp_path):
    app = RecordingApp(demo_store, today=TODAY, poll_seconds=0, blink=False, export_dir=tmp_path)
    app.seen = seen = []
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        pf = crossing_pump(app)
        model = app.fleet.models[pf.model]
        limit = model.limit(Kind.CASE_DRAIN).value
        form = await open_form(app, pilot, pf.serial, "r")
        assert isinstance(form, ReadingScreen)
        fill(form, machine_hours=f"{meter_now(app, pf.machine):.0f}", case_drain=f"{limit * 0.8:.2f}",
             oil_temp=f"{model.ref_temp_c:g}", test_pressure=f"{model.ref_pressure_bar:g}",
             test_speed=f"{model.test_speed_rpm:g}", oil_grade=str(model.oil_grade), oil_vi=f"{model.oil_vi:g}")
        await settle(app, pilot)
        seen.clear()
        reads = []
        read_fleet = demo_store.fleet
        demo_store.fleet = lambda: reads.append(1) or read_fleet()
        await pilot.press("f2")  # a worn-looking case drain is asked about first (issue 14)
        await settle(app, pilot)
        await pilot.press("f2")  # saved as typed
        await settle(app, pilot)
        del demo_store.fleet
        assert [r.taken_on for r in demo_store.readings(pf.serial)].count(TODAY) == 1  # saved
        assert reads == []  # nobody else wrote: the store was not read again
        order = [m for m in seen if isinstance(m, (PumpUpdated, DataLoaded))]
        assert [type(m) for m in order] == [PumpUpdated, DataLoaded]  # the pump first, then the fleet
        quick, full = order[0].forecast, order[1].forecast.pump(pf.serial)
        assert quick.serial == pf.serial
        quick_kind = next(k for k in quick.kinds if k.kind is Kind.CASE_DRAIN)
        assert quick_kind.latest_on == TODAY and quick_kind.n_readings == pf.worst.n_readings + 1
        # The quick forecast is the fleet view's own (pooled per model, as forecast_fleet does):
        # same status and dates as the whole-fleet forecast that follows it.
        assert quick.status == full.status
        for a, b in zip(quick.kinds, full.kinds):
            assert (a.kind, a.outcome, a.p10_date, a.p50_date, a.p90_date) == (b.kind, b.outcome, b.p10_date, b.p50_date, b.p90_date)
        assert app.refreshing is False and app.pump_forecast(pf.serial) == full
        # Nothing else was written: the snapshot built in memory (no re-read) is the store's own.
        fresh = demo_store.fleet()
        assert order[1].fleet.readings == fresh.readings and order[1].fleet.change_count == fresh.change_count


async def test_a_reading_saved_after_another_users_write_is_forecast_on_a_fresh_read(demo_store, demo_db, tmp_path):
    from logbook.store import Store

    app = RecordingApp(demo_store, today=TODAY, poll_seconds=0, blink=False, export_dir=tmp_path)
    app.seen = seen = []
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        pf = crossing_pump(app)
        model = app.fleet.models[pf.model]
        with Store(demo_db, create=False, user="someone else") as elsewhere:  # another user's change
            elsewhere.update_model(pf.model, reading_interval_days=90)
        form = await open_form(app, pilot, pf.serial, "r")
        fill(form, machine_hours=f"{meter_now(app, pf.machine):.0f}", case_drain=f"{model.limit(Kind.CASE_DRAIN).value * 0.8:.2f}",
             oil_temp=f"{model.ref_temp_c:g}", test_pressure=f"{model.ref_pressure_bar:g}",
             test_speed=f"{model.test_speed_rpm:g}", oil_grade=str(model.oil_grade), oil_vi=f"{model.oil_vi:g}")
        await settle(app, pilot)
        seen.clear()
        await pilot.press("f2")  # a worn-looking case drain is asked about first (issue 14)
        await settle(app, pilot)
        await pilot.press("f2")  # saved as typed
        await settle(app, pilot)
        loaded = [m for m in seen if isinstance(m, DataLoaded)]
        fresh = demo_store.fleet()
        assert len(loaded) == 1
        assert loaded[0].fleet.models[pf.model].reading_interval_days == 90  # the other user's change was read
        assert loaded[0].fleet.readings == fresh.readings


async def test_one_changed_pump_is_rewritten_in_place_and_a_covered_view_catches_up(demo_app):
    from dataclasses import replace

    from logbook.tui.screens.pump import PumpScreen

    app = demo_app
    async with app.run_test(size=(120, 40)) as pilot:
        await settle(app, pilot)
        fleet_view = app.screen
        table = fleet_view.query_one("#fleet-table", DataTable)
        keys = list(table.rows)
        first, second = fleet_view.serials[3], fleet_view.serials[4]

        def with_hours(serial: str, hours: float):
            pumps = tuple(replace(p, hours_since_overhaul=hours) if p.serial == serial else p for p in app.forecast.pumps)
            app.forecast = replace(app.forecast, pumps=pumps)
            app.data_generation += 1

        def hours_cell(serial: str) -> str:
            return str(table.get_cell_at((fleet_view.serials.index(serial), list(table.columns).index("hours"))))

        with_hours(first, 12345.0)  # hours do not move a pump in the most-urgent-first order
        await pilot.pause()
        assert hours_cell(first) == "12,345" and list(table.rows) == keys  # same rows, one rewritten
        app.push_screen(PumpScreen(second))
        await settle(app, pilot)
        with_hours(second, 23456.0)
        await pilot.pause()
        assert hours_cell(second) != "23,456"  # covered: not redrawn behind the pump view
        app.pop_screen()
        await settle(app, pilot)
        assert hours_cell(second) == "23,456"
