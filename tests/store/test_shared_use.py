"""Several processes on one database: concurrent writers, readers during a write,
noticing other users' changes, and validation that cannot rest on stale reads."""

from __future__ import annotations

import sqlite3
import subprocess
import sys
import textwrap
import time
from datetime import date

import pytest

from logbook.model import Reading
from logbook.store import DatabaseBusy, Store
from logbook.store.bulk import _Declined
from logbook.store.schema import SCHEMA_VERSION

from .conftest import MODELS, READINGS, TODAY, load

WRITERS, PER_WRITER = 4, 500

_WRITER = textwrap.dedent(
    """
    import sys
    from datetime import date, timedelta
    from logbook.model import Reading
    from logbook.store import Store

    path, n, count = sys.argv[1], int(sys.argv[2]), int(sys.argv[3])
    start = date(2020, 1, 1)
    with Store(path, create=False, user=f"writer{n}") as store:
        for k in range(count):
            store.add_reading(
                Reading(id=None, serial=f"W-{n}", taken_on=start + timedelta(days=k), machine_hours=100.0 + 10 * k,
                        servo_pressure_bar=25.0 + (k % 7) / 10),
                today=date(2026, 1, 1),
            )
    print("done", n)
    """
)


def _fleet_for_writers(path) -> None:
    machines = "unit,site\n" + "".join(f"W-M{n},Test Yard\n" for n in range(WRITERS))
    pumps = "serial,model,machine,position,fitted_on,machine_hours_at_fit\n" + "".join(
        f"W-{n},TX-90,W-M{n},main,2019-12-01,50\n" for n in range(WRITERS)
    )
    with Store(path, user="setup") as s:
        for table, data in (("models", MODELS), ("machines", machines.encode()), ("pumps", pumps.encode())):
            load(s, table, data)


