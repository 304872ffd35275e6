"""The fleet's readings read column-wise (logbook.columns.ReadingColumns): the same
readings as the rows SQLite holds, the same engine results as from a tuple of records."""

from __future__ import annotations

import shutil
import sqlite3
from dataclasses import replace
from datetime import date, datetime

import numpy as np
import pytest

from logbook.analysis.fleet import forecast_fleet
from logbook.analysis.timeline import Timeline
from logbook.cli import main
from logbook.columns import FIELDS, ReadingColumns
from logbook.model import Reading
from logbook.store import Store

from .conftest import TODAY

DEMO_DAY = "2026-12-01"


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    path = tmp_path_factory.mktemp("columns") / "demo.db"
    assert main(["--db", str(path), "--today", DEMO_DAY, "demo", "--no-ui"]) == 0
    return path


def _by_hand(path) -> list[Reading]:
    """The current readings as Python's sqlite3 gives the rows (sqlite3.Row by column name), in
    the store's order, each field converted the way the standard library reads it."""
    conn = sqlite3.connect(path)
    conn.row_factory = sqlite3.Row
    try:
        rows = conn.execute("SELECT * FROM readings WHERE superseded_by IS NULL AND removed_reason IS NULL "
                            "ORDER BY taken_on, machine_hours, id").fetchall()
    finally:
        conn.close()
    fields = [f for f in Reading.__dataclass_fields__ if f not in ("taken_on", "entered_at")]
    return [Reading(taken_on=date.fromisoformat(r["taken_on"]),
                    entered_at=datetime.fromisoformat(r["entered_at"]) if r["entered_at"] else None,
                    **{f: r[f] for f in fields}) for r in rows]  # fmt: skip


def test_the_fleet_read_holds_every_current_reading_as_sqlite_gives_it(demo):
    expected = _by_hand(demo)
    with Store(demo) as store:
        fleet = store.fleet()
    assert isinstance(fleet.readings, ReadingColumns)
    assert len(fleet.readings) == len(expected) > 1000
    assert fleet.readings == tuple(expected) and tuple(expected) == fleet.readings  # both directions
    assert list(fleet.readings) == expected
    # One record at a time, before all are made (the engine asks for a few by index).
    with Store(demo) as store:
        fresh = store.fleet().readings
    assert [fresh[i] for i in (0, 7, -1, -len(expected))] == [expected[i] for i in (0, 7, -1, -len(expected))]
    assert fresh[3:6] == tuple(expected[3:6])
    with pytest.raises(IndexError):
        fresh[len(expected)]
    # The columns themselves: days as ordinals, NaN where no value.
    assert fresh.day.tolist() == [r.taken_on.toordinal() for r in expected]
    drift = fresh.number("neutral_drift_bar")
    assert [None if np.isnan(v) else v for v in drift.tolist()] == [r.neutral_drift_bar for r in expected]


def test_the_columns_cannot_be_changed_in_place(demo):
    with Store(demo) as store:
        columns = store.fleet().readings
    with pytest.raises(ValueError):
        columns.number("case_drain_lpm")[0] = 99.0
    with pytest.raises(ValueError):
        columns.day[0] = 1


def test_each_distinct_text_is_held_once_with_the_same_values(demo):
    """SQLite hands every row its own copy of a serial or a technician; the columns keep one object
    per distinct text (the copies would hold most of a large fleet's read), values unchanged."""
    expected = _by_hand(demo)
    with Store(demo) as store:
        columns = store.fleet().readings
    serials = columns.text("serial")
    assert list(serials) == [r.serial for r in expected]
    assert list(columns.text("technician")) == [r.technician for r in expected]
    assert len({id(s) for s in serials}) == len(set(serials)) < len(serials)


def test_the_engine_gives_the_same_forecast_from_columns_and_from_records(demo):
    with Store(demo) as store:
        fleet = store.fleet()
    records = replace(fleet, readings=tuple(fleet.readings))
    today = date.fromisoformat(DEMO_DAY)
    a, b = Timeline(fleet.fitments, fleet.readings, fleet.events), Timeline(records.fitments, records.readings, records.events)
    assert sorted(a.serial_index) == sorted(b.serial_index)
    for name in ("day", "meter", "temp", "dp", "grade", "vi", "nu40", "nu100", "hours", "latest"):
        assert np.array_equal(getattr(a, name), getattr(b, name), equal_nan=True), name
    names_a, names_b = ({code: s for s, code in t.serial_index.items()} for t in (a, b))
    assert [names_a[c] for c in a.serial.tolist()] == [names_b[c] for c in b.serial.tolist()]
    assert forecast_fleet(fleet, today) == forecast_fleet(records, today)


def test_an_empty_store_reads_an_empty_fleet(tmp_path):
    with Store(tmp_path / "empty.db") as store:
        fleet = store.fleet()
    assert len(fleet.readings) == 0 and list(fleet.readings) == [] and fleet.readings == ()
    assert forecast_fleet(fleet, TODAY).pumps == ()


def test_one_pump_and_one_reading_come_through_the_same_columns(store):
    saved = store.add_reading(Reading(id=None, serial="S-100", taken_on=date(2025, 8, 1), machine_hours=1900,
                                      servo_pressure_bar=24.5, oil_grade=68, nu40_cst=66.0), today=TODAY)
    assert store.reading(saved.id) == saved and store.reading(10**6) is None
    assert isinstance(saved.oil_grade, int) and isinstance(saved.id, int) and saved.superseded_by is None
    mine = store.readings("S-100")
    assert [r.serial for r in mine] == ["S-100"] * 3 and mine[-1] == saved
    assert [r.taken_on for r in mine] == sorted(r.taken_on for r in mine)


def test_corrected_readings_count_the_same_from_columns_and_from_records(demo, tmp_path):
    """A fleet holding corrected originals beside their corrections (as bench_fleet's does): the
    timeline leaves the originals out whichever form the readings come in."""
    copy = tmp_path / "corrected.db"
    shutil.copy(demo, copy)
    today = date.fromisoformat(DEMO_DAY)
    with Store(copy, user="tester") as store:
        fleet = store.fleet()
        for r in list(fleet.readings)[::97]:
            if r.servo_pressure_bar is not None:
                store.correct_reading(r.id, reason="gauge misread", today=today, servo_pressure_bar=r.servo_pressure_bar + 0.5)
        history, _ = store.fleet_history()
        rows = store.conn.execute(
            f"SELECT {', '.join(FIELDS)} FROM readings WHERE removed_reason IS NULL ORDER BY taken_on, machine_hours, id").fetchall()
    columns = replace(history, readings=ReadingColumns.from_rows(rows))
    records = replace(history, readings=tuple(r for r in history.readings if r.removed_reason is None))
    assert sum(r.superseded_by is not None for r in records.readings) > 10
    assert columns.readings == records.readings
    assert forecast_fleet(columns, today) == forecast_fleet(records, today)
