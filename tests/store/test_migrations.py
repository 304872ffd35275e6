"""Migrations: a list of statements run one by one; a database left at any earlier
version migrates forward with its rows, to the same schema a new file gets."""

from __future__ import annotations

import sqlite3
from datetime import date

import pytest

import logbook.store.core as core
from logbook.model import Event, EventKind, Reading
from logbook.store import Store
from logbook.store.schema import MIGRATIONS, SCHEMA_VERSION

from .conftest import TODAY

# Rows every schema version can hold (all these tables and columns exist from version 1).
ROWS = (
    "INSERT INTO models (code, displacement_cc, rated_pressure_bar, max_speed_rpm, ref_temp_c, ref_pressure_bar, "
    "oil_grade, oil_vi, test_speed_rpm, test_temp_min_c, test_temp_max_c) VALUES ('QX-1', 90, 400, 2200, 50, 400, 46, 100, 2000, 40, 60)",
    "INSERT INTO machines (unit, site) VALUES ('U-7', 'East Pit')",
    "INSERT INTO pumps (serial, model) VALUES ('P-1', 'QX-1')",
    "INSERT INTO fitments (serial, machine, position, fitted_on, machine_hours_at_fit, pump_hours_at_fit) "
    "VALUES ('P-1', 'U-7', 'main', '2025-01-10', 1000, 0)",
    "INSERT INTO readings (serial, taken_on, machine, machine_hours, case_drain_lpm, servo_pressure_bar, entered_by, entered_at) "
    "VALUES ('P-1', '2025-03-01', 'U-7', 1200, 3.5, 26.0, 'old', '2025-03-01T10:00:00+00:00')",
    "INSERT INTO events (kind, happened_on, serial, machine, hours, entered_by, entered_at) "
    "VALUES ('oil_change', '2025-04-01', 'P-1', 'U-7', 1300, 'old', '2025-04-01T10:00:00+00:00')",
)


def _database_at(path, version: int) -> None:
    """A file left at ``version`` by an earlier program: its migrations as one script each."""
    conn = sqlite3.connect(path)
    for migration in MIGRATIONS[:version]:
        conn.executescript(";\n".join(migration) + ";")
    conn.execute(f"PRAGMA user_version = {version}")
    if version:
        for row in ROWS:
            conn.execute(row)
    conn.commit()
    conn.close()


def _schema(conn: sqlite3.Connection) -> dict[str, object]:
    """Tables with their columns (name, type, not null, default, key) and indexes with their SQL, spaces folded."""
    found: dict[str, object] = {}
    for kind, name, sql in conn.execute("SELECT type, name, sql FROM sqlite_master WHERE name NOT LIKE 'sqlite_%'"):
        if kind == "table":
            found[name] = [tuple(r[1:]) for r in conn.execute(f"PRAGMA table_info({name})")]
        else:
            found[name] = " ".join((sql or "").split())
    return found


def test_migrations_are_lists_of_single_statements():
    assert SCHEMA_VERSION == len(MIGRATIONS) >= 4
    for number, migration in enumerate(MIGRATIONS, 1):
        assert isinstance(migration, (list, tuple)) and migration, number
        for statement in migration:
            # sqlite3.complete_statement (Python docs): True once the text ends one whole statement
            assert isinstance(statement, str) and not sqlite3.complete_statement(statement), (number, statement)
            assert sqlite3.complete_statement(statement + ";"), (number, statement)


@pytest.mark.parametrize("version", range(SCHEMA_VERSION))
def test_a_database_at_every_earlier_version_migrates_with_its_rows(tmp_path, version):
    fresh = tmp_path / "fresh.db"
    with Store(fresh) as s:
        expected = _schema(s.conn)
    old = tmp_path / f"v{version}.db"
    _database_at(old, version)
    with Store(old) as s:
        assert s.schema_version() == SCHEMA_VERSION
        assert _schema(s.conn) == expected
        if version:
            assert list(s.models()) == ["QX-1"]
            (reading,) = s.readings("P-1")
            assert (reading.taken_on, reading.machine_hours, reading.case_drain_lpm, reading.servo_pressure_bar) == (
                date(2025, 3, 1), 1200, 3.5, 26.0)
            assert reading.nu40_cst is None and reading.nu100_cst is None  # migration 4: nullable, none before
            (event,) = s.fleet().events
            assert event.serial_in is None
    # Opening again finds nothing to do.
    with Store(old) as s:
        assert s.schema_version() == SCHEMA_VERSION and s.commits == []


