"""Fixtures for the interface tests: the demo fleet at a fixed today, built once per
session and copied for each test (loading it takes a few seconds)."""

from __future__ import annotations

import os
import shutil
from datetime import date
from pathlib import Path

import pytest

from logbook.store import Store
from logbook.tui.app import make_app
from logbook.tui.screens import entry

TODAY = date(2026, 12, 1)
SIZES = {"small": (80, 24), "large": (120, 40)}

os.environ.setdefault("TEXTUAL_ANIMATIONS", "none")


@pytest.fixture(autouse=True)
def no_check_delay(monkeypatch):
    """Forms run their dry run as soon as a value changes (a person typing gets
    ``CHECK_DELAY_S`` of quiet first): tests wait for the check itself (``settle``), never the clock."""
    monkeypatch.setattr(entry, "CHECK_DELAY_S", 0.0)


@pytest.fixture(scope="session")
def demo_db_master(tmp_path_factory) -> Path:
    import demo_fleet

    path = tmp_path_factory.mktemp("demo") / "demo.db"
    with Store(path, create=True, user="demo") as store:
        reports = demo_fleet.load(store, today=TODAY, seed=7)
        problems = [str(p) for r in reports.values() for p in r.problems]
        assert problems == []
        store.conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    return path


@pytest.fixture
def demo_db(demo_db_master, tmp_path) -> Path:
    path = tmp_path / "demo.db"
    shutil.copy(demo_db_master, path)
    return path


@pytest.fixture
def demo_store(demo_db):
    store = Store(demo_db, create=False, user="tester")
    yield store
    store.close()


@pytest.fixture
def demo_app(demo_store, tmp_path):
    """The app over a copy of the demo fleet: no change poll, no cursor blink, exports to tmp."""
    return make_app(demo_store, today=TODAY, poll_seconds=0, blink=False, export_dir=tmp_path)


async def settle(app, pilot) -> None:
    """Wait for every worker (fleet load, forecast, checks, saves) and the redraw after it.
    The first load starts only once the first frame is drawn: wait for it to start too."""
    for _ in range(200):
        if getattr(app, "forecast", None) is not None or getattr(app, "trouble", ""):
            break
        await pilot.pause(0.01)
        await app.workers.wait_for_complete()
    for _ in range(3):
        await app.workers.wait_for_complete()
        await pilot.pause()


async def press_on_fleet(app, pilot, key: str):
    """From the fleet view once loaded: the fleet's order of serials, then the screen ``key`` opens."""
    await settle(app, pilot)
    order = list(app.screen.serials)
    await pilot.press(key)
    await settle(app, pilot)
    return order, app.screen

