"""Migrations: a list of statements run one by one; a database left at any earlier
version migrates forward with its rows, to the same schema a new file gets."""

from __future__ import annotations

import sqlite3
from datetime import date

import pytest

import logbook.store.core as core
from logbook.store import Store
from logbook.store.schema import MIGRATIONS, SCHEMA_VERSION

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
    assert SCHEMA_VERSION == len(MIGRATIONS) >= 3
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
            assert len(s.fleet().events) == 1
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
