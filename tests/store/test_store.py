"""Store round trip, migrations, and validation that writes nothing on rejection."""

from __future__ import annotations

import dataclasses
import os
import sqlite3
import stat
from datetime import date

import pytest

from logbook.imports import import_bytes
from logbook.model import Event, EventKind, InputRejected, Kind, Reading
from logbook.store import DatabaseMissing, DatabaseTooNew, Store
from logbook.store.schema import SCHEMA_VERSION

from .conftest import TODAY


def test_migrates_an_empty_file_and_sets_pragmas(tmp_path):
    path = tmp_path / "new.db"
    with Store(path) as s:
        assert s.schema_version() == SCHEMA_VERSION
        assert s.conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
        assert s.conn.execute("PRAGMA foreign_keys").fetchone()[0] == 1
        assert s.conn.execute("PRAGMA busy_timeout").fetchone()[0] == 5000
        assert s.counts() == {"models": 0, "machines": 0, "pumps": 0, "fitments": 0, "readings": 0, "events": 0}
    # Readable and writable by owner and group only.
    assert stat.S_IMODE(os.stat(path).st_mode) & 0o007 == 0


def test_missing_and_too_new_databases_are_refused(tmp_path):
    with pytest.raises(DatabaseMissing, match="logbook init"):
        Store(tmp_path / "nope.db", create=False)
    path = tmp_path / "future.db"
    conn = sqlite3.connect(path)
    conn.execute(f"PRAGMA user_version = {SCHEMA_VERSION + 1}")
    conn.close()
    with pytest.raises(DatabaseTooNew, match="newer"):
        Store(path)


def test_round_trip_of_a_reading(store):
    r = Reading(
        id=None, serial="S-100", taken_on=date(2025, 8, 1), machine_hours=1900, case_drain_lpm=4.25,
        servo_pressure_bar=24.5, neutral_drift_bar=-1.25, charge_pressure_bar=22.0, oil_temp_c=52.5,
        test_pressure_bar=395.0, test_speed_rpm=2000.0, oil_grade=68, oil_vi=140.0, iso4406="18/16/13",
        technician="Ana", note="after filter change",
    )
    saved = store.add_reading(r, today=TODAY)
    assert saved.id is not None and saved.machine == "M-1" and saved.entered_by == "tester"
    assert dataclasses.replace(saved, id=None, entered_by="", entered_at=None, machine=None) == r
    assert store.readings("S-100")[-1] == saved
    trail = store.audit_trail("S-100")
    assert trail[-1]["action"] == "insert" and trail[-1]["who"] == "tester"


def test_fleet_snapshot_and_history(store):
    fleet = store.fleet()
    assert set(fleet.pumps) == {"S-100", "S-200", "S-300"}
    h = fleet.history("S-100")
    assert [r.machine_hours for r in h.readings] == [1100, 1500]
    assert h.fitments[0].machine == "M-1" and h.model.limit(Kind.SERVO_PRESSURE).direction == "below"


def _count(store):
    return store.counts()["readings"], store.counts()["events"], len(store.audit_trail())


BAD = [
    # (field named in the message, reading changes)
    ("case_drain", dict(case_drain_lpm=500.0)),  # above theoretical flow 90*2000/1000 = 180 L/min
    ("date", dict(taken_on=date(2027, 1, 1))),  # in the future
    ("machine_hours", dict(machine_hours=1050.0)),  # below 1100 h read on 2025-02-01
    ("machine_hours", dict(taken_on=date(2025, 3, 1), machine_hours=1600.0)),  # above the 1500 h read later
    ("serial", dict(serial="S-999")),  # unknown
    ("oil_temp", dict(oil_temp_c=None)),  # case drain without its test conditions
    ("date", dict(taken_on=date(2024, 12, 1))),  # before the pump was fitted
    ("test_pressure", dict(test_pressure_bar=900.0)),  # above rated +25 %
]


@pytest.mark.parametrize("field,changes", BAD)
def test_each_validation_rule_rejects_and_writes_nothing(store, field, changes):
    base = Reading(
        id=None, serial="S-100", taken_on=date(2025, 9, 1), machine_hours=2000, case_drain_lpm=4.0,
        oil_temp_c=50, test_pressure_bar=400, test_speed_rpm=2000,
    )
    before = _count(store)
    with pytest.raises(InputRejected) as err:
        store.add_reading(dataclasses.replace(base, **changes), today=TODAY)
    assert any(p.field.startswith(field) or field in p.field for p in err.value.problems), str(err.value)
    assert _count(store) == before


def test_hour_meter_replacement_allows_the_meter_to_restart(store):
    store.add_event(Event(id=None, kind=EventKind.METER_REPLACED, happened_on=date(2025, 6, 1), machine="M-1",
                          hours=1600, to_hours=0), today=TODAY)
    saved = store.add_reading(Reading(id=None, serial="S-100", taken_on=date(2025, 7, 1), machine_hours=200,
                                      servo_pressure_bar=25.0), today=TODAY)
    assert saved.machine_hours == 200
    with pytest.raises(InputRejected, match="runs backwards"):
        store.add_reading(Reading(id=None, serial="S-100", taken_on=date(2025, 8, 1), machine_hours=150,
                                  servo_pressure_bar=25.0), today=TODAY)


def test_move_closes_the_fitment_and_carries_pump_hours(store):
    store.add_event(Event(id=None, kind=EventKind.MOVE, happened_on=date(2025, 6, 1), serial="S-100", hours=1700,
                          to_machine="M-2", to_position="swing", to_hours=5600), today=TODAY)
    fits = store.fitments(serial="S-100")
    assert [(f.machine, f.removed_on) for f in fits] == [("M-1", date(2025, 6, 1)), ("M-2", None)]
    # 700 machine hours on M-1 since fitting at 1000 h with 0 pump hours.
    assert fits[1].pump_hours_at_fit == pytest.approx(700)
    r = store.add_reading(Reading(id=None, serial="S-100", taken_on=date(2025, 7, 1), machine_hours=5700,
                                  servo_pressure_bar=25.0), today=TODAY)
    assert r.machine == "M-2"


def test_reimport_adds_nothing_and_conflicts_are_refused(store):
    from .conftest import READINGS

    report = import_bytes(store, "readings", READINGS, name="readings.csv", today=TODAY)
    assert (report.added, report.already_present, report.problems) == (0, 3, [])
    changed = READINGS.replace(b"3.1,26", b"3.2,26")
    before = _count(store)
    report = import_bytes(store, "readings", changed, name="readings.csv", today=TODAY)
    assert report.added == 0 and report.problems[0].line == 2 and "other values" in report.problems[0].allowed
    assert _count(store) == before


