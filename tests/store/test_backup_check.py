"""Online backups while others write, and `logbook check`'s findings."""

from __future__ import annotations

import multiprocessing
import os
import sqlite3
import stat
from datetime import date, timedelta

import pytest

from logbook.cli import main
from logbook.model import Reading
from logbook.store import Store, StoreError

from .conftest import TODAY

BATCH = 10


def _writer(path: str, batches: int, pipe) -> None:
    """Commit ``batches`` transactions of BATCH readings each (one audit row per reading)."""
    with Store(path, create=False, user="writer") as s:
        pipe.send("started")
        for b in range(batches):
            rows = [
                Reading(id=None, serial="S-200", taken_on=date(2025, 6, 1) + timedelta(days=b * BATCH + k),
                        machine_hours=5600.0 + 10 * (b * BATCH + k), servo_pressure_bar=25.0)
                for k in range(BATCH)
            ]
            report = s.add_readings(rows, today=TODAY)
            assert report.added == BATCH, report.problems
    pipe.send("done")


def _writer_holding_a_transaction(path: str, pipe) -> None:
    """Insert rows inside one transaction and keep it open until told to commit."""
    with Store(path, create=False, user="slow") as s:
        with s.transaction():
            s.conn.executemany(
                "INSERT INTO machines (unit, site) VALUES (?, 'Slow Yard')", [(f"SLOW-{i}",) for i in range(50)]
            )
            pipe.send("inside")
            pipe.recv()
    pipe.send("committed")


def _consistent(path) -> tuple[int, int]:
    """A backup opens as a logbook, passes every check, and sits on a commit boundary."""
    with Store(path, create=False) as b:
        assert b.conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        assert b.check() == []
        readings = b.counts()["readings"]
        audited = b.conn.execute(
            "SELECT count(*) FROM audit WHERE table_name = 'readings' AND action = 'insert'"
        ).fetchone()[0]
        return readings, audited


def test_backups_taken_while_a_writer_is_busy_are_consistent(store, tmp_path):
    base = store.counts()["readings"]  # three imported readings, audited by one import row
    ctx = multiprocessing.get_context("fork")
    ours, theirs = ctx.Pipe()
    child = ctx.Process(target=_writer, args=(store.path, 40, theirs))
    child.start()
    assert ours.recv() == "started"
    seen = []
    for i in range(8):
        result = store.backup(tmp_path / f"b{i}.db")
        assert result.integrity == "ok"
        readings, audited = _consistent(result.path)
        # Each commit adds BATCH readings and BATCH audit rows: a snapshot between commits.
        assert readings - base == audited and audited % BATCH == 0
        seen.append(audited)
    child.join(timeout=120)
    assert child.exitcode == 0 and ours.recv() == "done"
    final = store.backup(tmp_path / "final.db")
    assert _consistent(final.path) == (base + 40 * BATCH, 40 * BATCH)
    print(f"readings added by the writer, as seen by the backups: {seen}")


def test_a_backup_leaves_out_a_transaction_still_open(store, tmp_path):
    ctx = multiprocessing.get_context("fork")
    ours, theirs = ctx.Pipe()
    child = ctx.Process(target=_writer_holding_a_transaction, args=(store.path, theirs))
    child.start()
    assert ours.recv() == "inside"
    during = store.backup(tmp_path / "during.db")
    ours.send("commit")
    assert ours.recv() == "committed"
    child.join(timeout=60)
    after = store.backup(tmp_path / "after.db")
    assert during.counts["machines"] == 2 and after.counts["machines"] == 52


def test_backup_refuses_to_overwrite_and_is_private(store, tmp_path):
    dest = tmp_path / "copy.db"
    store.backup(dest)
    assert stat.S_IMODE(os.stat(dest).st_mode) == 0o660
    with pytest.raises(StoreError, match="already exists; give --force"):
        store.backup(dest)
    with pytest.raises(StoreError, match="is a directory"):
        store.backup(tmp_path)
    with pytest.raises(StoreError, match="is the database itself"):
        store.backup(store.path, force=True)
    assert store.backup(dest, force=True).counts["readings"] == 3
    assert sorted(p.name for p in tmp_path.iterdir() if "copy" in p.name) == ["copy.db"]  # no partial files left
    # The copy is one self-contained file (no -wal beside it needed).
    conn = sqlite3.connect(dest)
    assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "delete"
    conn.close()


def test_cli_backup_and_check(store, tmp_path, capsys):
    base = ["--db", store.path, "--today", TODAY.isoformat()]
    assert main([*base, "backup", str(tmp_path / "b.db")]) == 0
    assert main([*base, "backup", str(tmp_path / "b.db")]) == 1
    assert "already exists" in capsys.readouterr().err
    assert main([*base, "check"]) == 0
    assert "no problems found" in capsys.readouterr().out


def _break(store, *statements) -> None:
    conn = sqlite3.connect(store.path, isolation_level=None)
    for sql in statements:
        conn.execute(sql)
    conn.close()


def test_check_finds_what_is_wrong_and_says_where(store, capsys):
    s100 = [r.id for r in store.readings("S-100")]
    _break(
        store,
        # The second reading of S-100 shows fewer hours than the first, on M-1.
        f"UPDATE readings SET machine_hours = 1050 WHERE id = {s100[1]}",
        # S-300 was never fitted, but has a reading.
        "INSERT INTO readings (serial, taken_on, machine, machine_hours, servo_pressure_bar, entered_by, entered_at) "
        "VALUES ('S-300', '2025-04-01', 'M-1', 1200, 25, 'x', '2025-04-01')",
        "INSERT INTO models (code, displacement_cc, rated_pressure_bar, max_speed_rpm, ref_temp_c, ref_pressure_bar, "
        "oil_grade, oil_vi, test_speed_rpm, test_temp_min_c, test_temp_max_c) VALUES ('BARE', 10, 100, 1000, 50, 100, 46, 100, 1000, 40, 60)",
        "INSERT INTO pumps (serial, model) VALUES ('S-400', 'NOPE')",  # foreign keys are off in this connection
    )
    findings = store.check()
    by_check = {}
    for f in findings:
        by_check.setdefault(f.check, []).append(f.message)
    assert set(by_check) == {"foreign keys", "hour meter", "fitment", "limits"}, findings
    assert any("M-1: 1050 h on 2025-05-01" in m for m in by_check["hour meter"])
    assert any("S-300" in m and "outside every fitment" in m for m in by_check["fitment"])
    assert by_check["limits"] == [m for m in by_check["limits"] if "BARE" in m] and len(by_check["limits"]) == 1
    assert any("pumps row" in m for m in by_check["foreign keys"])
    assert main(["--db", store.path, "check"]) == 1
    err = " ".join(capsys.readouterr().err.split())  # rich wraps at the terminal width
    assert "4 problem(s) found" in err and "hour meter" in err and "Traceback" not in err


def test_pumps_without_fitment_or_readings_are_fine(store):
    # S-300 is on the shelf with no readings: not a finding.
    assert store.check() == []


def test_check_reports_a_damaged_file(tmp_path, store):
    path = tmp_path / "damaged.db"
    store.backup(path)
    size = path.stat().st_size
    with open(path, "r+b") as f:  # scribble over the middle pages, keep the header
        f.seek(size // 2)
        f.write(os.urandom(8192))
    try:
        with Store(path, create=False) as damaged:
            findings = damaged.check()
        assert findings and findings[0].check == "integrity"
    except StoreError as exc:  # or refused on opening, with a message
        assert "damaged" in str(exc) and "backup" in str(exc)
