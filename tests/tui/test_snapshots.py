"""Screens as text at 80x24 and 120x40 on the demo fleet (fixed today), compared with
reviewed baselines in __snapshots__/ (LOGBOOK_UPDATE_SNAPSHOTS=1 rewrites them)."""

from __future__ import annotations

import pytest

from tests.tui.conftest import SIZES, settle
from tests.tui.screen_text import assert_snapshot, screen_text

VIEWS = {
    "fleet": (),
    "pump": ("down", "down", "enter"),  # the third most urgent pump: a forecast crossing
    "reading": ("down", "down", "r"),
    "event": ("down", "down", "e"),
    "help": ("f1",),
    "filters": ("f",),
    "plan": ("p",),
    "models": ("m",),
}


@pytest.mark.parametrize("size_name", sorted(SIZES))
@pytest.mark.parametrize("view", sorted(VIEWS))
async def test_screen_matches_its_baseline(demo_app, view, size_name):
    async with demo_app.run_test(size=SIZES[size_name]) as pilot:
        await settle(demo_app, pilot)
        await pilot.press(*VIEWS[view])
        await settle(demo_app, pilot)
        text = screen_text(demo_app)
    assert text.count("\n") == SIZES[size_name][1]
    assert_snapshot(f"{view}-{size_name}", text)
