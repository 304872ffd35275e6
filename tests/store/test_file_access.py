"""A database this user may only read, a full disk, and Ctrl-C: each told as what it
is. Reading works on a read-only file and in a read-only folder; a write says what
stops it and writes nothing; an interrupted run says whether its change was saved."""

from __future__ import annotations

import contextlib
import hashlib
import io
import json
import os
import shutil
import sqlite3
import tempfile
from datetime import date, timedelta
from pathlib import Path

import pytest

from logbook.cli import main
from logbook.store import DatabaseReadOnly, DiskFull, Store
from logbook.store import core as store_core

from .conftest import TODAY

NOBODY = 65534  # the unprivileged account of Linux distributions (a test run as root drops to it)
READS = [["pumps"], ["show", "S-100"], ["forecast"], ["check"]]
WRITES = [
    ["record", "S-100", "--date", "2025-06-01", "--hours", "1600", "--servo-pressure", "25"],
    ["remove", "reading", "1", "--reason", "wrong pump"],
    ["model", "TX-90", "--limit", "case_drain=9"],
    ["init"],
]


def _cli(db: Path, argv: list[str]) -> tuple[int, str, str]:
    out, err = io.TextIOWrapper(io.BytesIO(), encoding="utf-8"), io.StringIO()  # forecast writes bytes
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(["--db", str(db), "--today", TODAY.isoformat(), *argv])
    out.flush()
    return code, out.buffer.getvalue().decode(), " ".join(err.getvalue().split())


def _unprivileged(task):
    """``task()`` run in a child process for which file permissions count: a test run as
    root (who may write any file) drops to the unprivileged account first. The child
    forks from this process, so every module the task uses must be loaded already.
    Returns what the task returned (through JSON)."""
    read_end, write_end = os.pipe()
    pid = os.fork()
    if pid == 0:  # the child
        try:
            os.close(read_end)
            if os.geteuid() == 0:
                os.setgroups([])
                os.setgid(NOBODY)
                os.setuid(NOBODY)
            payload = json.dumps({"result": task()})
        except BaseException as exc:  # noqa: BLE001 - told to the parent, which fails the test
            payload = json.dumps({"child failed": repr(exc)})
        with os.fdopen(write_end, "w") as pipe:
            pipe.write(payload)
        os._exit(0)
    os.close(write_end)
    with os.fdopen(read_end) as pipe:
        payload = json.loads(pipe.read() or "{}")
    os.waitpid(pid, 0)
    assert "result" in payload, payload
    return payload["result"]


def _as_unprivileged(db: Path, commands: list[list[str]]) -> list[tuple[int, str, str]]:
    return _unprivileged(lambda: [_cli(db, argv) for argv in commands])


def _give_away(path: Path, mode: int) -> None:
    """The file or folder belongs to whoever the child runs as, with ``mode``."""
    if os.geteuid() == 0:
        os.chown(path, NOBODY, NOBODY)
    os.chmod(path, mode)


@pytest.fixture
def shared(store):
    """A copy of the small fleet in a folder of its own outside pytest's private
    temporary folder (the unprivileged account must reach it). Every command is run
    once on a writable copy first: that loads every module it needs."""
    warm = Path(tempfile.mkdtemp(prefix="logbook-warm-"))
    try:
        store.backup(warm / "warm.db")
        for argv in READS + WRITES:
            assert _cli(warm / "warm.db", argv)[0] == 0
    finally:
        shutil.rmtree(warm)
    folder = Path(tempfile.mkdtemp(prefix="logbook-access-"))
    db = folder / "fleet.db"
    store.backup(db)
    with sqlite3.connect(db) as conn:  # the live database's form
        conn.execute("PRAGMA journal_mode = WAL")
    yield db
    os.chmod(folder, 0o700)
    shutil.rmtree(folder)


def _digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _reads_work(results) -> None:
    for (code, out, err), argv in zip(results, READS):
        assert code == 0, (argv, err)
        assert "Traceback" not in err
    assert "S-100" in results[0][1] and "S-100" in results[1][1]
    assert "no problems found" in results[3][1]


