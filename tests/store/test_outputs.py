"""Every file the program writes (forecast --out, round --out, backup) goes through
logbook.outfile: never over the database or its -wal/-shm/-journal files under any
name, devices and pipes written through, symbolic links kept, ``-`` is stdout, atomic
on a full disk, modes from the umask, leftovers of a killed writer removed."""

from __future__ import annotations

import errno
import hashlib
import multiprocessing
import os
import shutil
import signal
import sqlite3
import stat
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest

from logbook import outfile
from logbook.cli import main
from logbook.model import Machine
from logbook.store import Store

from . import damaged
from .conftest import MACHINES, MODELS, PUMPS, READINGS, TODAY, load

SITE = "North Yard"  # the conftest fleet's site
FORECAST = ("forecast", "--format", "csv")
ROUND = ("round", "--site", SITE, "--all", "--format", "csv")
MARK = {FORECAST: f"# made on,{TODAY.isoformat()}".encode(), ROUND: b"S-100"}  # a line of each output


@pytest.fixture
def db(tmp_path) -> Path:
    """The small invented fleet in a closed database (no -wal or -shm beside it)."""
    path = tmp_path / "fleet" / "t.db"
    path.parent.mkdir()
    with Store(path, user="tester") as s:
        for table, data in (("models", MODELS), ("machines", MACHINES), ("pumps", PUMPS), ("readings", READINGS)):
            load(s, table, data)
    return path


def run(db: Path, *argv) -> int:
    return main(["--db", str(db), "--today", TODAY.isoformat(), *argv])