def test_four_processes_each_writing_500_readings_at_once(tmp_path):
    path = tmp_path / "shared.db"
    _fleet_for_writers(path)
    procs = [
        subprocess.Popen([sys.executable, "-c", _WRITER, str(path), str(n), str(PER_WRITER)],
                         stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
        for n in range(WRITERS)
    ]
    results = [p.communicate(timeout=240) + (p.returncode,) for p in procs]
    for out, err, code in results:
        assert code == 0 and err == "" and out.startswith("done"), err[-2000:]
    with Store(path) as s:
        rows = s.conn.execute("SELECT serial, taken_on, count(*) FROM readings GROUP BY serial, taken_on").fetchall()
        assert len(rows) == WRITERS * PER_WRITER and all(n == 1 for *_, n in rows)
        per_writer = dict(s.conn.execute("SELECT who, count(*) FROM audit WHERE table_name = 'readings' GROUP BY who"))
        assert per_writer == {f"writer{n}": PER_WRITER for n in range(WRITERS)}
        assert s.check() == []


def test_other_processes_commits_are_noticed(store):
    seen_count, seen_version = store.change_count(), store.data_version()
    code = textwrap.dedent(
        f"""
        from datetime import date
        from logbook.model import Reading
        from logbook.store import Store
        with Store({store.path!r}, create=False, user="other") as s:
            s.add_reading(Reading(id=None, serial="S-200", taken_on=date(2025, 6, 1), machine_hours=5600,
                                  servo_pressure_bar=25.0), today=date(2026, 1, 1))
        """
    )
    subprocess.run([sys.executable, "-c", code], check=True, timeout=60)
    assert store.change_count() > seen_count
    assert store.data_version() != seen_version
    # Our own commits do not move data_version (SQLite documents this), but do move change_count.
    version, count = store.data_version(), store.change_count()
    store.add_reading(Reading(id=None, serial="S-200", taken_on=date(2025, 7, 1), machine_hours=5700,
                              servo_pressure_bar=25.0), today=TODAY)
    assert store.data_version() == version and store.change_count() > count


def test_readers_are_not_blocked_by_a_writer_and_writers_give_up_cleanly(store):
    other = sqlite3.connect(store.path, isolation_level=None)
    other.execute("BEGIN IMMEDIATE")  # another user holds the write lock
    try:
        fleet = store.fleet()  # WAL: reading goes on
        assert set(fleet.pumps) == {"S-100", "S-200", "S-300"}
        store.WRITE_ATTEMPTS = 2
        store.conn.execute("PRAGMA busy_timeout = 50")
        before = store.counts()
        started = time.monotonic()
        with pytest.raises(DatabaseBusy, match="stayed locked"):
            store.add_reading(Reading(id=None, serial="S-200", taken_on=date(2025, 6, 1), machine_hours=5600,
                                      servo_pressure_bar=25.0), today=TODAY)
        assert time.monotonic() - started < 5  # bounded
    finally:
        other.execute("ROLLBACK")
        other.close()
    assert store.counts() == before


def test_a_write_racing_another_is_checked_again_under_the_lock(store, tmp_path):
    """Between our check and our write another user records 1600 h on 2025-07-01; our
    1700 h on 2025-06-01 would then make M-1's meter run backwards and must be refused."""
    other = Store(store.path, user="other")
    real_check = store._check_readings
    calls = []

    def check_then_let_the_other_user_write(*args, **kwargs):
        result = real_check(*args, **kwargs)
        if not calls:
            other.add_reading(Reading(id=None, serial="S-100", taken_on=date(2025, 7, 1), machine_hours=1600,
                                      servo_pressure_bar=25.0), today=TODAY)
        calls.append(result)
        return result

    store._check_readings = check_then_let_the_other_user_write
    report = store.add_readings(
        [Reading(id=None, serial="S-100", taken_on=date(2025, 6, 1), machine_hours=1700, servo_pressure_bar=25.0)],
        today=TODAY,
    )
    assert len(calls) == 2 and calls[0].problems == []  # first check passed on the old state
    assert report.added == 0 and "machine_hours" in report.problems[0].field
    assert [r.machine_hours for r in store.readings("S-100")] == [1100, 1500, 1600]
    other.close()


def test_two_stores_creating_one_new_file_at_once(tmp_path):
    path = tmp_path / "new.db"
    code = f"from logbook.store import Store\nStore({str(path)!r}).close()\nprint('ok')"
    procs = [subprocess.Popen([sys.executable, "-c", code], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
             for _ in range(3)]
    outs = [p.communicate(timeout=60) for p in procs]
    assert all(out.strip() == "ok" and err == "" for out, err in outs), outs
    with Store(path) as s:
        assert s.schema_version() == SCHEMA_VERSION and s.check() == []


def test_an_import_writes_one_audit_row_for_the_file(store):
    # The conftest fleet: three readings imported from one file -> one audit row naming it.
    assert store.counts()["readings"] == READINGS.count(b"\n") - 1
    rows = [a for a in store.audit_trail() if a["table_name"] == "readings"]
    assert [a["action"] for a in rows] == ["import"] and '"file": "readings.csv"' in rows[0]["after_json"]


def test_the_same_file_imported_by_two_jobs_at_once_lands_once(tmp_path):
    """Both jobs check the file before either writes; the second, re-checking under the
    lock, finds every row present and writes nothing (no second import row either)."""
    from logbook.imports import import_bytes

    path = tmp_path / "twice.db"
    _fleet_for_writers(path)
    data = ("serial,date,machine_hours,servo_pressure\n" + "".join(
        f"W-{n},2020-01-{d + 1:02d},{100 + d},25\n" for n in range(WRITERS) for d in range(20))).encode()
    first, second = Store(path, user="cron1"), Store(path, user="cron2")
    real_check = second._check_readings

    def first_job_writes_meanwhile(*args, **kwargs):
        result = real_check(*args, **kwargs)
        if not first.readings():
            assert import_bytes(first, "readings", data, name="r.csv", today=TODAY).added == 80
        return result

    def row_by_row(*args, **kwargs):
        raise _Declined  # send the second job down the row-by-row path, where the hook sits

    second._check_readings = first_job_writes_meanwhile
    second._check_columns = row_by_row
    report = import_bytes(second, "readings", data, name="r.csv", today=TODAY)
    assert report.problems == [] and report.added == 0 and report.already_present == 80
    assert second.counts()["readings"] == 80
    assert second.conn.execute("SELECT count(*) FROM imports").fetchone()[0] == 1
    first.close()
    second.close()
