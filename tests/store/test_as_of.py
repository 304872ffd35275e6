"""A forecast as of a past day equals one made on a copy of the database cut back to that day.

The cut copy is made here with plain SQL (independently of logbook.asof): every reading,
event and fitment dated after the day goes, fitments removed after it are reopened, and
corrections and removals entered after it are undone.
"""

from __future__ import annotations

import shutil
import sqlite3
from datetime import date, datetime

import pytest

from demo_fleet.generate import load as load_demo
from logbook.analysis.fleet import forecast_fleet
from logbook.store import Store

DEMO_TODAY = date(2026, 12, 1)


@pytest.fixture(scope="module")
def demo_master(tmp_path_factory):
    path = tmp_path_factory.mktemp("asof") / "demo.db"
    store = Store(path, user="tester")
    load_demo(store, DEMO_TODAY)
    store.close()
    return path


def _cut_copy(master, dest, day: date):
    """Copy of ``master`` holding only what stood on ``day`` (independent of logbook.asof)."""
    shutil.copy(master, dest)
    con = sqlite3.connect(dest)
    d = day.isoformat()
    end = day.isoformat() + "T99"  # every time stamp of that day sorts before this
    with con:
        # corrections entered after the day: drop the correcting row, reinstate what it replaced
        for (new_id,) in con.execute(
            "SELECT id FROM readings WHERE entered_at > ? AND id IN (SELECT superseded_by FROM readings)", (end,)
        ).fetchall():
            con.execute("DELETE FROM readings WHERE id = ?", (new_id,))  # first: one current row per reading
            con.execute("UPDATE readings SET superseded_by = NULL WHERE superseded_by = ?", (new_id,))
        # removals entered after the day are undone
        for table in ("readings", "events"):
            for (key,) in con.execute(
                "SELECT row_key FROM audit WHERE action = 'remove' AND table_name = ? GROUP BY row_key HAVING min(at) > ?",
                (table, end),
            ).fetchall():
                con.execute(f"UPDATE {table} SET removed_reason = NULL WHERE id = ?", (int(key),))
        con.execute("UPDATE readings SET superseded_by = NULL WHERE superseded_by IN (SELECT id FROM readings WHERE taken_on > ?)", (d,))
        con.execute("DELETE FROM readings WHERE taken_on > ?", (d,))
        con.execute("DELETE FROM events WHERE happened_on > ?", (d,))
        con.execute("DELETE FROM fitments WHERE fitted_on > ?", (d,))
        con.execute("UPDATE fitments SET removed_on = NULL, machine_hours_at_removal = NULL WHERE removed_on > ?", (d,))
    con.close()


def _figures(fleet, day):
    fc = forecast_fleet(fleet, day)
    out = {}
    for pf in fc.pumps:
        for kf in pf.kinds:
            out[(pf.serial, kf.kind.value)] = (kf.outcome, kf.latest_value, kf.p10_hours, kf.p50_hours, kf.p90_hours,
                                               kf.p10_date, kf.p50_date, kf.p90_date)
    return out


@pytest.mark.parametrize("day", [date(2025, 3, 15), date(2025, 11, 30), date(2026, 6, 1)])
def test_forecast_as_of_equals_forecast_on_a_cut_copy(demo_master, tmp_path, day):
    store = Store(demo_master, user="tester")
    try:
        as_of = _figures(store.fleet_as_of(day), day)
    finally:
        store.close()
    cut = tmp_path / "cut.db"
    _cut_copy(demo_master, cut, day)
    store = Store(cut, user="tester")
    try:
        expected = _figures(store.fleet(), day)
    finally:
        store.close()
    assert as_of == expected
    assert len(as_of) > 50  # the day lies inside the demo's history: many pumps have readings by then


def test_as_of_between_a_reading_and_its_correction_uses_the_original(demo_master, tmp_path):
    path = tmp_path / "corr.db"
    shutil.copy(demo_master, path)
    store = Store(path, user="tester")
    try:
        reading = next(r for r in store.readings() if r.case_drain_lpm is not None and r.taken_on < date(2026, 1, 1))
        fixed = store.correct_reading(reading.id, reason="typed in the wrong unit", today=DEMO_TODAY,
                                      case_drain_lpm=round(reading.case_drain_lpm * 1.5, 2))
        entered_on = datetime.fromisoformat(str(fixed.entered_at)).date() if fixed.entered_at else DEMO_TODAY
        before = store.fleet_as_of(reading.taken_on)
        after = store.fleet_as_of(max(entered_on, reading.taken_on))
        removed = store.remove_reading(fixed.id, reason="meter was faulty")
        assert removed.removed_reason
        still = store.fleet_as_of(max(entered_on, reading.taken_on))
    finally:
        store.close()

    def value_of(fleet):
        return [r.case_drain_lpm for r in fleet.readings if r.serial == reading.serial and r.taken_on == reading.taken_on]

    assert value_of(before) == [reading.case_drain_lpm]  # the correction was not known yet
    assert value_of(after) == [fixed.case_drain_lpm]
    # the removal was entered on the same day as the correction: on that day the reading is gone
    assert value_of(still) == []

    # and on a cut copy of the same day before the correction, the same forecast results
    cut = tmp_path / "cut.db"
    _cut_copy(path, cut, reading.taken_on)
    store = Store(cut, user="tester")
    try:
        assert _figures(store.fleet(), reading.taken_on) == _figures(before, reading.taken_on)
    finally:
        store.close()