def test_a_read_only_file_reads_and_says_why_it_cannot_be_written(shared):
    _give_away(shared.parent, 0o755)
    _give_away(shared, 0o444)
    before = _digest(shared)
    results = _as_unprivileged(shared, READS + WRITES)
    _reads_work(results[:len(READS)])
    for (code, out, err), argv in zip(results[len(READS):], WRITES):
        assert code == 1, (argv, err)
        assert "the database file" in err and "is read-only for" in err, err
        assert "Nothing was written" in err and "Reading still works" in err
        assert "damaged" not in err and "backup" not in err and "Traceback" not in err
    assert _digest(shared) == before


def test_a_read_only_folder_still_reads_and_says_what_writing_needs(shared):
    _give_away(shared, 0o644)  # the file itself is writable; SQLite cannot create its -wal and -shm
    _give_away(shared.parent, 0o555)
    before = _digest(shared)
    results = _as_unprivileged(shared, READS + WRITES)
    _reads_work(results[:len(READS)])
    for (code, out, err), argv in zip(results[len(READS):], WRITES):
        assert code == 1, (argv, err)
        assert f"the folder {shared.parent} is not writable for" in err, err
        assert "fleet.db-wal" in err and "fleet.db-shm" in err
        assert "Nothing was written" in err and "damaged" not in err and "Traceback" not in err
    assert _digest(shared) == before
    assert sorted(p.name for p in shared.parent.iterdir()) == ["fleet.db"]


def test_a_store_on_a_read_only_folder_says_so_before_its_first_write(shared):
    _give_away(shared, 0o644)
    _give_away(shared.parent, 0o555)

    def look_then_write():
        with Store(shared, create=False, user="tester") as s:
            seen = [s.read_only, s.counts()["readings"]]
            try:
                s.remove_reading(1, reason="wrong pump")
            except DatabaseReadOnly as exc:
                seen.append(str(exc))
        return seen

    why, readings, refused = _unprivileged(look_then_write)
    assert "not writable" in why and readings == 3
    assert refused == why


def test_a_read_only_folder_with_changes_still_in_the_wal_says_who_can_fold_them_in(shared):
    """A -wal left holding committed changes (its writer died) and no -shm: SQLite can
    read it only with a -shm it cannot create in a read-only folder. Reading the bare
    file would miss those changes, so the reader is told why it cannot read, and who
    can fix it; once a writer has opened and closed the database, reading works."""
    live = shared.parent / "live"
    live.mkdir()
    writer = sqlite3.connect(live / "fleet.db", isolation_level=None)
    shutil.copy(shared, live / "fleet.db")
    writer.execute("PRAGMA wal_autocheckpoint = 0")
    writer.execute("INSERT INTO machines (unit, site, description) VALUES ('M-9', 'North Yard', 'new loader')")
    shutil.copy(live / "fleet.db", shared)  # the writer "dies" here: the file and its -wal as they are
    shutil.copy(live / "fleet.db-wal", f"{shared}-wal")
    writer.close()
    shutil.rmtree(live)
    for path in (shared, Path(f"{shared}-wal")):
        _give_away(path, 0o644)
    _give_away(shared.parent, 0o555)
    before = _digest(shared)
    [(code, out, err)] = _as_unprivileged(shared, [["pumps"]])
    assert code == 1 and "fleet.db-wal holds changes not yet folded into the database file" in err, err
    assert f"the folder {shared.parent} is not writable for" in err and "logbook check" in err
    assert "Traceback" not in err and _digest(shared) == before
    os.chmod(shared.parent, 0o755)  # someone who may write the folder opens it once
    assert _cli(shared, ["check"])[0] == 0
    os.chmod(shared.parent, 0o555)
    [(code, out, err)] = _as_unprivileged(shared, [["pumps"]])
    assert code == 0, err

    def units():
        with Store(shared, create=False) as s:
            return sorted(s.machines())

    assert _unprivileged(units) == ["M-1", "M-2", "M-9"]  # the change that was in the -wal


