"""The demo fleet built once per test module (tests.store.test_cli's fixtures), and a run of the
command line as a user at a terminal of a given width sees it."""

from __future__ import annotations

import pytest

from logbook.cli import main
from tests.store.test_cli import TODAY, demo, demo_master  # noqa: F401  (the demo fleet fixtures)


@pytest.fixture
def run(capsys, monkeypatch):
    """run(db, *args, columns=80) -> (exit code, stdout, stderr)."""

    def _run(db, *args, columns=80):
        monkeypatch.setenv("COLUMNS", str(columns))
        code = main(["--db", str(db), "--today", TODAY, *args])
        out = capsys.readouterr()
        return code, out.out, out.err

    return _run
