"""A damaged database file is never written to: every write command refuses it, saying
so, and points to `logbook check` and a backup; reading and `logbook check` still work
where SQLite can read the file at all."""

from __future__ import annotations

import hashlib
import sqlite3
from pathlib import Path

import pytest

from logbook.cli import main
from logbook.store import DatabaseDamaged, Store
from logbook.store.schema import SCHEMA_VERSION

from .conftest import TODAY
from .damaged import KINDS

WRITES = {
    "record": ["record", "S-100", "--date", "2025-06-01", "--hours", "1600", "--servo-pressure", "25"],
    "event": ["event", "neutral_reset", "S-200", "--date", "2025-04-01", "--hours", "5400"],
    "remove": ["remove", "reading", "1", "--reason", "wrong pump"],
    "correct": ["correct", "2", "--servo-pressure", "24", "--reason", "gauge misread"],
    "import": ["import", "readings", "{csv}"],
    "model --limit": ["model", "TX-90", "--limit", "case_drain=9"],
    "init": ["init"],
}
NEW_READING = b"serial,date,machine_hours,servo_pressure,technician\nS-200,2025-06-01,5600,25.5,Ben\n"


@pytest.fixture(params=["wal", "delete"])
def sound(store, tmp_path, request) -> Path:
    """A closed, sound copy of the small fleet: as the live database is kept (WAL), and
    as a backup copied back is (a rollback journal, one self-contained file)."""
    path = tmp_path / "sound.db"
    store.backup(path)
    if request.param == "wal":
        conn = sqlite3.connect(path)
        assert conn.execute("PRAGMA journal_mode = WAL").fetchone()[0] == "wal"
        conn.close()
    return path


def _fingerprint(path: Path) -> tuple[str, bytes]:
    wal = Path(f"{path}-wal")
    return hashlib.sha256(path.read_bytes()).hexdigest(), wal.read_bytes() if wal.exists() else b""


def _run(db: Path, command: str, tmp_path: Path) -> int:
    csv = tmp_path / "new.csv"
    csv.write_bytes(NEW_READING)
    argv = [a.replace("{csv}", str(csv)) for a in WRITES[command]]
    return main(["--db", str(db), "--today", TODAY.isoformat(), *argv])


@pytest.mark.parametrize("command", WRITES)
def test_every_write_command_works_on_a_sound_copy(sound, command, tmp_path, capsys):
    """The control: the same commands succeed on the copy before it is damaged (init
    changes nothing on a sound, current file, and says it was checked)."""
    before = _fingerprint(sound)
    assert _run(sound, command, tmp_path) == 0, capsys.readouterr().err
    out = capsys.readouterr().out
    if command == "init":
        assert "opened existing" in out and "quick check ok" in out
    else:
        with Store(sound, create=False) as s:
            assert s.change_count() > 0
        assert _fingerprint(sound) != before


@pytest.mark.parametrize("kind", KINDS)
@pytest.mark.parametrize("command", WRITES)
def test_a_damaged_file_is_not_written(sound, kind, command, tmp_path, capsys):
    KINDS[kind](sound)
    before = _fingerprint(sound)
    code = _run(sound, command, tmp_path)
    err = " ".join(capsys.readouterr().err.split())  # rich wraps at the terminal width
    assert code == 1, err
    assert "Traceback" not in err
    assert "damaged" in err and "nothing was written" in err
    assert "logbook check" in err and "from a backup" in err and "logbook backup" in err
    assert "opened existing" not in err
    assert _fingerprint(sound) == before  # not one byte changed


@pytest.mark.parametrize("kind", KINDS)
def test_check_still_reads_a_damaged_file(sound, kind, capsys):
    """`logbook check` names the damage (findings, exit 1) wherever SQLite can open the
    file; where it cannot (the header or the table of tables is gone), it says so."""
    KINDS[kind](sound)
    assert main(["--db", str(sound), "check"]) == 1
    captured = capsys.readouterr()
    text = " ".join((captured.out + captured.err).split())
    assert "Traceback" not in text
    assert "integrity" in text or "cannot look into" in text
    assert "backup" in text


@pytest.mark.parametrize("kind", KINDS)
@pytest.mark.parametrize("argv", [["pumps"], ["show", "S-100"], ["history", "S-100"]], ids=" ".join)
def test_reading_a_damaged_file_shows_what_reads_or_says_it_is_damaged(sound, kind, argv, capsys):
    KINDS[kind](sound)
    before = _fingerprint(sound)
    code = main(["--db", str(sound), "--today", TODAY.isoformat(), *argv])
    captured = capsys.readouterr()
    err = " ".join(captured.err.split())
    assert "Traceback" not in err and "half-written" not in err
    if code == 0:
        assert "S-100" in captured.out  # what SQLite could still read
    else:
        assert code == 1 and "damaged" in err and "backup" in err, err
    assert _fingerprint(sound) == before


def test_the_quick_check_runs_once_per_open_store(sound):
    """Before the first write only: later writes of the same store do not repeat it."""
    with Store(sound, create=False, user="tester") as s:
        seen = []
        real = s.db.conn

        class Counting:
            def __getattr__(self, name):
                return getattr(real, name)

            def execute(self, sql, *args):
                seen.append(sql)
                return real.execute(sql, *args)

        s.db.conn = Counting()
        s.ready_to_write()
        s.ready_to_write()
        s.remove_reading(1, reason="wrong pump")
        assert sum("quick_check" in q for q in seen) == 1


def test_a_store_opened_on_a_damaged_file_refuses_writes_but_reads(sound):
    KINDS["scribbled"](sound)
    with Store(sound, create=False, user="tester") as s:
        assert s.schema_version() == SCHEMA_VERSION  # page 1 is intact: the store opens and reads
        with pytest.raises(DatabaseDamaged, match="quick check"):
            s.ready_to_write()
        with pytest.raises(DatabaseDamaged):
            with s.transaction():
                pass