# -- a full disk -------------------------------------------------------------------
@pytest.fixture
def full_disk(monkeypatch):
    """SQLite's own limit on the file's size, set at the size it has when opened: the next
    write that needs one more page fails as on a full disk (SQLITE_FULL, "database or
    disk is full")."""
    real = sqlite3.connect

    def capped(*args, **kwargs):
        conn = real(*args, **kwargs)
        pages = conn.execute("PRAGMA page_count").fetchone()[0]
        conn.execute(f"PRAGMA max_page_count = {max(pages, 1)}")
        return conn

    monkeypatch.setattr(sqlite3, "connect", capped)


def _many_readings(path: Path, n: int = 600) -> Path:
    """``n`` daily readings of S-200 after its last one (2025-03-01, 5300 h), each with a long note."""
    start = date(2025, 3, 2)
    lines = ["serial,date,machine_hours,servo_pressure,technician,note"]
    lines += [f"S-200,{start + timedelta(days=k)},{5310 + 10 * k},25,Ben,{'seals checked ' * 15}" for k in range(n)]
    path.write_text("\n".join(lines) + "\n")
    return path


def test_a_full_disk_is_told_as_a_full_disk(store, tmp_path, full_disk, capsys):
    before = store.counts()
    code = main(["--db", store.path, "--today", TODAY.isoformat(), "import", "readings",
                 str(_many_readings(tmp_path / "many.csv"))])
    err = " ".join(capsys.readouterr().err.split())
    assert code == 1, err
    assert "is full: nothing was written" in err and "Free some space" in err
    assert "not usable" not in err and "damaged" not in err and "Traceback" not in err
    assert store.counts() == before


def test_a_full_disk_in_the_store(store, tmp_path):
    with Store(store.path, create=False, user="tester") as s:
        s.conn.execute(f"PRAGMA max_page_count = {s.conn.execute('PRAGMA page_count').fetchone()[0]}")
        data = _many_readings(tmp_path / "many.csv").read_bytes()
        from logbook.imports import import_bytes

        with pytest.raises(DiskFull, match="nothing was written"):
            import_bytes(s, "readings", data, name="many.csv", today=TODAY)
        assert s.commits == [] and not s.conn.in_transaction
    assert store.counts()["readings"] == 3


# -- Ctrl-C ------------------------------------------------------------------------
NEW_READING = b"serial,date,machine_hours,servo_pressure,technician\nS-200,2025-06-01,5600,25.5,Ben\n"


@pytest.mark.parametrize("moment, said, readings", [
    # the look at the new readings, after the commit
    ("after", "interrupted after the import was saved: 1 row is in (new.csv)", 4),
    # inside the write transaction, before COMMIT
    ("before", "interrupted before saving: nothing was written", 3),
])
def test_ctrl_c_says_whether_the_import_was_saved(store, tmp_path, monkeypatch, capsys, moment, said, readings):
    import logbook.rounds

    def interrupted(*args, **kwargs):
        raise KeyboardInterrupt

    if moment == "after":
        monkeypatch.setattr(logbook.rounds, "import_second_look", interrupted)
    else:
        monkeypatch.setattr(store_core.StoreCore, "_audit", interrupted)
    csv = tmp_path / "new.csv"
    csv.write_bytes(NEW_READING)
    assert main(["--db", store.path, "--today", TODAY.isoformat(), "import", "readings", str(csv)]) == 130
    err = " ".join(capsys.readouterr().err.split())
    assert said in err and "half-written" not in err
    assert store.counts()["readings"] == readings


def test_ctrl_c_the_moment_commit_returns_counts_the_change_as_saved(store):
    """Python raises KeyboardInterrupt between two steps: just after COMMIT returned,
    the transaction is in, and the store's record of it must say so."""
    with Store(store.path, create=False, user="tester") as s:
        real = s.conn

        class InterruptedAfterCommit:
            def __getattr__(self, name):
                return getattr(real, name)

            def execute(self, sql, *args):
                result = real.execute(sql, *args)
                if sql == "COMMIT":
                    raise KeyboardInterrupt
                return result

        s.db.conn = InterruptedAfterCommit()
        with pytest.raises(KeyboardInterrupt):
            s.remove_reading(1, reason="wrong pump")
        s.db.conn = real
        assert [c.describe() for c in s.commits] == ["the change was saved: 1 row of readings removed"]
    assert store.counts()["readings"] == 3 and [r.id for r in store.readings("S-100")] == [2]
