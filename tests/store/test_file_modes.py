"""New database files are readable and writable by owner and group (mode 660) whatever
the umask, never by others; SQLite gives the -wal and -shm files the database's mode.
An existing file's mode is never changed."""

from __future__ import annotations

import os
import stat
from pathlib import Path

import pytest

from logbook.cli import main
from logbook.store import Store

from .conftest import MACHINES, load

SIDE_FILES = ("", "-wal", "-shm")


def _modes(path: Path) -> dict[str, int]:
    return {suffix or "db": stat.S_IMODE(os.stat(f"{path}{suffix}").st_mode) for suffix in SIDE_FILES}


@pytest.fixture(params=[0o022, 0o077, 0o027, 0o002, 0o000], ids=lambda m: f"umask {m:03o}")
def umask(request):
    old = os.umask(request.param)
    try:
        yield request.param
    finally:
        os.umask(old)


def test_a_new_database_and_its_wal_and_shm_are_rw_for_owner_and_group(tmp_path, umask):
    path = tmp_path / "new.db"
    with Store(path, user="tester") as s:
        load(s, "machines", MACHINES)  # a write: the -wal holds it while the store is open
        assert Path(f"{path}-wal").stat().st_size > 0
        assert _modes(path) == {"db": 0o660, "-wal": 0o660, "-shm": 0o660}


def test_logbook_init_makes_the_same_modes(tmp_path, umask, capsys):
    path = tmp_path / "made-by-init.db"
    assert main(["--db", str(path), "init"]) == 0
    assert "created" in capsys.readouterr().out
    assert stat.S_IMODE(path.stat().st_mode) == 0o660
    with Store(path, user="tester") as s:  # the sidecars, made by the next user
        load(s, "machines", MACHINES)
        assert _modes(path) == {"db": 0o660, "-wal": 0o660, "-shm": 0o660}


@pytest.mark.parametrize("mode", [0o600, 0o640, 0o664])
def test_an_existing_file_keeps_the_mode_its_owner_gave_it(tmp_path, mode):
    path = tmp_path / "kept.db"
    Store(path, user="tester").close()
    os.chmod(path, mode)
    with Store(path, user="tester") as s:
        load(s, "machines", MACHINES)
        assert _modes(path) == {"db": mode, "-wal": mode, "-shm": mode}
    assert stat.S_IMODE(path.stat().st_mode) == mode
