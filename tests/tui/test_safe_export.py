"""The plan view's export writes through logbook.outfile: never over the database, even
when a file in the export folder is a symbolic link to it."""

from __future__ import annotations

import hashlib
import os

from logbook.tui.app import make_app
from logbook.tui.screens.plan import PlanScreen
from tests.tui.conftest import TODAY, settle
from tests.tui.test_entry import text


def _digest(path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


async def _export(app, pilot) -> PlanScreen:
    await settle(app, pilot)
    await pilot.press("p")
    await settle(app, pilot)
    assert isinstance(app.screen, PlanScreen)
    await pilot.press("x")
    await settle(app, pilot)
    await pilot.press("enter")  # the suggested name: every format, Markdown first
    await settle(app, pilot)
    return app.screen


async def test_the_export_refuses_a_link_to_the_database(demo_store, demo_db, tmp_path):
    folder = tmp_path / "exports"
    folder.mkdir()
    link = folder / f"logbook-plan-{TODAY.isoformat()}.md"
    link.symlink_to(demo_db)
    before = _digest(demo_db)
    app = make_app(demo_store, today=TODAY, poll_seconds=0, blink=False, export_dir=folder)
    async with app.run_test(size=(120, 40)) as pilot:
        screen = await _export(app, pilot)
        shown = " ".join(text(screen.query_one("#status-line")).split())
    assert shown.startswith("Not exported") and "destroy the logbook" in shown and str(link) in shown
    assert link.is_symlink() and _digest(demo_db) == before
    assert demo_store.counts()["readings"] > 1000
    assert sorted(os.listdir(folder)) == [link.name]  # no csv either, no partial file