def test_a_semicolon_inside_a_statement_is_run_as_written(tmp_path, monkeypatch):
    """Splitting migration text on ";" would cut this statement in two (and fail)."""
    extra = ("INSERT INTO settings (key, value) VALUES ('note', 'one; two')",)
    monkeypatch.setattr(core, "MIGRATIONS", [*MIGRATIONS, extra])
    monkeypatch.setattr(core, "SCHEMA_VERSION", SCHEMA_VERSION + 1)
    with Store(tmp_path / "semi.db") as s:
        assert s.schema_version() == SCHEMA_VERSION + 1
        assert s.conn.execute("SELECT value FROM settings WHERE key = 'note'").fetchone()[0] == "one; two"


def test_a_failing_migration_leaves_the_file_at_its_version(tmp_path, monkeypatch):
    path = tmp_path / "v1.db"
    _database_at(path, 1)
    broken = ("ALTER TABLE readings ADD COLUMN extra_one REAL", "ALTER TABLE no_such_table ADD COLUMN x REAL")
    monkeypatch.setattr(core, "MIGRATIONS", [*MIGRATIONS, broken])
    monkeypatch.setattr(core, "SCHEMA_VERSION", SCHEMA_VERSION + 1)
    with pytest.raises(Exception):
        Store(path)
    conn = sqlite3.connect(path)
    try:
        assert conn.execute("PRAGMA user_version").fetchone()[0] == 1
        assert "extra_one" not in {r[1] for r in conn.execute("PRAGMA table_info(readings)")}
        assert "costs" not in {r[0] for r in conn.execute("SELECT name FROM sqlite_master")}
    finally:
        conn.close()


def test_measured_viscosity_and_the_exchanged_serial_are_stored_and_read_back(store):
    """Migration 4: the store writes the new fields (None by default) and every read returns them."""
    saved = store.add_reading(Reading(id=None, serial="S-100", taken_on=date(2025, 8, 1), machine_hours=1900,
                                      servo_pressure_bar=24.5, nu40_cst=44.1, nu100_cst=6.7), today=TODAY)
    plain = store.add_reading(Reading(id=None, serial="S-200", taken_on=date(2025, 8, 1), machine_hours=5900,
                                      servo_pressure_bar=24.0), today=TODAY)
    assert (saved.nu40_cst, saved.nu100_cst) == (44.1, 6.7) and (plain.nu40_cst, plain.nu100_cst) == (None, None)
    by_id = {r.id: r for r in store.fleet().readings}
    assert (by_id[saved.id].nu40_cst, by_id[saved.id].nu100_cst) == (44.1, 6.7)
    assert by_id[plain.id].nu40_cst is None and by_id[plain.id].nu100_cst is None
    # A correction keeps them (nothing the user entered is lost) and can change them.
    fixed = store.correct_reading(saved.id, reason="servo typo", today=TODAY, servo_pressure_bar=25.0)
    assert (fixed.nu40_cst, fixed.nu100_cst) == (44.1, 6.7)
    fixed = store.correct_reading(fixed.id, reason="lab report", today=TODAY, nu40_cst=45.0)
    assert (fixed.nu40_cst, fixed.nu100_cst) == (45.0, 6.7)
    assert store.pump_trail("S-100")[-1].after["nu40_cst"] == 45.0
    ex = store.add_event(Event(id=None, kind=EventKind.EXCHANGE, happened_on=date(2025, 9, 1), serial="S-100",
                               hours=2000, serial_in="S-300"), today=TODAY)
    assert ex.serial_in == "S-300"
    (read,) = [e for e in store.fleet().events if e.id == ex.id]
    assert read.serial_in == "S-300"
    assert store.fleet_for_pump("S-100").events[-1].serial_in == "S-300"
    (audited,) = [t for t in store.pump_trail("S-100") if t.table == "events" and t.key == str(ex.id)]
    assert audited.after["serial_in"] == "S-300"


def test_a_clean_column_batch_without_viscosity_still_writes_the_new_columns_as_blank(store):
    """The column-wise import lane writes every reading column (it declines batches that carry a viscosity)."""
    columns = {"serial": ["S-100", "S-200"], "date": [date(2025, 8, 1), date(2025, 8, 1)], "machine_hours": [1900.0, 5900.0],
               "servo_pressure": [24.5, 24.0]}
    report = store.add_reading_columns(columns, today=TODAY, lines=[2, 3], source=("r.csv", "0" * 64))
    assert report is not None and report.added == 2
    got = {r.serial: (r.servo_pressure_bar, r.nu40_cst, r.nu100_cst) for r in store.readings() if r.taken_on == date(2025, 8, 1)}
    assert got == {"S-100": (24.5, None, None), "S-200": (24.0, None, None)}