def digest(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def partials(folder: Path) -> list[str]:
    return sorted(p.name for p in folder.iterdir() if "partial" in p.name)


def _name_for(db: Path, how: str) -> str:
    """A name for the database (or one of its sidecar files), made the way ``how`` says."""
    if how == "itself":
        return str(db)
    if how == "relative":
        return os.path.relpath(db)
    if how == "symlink":
        link = db.parent.parent / "plan.csv"
        link.symlink_to(db)
        return str(link)
    if how == "hard link":
        other = db.parent.parent / "plan.csv"
        os.link(db, other)
        return str(other)
    if how == "symlink to -wal":
        link = db.parent.parent / "plan.csv"
        link.symlink_to(f"{db}-wal")
        return str(link)
    return f"{db}{how}"  # -wal, -shm, -journal


DB_NAMES = ["itself", "relative", "symlink", "hard link", "-wal", "-shm", "-journal", "symlink to -wal"]


@pytest.mark.parametrize("how", DB_NAMES)
def test_forecast_out_never_lands_on_the_database(db, how, capsys):
    before = (digest(db), sorted(os.listdir(db.parent)))
    out = _name_for(db, how)
    assert run(db, *FORECAST, "--out", out) == 2
    err = " ".join(capsys.readouterr().err.split())
    assert str(db) in err and "destroy the logbook" in err and "nothing written" in err  # the value is echoed cut
    assert (digest(db), sorted(os.listdir(db.parent))) == before  # no report, no -wal made of one
    if how in ("symlink", "symlink to -wal"):
        assert Path(out).is_symlink()
    with Store(db, create=False) as s:
        assert s.counts()["readings"] == 3 and s.check() == []


@pytest.mark.parametrize("how", ["itself", "symlink", "-wal", "hard link"])
def test_round_out_never_lands_on_the_database(db, how, capsys):
    before = (digest(db), sorted(os.listdir(db.parent)))
    out = _name_for(db, how)
    assert run(db, *ROUND, "--out", out) == 2
    err = " ".join(capsys.readouterr().err.split())
    assert out in err and str(db) in err and "destroy the logbook" in err
    assert (digest(db), sorted(os.listdir(db.parent))) == before


def test_the_wal_of_a_database_in_use_is_refused_and_its_changes_kept(db, capsys):
    """Another user's open store has committed a change that sits in the -wal only."""
    with Store(db, user="other") as s:
        s.add_machines([Machine("M-9", SITE)])
        wal = Path(f"{db}-wal")
        assert wal.stat().st_size > 0
        before = digest(wal)
        assert run(db, *FORECAST, "--out", str(wal)) == 2
        assert run(db, *ROUND, "--out", str(wal)) == 2
        assert digest(wal) == before
    with Store(db, create=False) as s:
        assert "M-9" in s.machines()


@pytest.mark.parametrize("how", ["symlink", "-wal", "-shm"])
def test_backup_never_lands_on_the_database(db, how, capsys):
    before = (digest(db), sorted(os.listdir(db.parent)))
    dest = _name_for(db, how)
    assert run(db, "backup", dest, "--force") == 1
    assert "destroy the logbook" in " ".join(capsys.readouterr().err.split())
    assert (digest(db), sorted(os.listdir(db.parent))) == before


def test_dash_is_standard_output_for_every_out_option(db, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    assert run(db, *ROUND, "--out", "-") == 0
    sheet = capsys.readouterr().out
    assert "S-100" in sheet and "serial" in sheet
    # A regression guard (forecast already read - as stdout): the same for both.
    assert run(db, *FORECAST, "--out", "-") == 0
    plan = capsys.readouterr().out
    assert f"# made on,{TODAY.isoformat()}" in plan
    assert not (tmp_path / "-").exists()


def _read_fifo(path: Path, got: list[bytes]) -> None:
    with open(path, "rb") as fh:
        got.append(fh.read())


def _unblock(path: Path) -> None:
    """Release a reader still waiting at the pipe's open (when nobody wrote to it)."""
    try:
        fd = os.open(path, os.O_WRONLY | os.O_NONBLOCK)
    except OSError:
        return
    os.close(fd)


def test_a_named_pipe_is_written_through_not_replaced(db, tmp_path):
    fifo = tmp_path / "pipe"
    os.mkfifo(fifo)
    for command in (FORECAST, ROUND):
        got: list[bytes] = []
        reader = threading.Thread(target=_read_fifo, args=(fifo, got), daemon=True)
        reader.start()
        try:
            assert run(db, *command, "--out", str(fifo)) == 0
        finally:
            reader.join(timeout=60)  # a safety net for a broken writer, not a timing check
            _unblock(fifo)
        assert stat.S_ISFIFO(os.lstat(fifo).st_mode), command
        assert got and MARK[command] in got[0]
    assert partials(tmp_path) == []


def test_a_character_device_is_written_through_not_replaced(db, tmp_path):
    """A private null device (char 1,3 on Linux) stands in for /dev/null."""
    null = tmp_path / "null"
    try:
        os.mknod(null, stat.S_IFCHR | 0o666, os.makedev(1, 3))
    except PermissionError:
        pytest.skip("making a device node needs root (CAP_MKNOD)")
    assert run(db, *FORECAST, "--out", str(null)) == 0
    assert run(db, *ROUND, "--out", str(null)) == 0
    assert stat.S_ISCHR(os.lstat(null).st_mode) and os.stat(null).st_rdev == os.makedev(1, 3)
    assert partials(tmp_path) == []


def test_a_symlink_to_a_file_is_followed_and_kept(db, tmp_path):
    real_dir = tmp_path / "shared"
    real_dir.mkdir()
    real = real_dir / "plan.csv"
    link = tmp_path / "latest.csv"
    link.symlink_to(real)
    for command in (FORECAST, ROUND):
        real.write_bytes(b"last week's file\n")
        assert run(db, *command, "--out", str(link)) == 0
        assert link.is_symlink() and os.readlink(link) == str(real), command
        assert MARK[command] in real.read_bytes()
    assert partials(tmp_path) == [] and partials(real_dir) == []


def _failing(monkeypatch, call: str) -> None:
    """A disk that fills up: os.write writes one 4 KiB block then fails, or fsync fails."""
    real_write = os.write

    def write(fd, data):
        if len(data) > 4096:
            real_write(fd, bytes(data[:4096]))
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    def fsync(fd):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(os, call, write if call == "write" else fsync)


@pytest.mark.parametrize("call", ["write", "fsync"])
@pytest.mark.parametrize("command", [FORECAST, ROUND], ids=["forecast", "round"])
def test_a_full_disk_leaves_the_old_file_and_no_partial(db, tmp_path, monkeypatch, capsys, command, call):
    out = tmp_path / "sheet.csv"
    old = b"the sheet printed yesterday\n" * 10
    out.write_bytes(old)
    _failing(monkeypatch, call)
    code = run(db, *command, "--out", str(out))
    monkeypatch.undo()
    assert code == 1
    err = " ".join(capsys.readouterr().err.split())
    assert str(out) in err and "the disk is full" in err and "left as it was" in err
    assert out.read_bytes() == old
    assert partials(tmp_path) == []


@pytest.fixture
def umask():
    def set_to(mask: int) -> None:
        os.umask(mask)

    old = os.umask(0o022)
    try:
        yield set_to
    finally:
        os.umask(old)


def test_new_files_get_the_umask_mode(db, tmp_path, umask):
    for mask in (0o077, 0o022, 0o002, 0o027):
        umask(mask)
        for command in (FORECAST, ROUND):
            out = tmp_path / f"new-{mask:03o}-{command[0]}.csv"
            assert run(db, *command, "--out", str(out)) == 0
            # 0o666 & ~umask: what POSIX open(2) gives a file created with mode 0666.
            assert stat.S_IMODE(out.stat().st_mode) == 0o666 & ~mask, (mask, command)


def test_a_replaced_file_keeps_its_mode(db, tmp_path, umask):
    umask(0o022)
    out = tmp_path / "plan.csv"
    out.write_bytes(b"old\n")
    os.chmod(out, 0o640)
    assert run(db, *FORECAST, "--out", str(out)) == 0
    assert stat.S_IMODE(out.stat().st_mode) == 0o640 and out.read_bytes() != b"old\n"


def _killed_while_writing(db: str, out: str) -> None:
    """The forecast, killed (SIGKILL) once its temporary file is written, before the rename."""
    os.fsync = lambda fd: os.kill(os.getpid(), signal.SIGKILL)
    main(["--db", db, "--today", TODAY.isoformat(), *FORECAST, "--out", out])


def test_a_killed_export_leaves_a_partial_that_the_next_write_removes(db, tmp_path):
    out = tmp_path / "plan.csv"
    child = multiprocessing.get_context("fork").Process(target=_killed_while_writing, args=(str(db), str(out)))
    child.start()
    child.join(timeout=120)
    assert child.exitcode == -signal.SIGKILL
    left = partials(tmp_path)
    assert len(left) == 1 and left[0].startswith(".plan.csv.logbook-partial-") and not out.exists()
    assert run(db, *FORECAST, "--out", str(out)) == 0
    assert partials(tmp_path) == [] and f"# made on,{TODAY.isoformat()}".encode() in out.read_bytes()


def _dead_pid() -> int:
    done = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"], capture_output=True, check=True)
    return int(done.stdout)


def test_which_partials_count_as_stale(tmp_path):
    target = tmp_path / "plan.csv"
    tag = outfile.PARTIAL_TAG
    dead, alive = _dead_pid(), os.getppid()
    files = {
        f".plan.csv{tag}{dead}-0a1b2c3d": True,  # its writer is gone
        f".plan.csv{tag}{dead}-0a1b2c3d-journal": True,  # and the SQLite journal beside it
        f".plan.csv{tag}{alive}-0a1b2c3d": False,  # a writer still at work
        f".plan.csv{tag}{alive}-0b1b2c3d": True,  # alive PID, but untouched for an hour
        f".plan.csv.{dead}.partial": True,  # the name earlier backups used
        f".other.csv{tag}{dead}-0a1b2c3d": False,  # another file's
        "plan.csv": False,
    }
    for name in files:
        (tmp_path / name).write_bytes(b"x")
    hour_ago = time.time() - 3600
    os.utime(tmp_path / f".plan.csv{tag}{alive}-0b1b2c3d", (hour_ago, hour_ago))
    removed = {p.name for p in outfile.remove_stale(target)}
    assert removed == {name for name, stale in files.items() if stale}
    assert sorted(os.listdir(tmp_path)) == sorted(name for name, stale in files.items() if not stale)


def _good_backup(db: Path, tmp_path: Path) -> Path:
    dest = tmp_path / "backups" / "logbook-backup.db"
    dest.parent.mkdir()
    assert run(db, "backup", str(dest)) == 0
    return dest


def _index_out_of_step(path: Path) -> None:
    """One machine's unit number changed in its table row but not in the unique index on
    it (a stray write of a few bytes): SQLite's quick check passes (it skips index
    contents), the online backup copies the file page by page, and only the
    integrity check of the copy finds it."""
    data = path.read_bytes()
    for at in [i for i in range(len(data)) if data.startswith(b"X-0399", i)]:
        candidate = data[:at] + b"X-039Z" + data[at + 6:]  # sorts where X-0399 did
        path.write_bytes(candidate)
        conn = sqlite3.connect(path)
        try:
            quick = conn.execute("PRAGMA quick_check").fetchall()
            full = conn.execute("PRAGMA integrity_check").fetchall()
        finally:
            conn.close()
        if quick == [("ok",)] and full != [("ok",)]:
            return
    raise AssertionError("no place found where the table and its index disagree")


DAMAGE = {**damaged.KINDS, "index out of step": _index_out_of_step}


def test_backup_force_from_a_damaged_database_keeps_the_good_backup(db, tmp_path, capsys):
    # A bigger file, so that damage in its middle hits table pages, not only free space.
    with Store(db, user="tester") as s:
        s.add_machines([Machine(f"X-{i:04d}", SITE, "filler " * 20) for i in range(400)])
    dest = _good_backup(db, tmp_path)
    good = dest.read_bytes()
    for kind, damage in DAMAGE.items():
        broken = tmp_path / f"broken-{kind.replace(' ', '-')}.db"
        shutil.copy(db, broken)
        damage(broken)
        code = main(["--db", str(broken), "--today", TODAY.isoformat(), "backup", str(dest), "--force"])
        err = " ".join(capsys.readouterr().err.split())
        assert code == 1 and ("damaged" in err or "integrity check" in err), (kind, err)
        assert dest.read_bytes() == good, kind
        assert os.listdir(dest.parent) == [dest.name], kind  # no partial file left either


def test_backup_replaces_only_with_a_checked_copy_and_keeps_the_mode(db, tmp_path):
    dest = _good_backup(db, tmp_path)
    assert stat.S_IMODE(dest.stat().st_mode) == 0o660
    os.chmod(dest, 0o600)
    with Store(db, user="tester") as s:
        s.add_machines([Machine("M-9", SITE)])
    assert run(db, "backup", str(dest), "--force") == 0
    with Store(dest, create=False) as copy:
        assert "M-9" in copy.machines()
    assert stat.S_IMODE(dest.stat().st_mode) == 0o600 and os.listdir(dest.parent) == [dest.name]
