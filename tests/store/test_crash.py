"""An import killed with SIGKILL at any moment leaves the database intact and the
interrupted file entirely absent; importing it again completes it."""

from __future__ import annotations

import multiprocessing
import os
import signal
import time
from datetime import date, timedelta

import pytest

from logbook.imports import import_csv
from logbook.store import Store

from .conftest import MODELS, load

PUMPS, PER_PUMP = 30, 1000  # 30,000 readings in one file

def _child(db: str, csv_path: str, mode: str, ready) -> None:
    """The importing process (forked: no interpreter start-up to wait for)."""
    store = Store(db, create=False, user="cron")
    real = store.conn

    class Watched:
        """The store's connection, telling the parent when the write begins, or dying before COMMIT."""

        def __getattr__(self, name):
            return getattr(real, name)

        def execute(self, sql, *args):
            if sql == "COMMIT" and mode == "before-commit":
                os.kill(os.getpid(), signal.SIGKILL)
            result = real.execute(sql, *args)
            if sql == "BEGIN IMMEDIATE" and mode == "while-writing":
                ready.send("writing")
            return result

    store.db.conn = Watched()
    ready.send("ready")
    report = import_csv(store, "readings", csv_path, today=date(2026, 1, 1))
    ready.send(f"done {report.added} {len(report.problems)}")


@pytest.fixture(scope="module")
def big_file(tmp_path_factory):
    folder = tmp_path_factory.mktemp("crash")
    lines = ["serial,date,machine_hours,case_drain,servo_pressure,oil_temp,test_pressure,test_speed"]
    start = date(2020, 1, 1)
    for p in range(PUMPS):
        for k in range(PER_PUMP):
            day = (start + timedelta(days=k * 2)).isoformat()
            lines.append(f"K-{p:02d},{day},{100 + 12 * k},{2 + k / 1000:.3f},{27 - k / 500:.3f},50,380,2000")
    path = folder / "readings.csv"
    path.write_text("\n".join(lines) + "\n")
    return path


def _fresh_db(folder):
    path = folder / "crash.db"
    machines = "unit,site\n" + "".join(f"K-M{p:02d},Crash Yard\n" for p in range(PUMPS))
    pumps = "serial,model,machine,position,fitted_on,machine_hours_at_fit\n" + "".join(
        f"K-{p:02d},TX-90,K-M{p:02d},main,2019-12-01,50\n" for p in range(PUMPS)
    )
    with Store(path, user="setup") as s:
        for table, data in (("models", MODELS), ("machines", machines.encode()), ("pumps", pumps.encode())):
            load(s, table, data)
    return path


def _run_child(db, csv_path, mode: str, kill_after_s: float | None) -> tuple[int, str]:
    ctx = multiprocessing.get_context("fork")
    ours, theirs = ctx.Pipe()
    child = ctx.Process(target=_child, args=(str(db), str(csv_path), mode, theirs))
    child.start()
    assert ours.recv() == "ready"
    if kill_after_s is not None:
        time.sleep(kill_after_s)
        if child.is_alive():
            os.kill(child.pid, signal.SIGKILL)
    elif mode == "while-writing":
        # The write transaction has begun: the rows are going in now.
        assert ours.recv() == "writing"
        time.sleep(0.05)
        os.kill(child.pid, signal.SIGKILL)
    child.join(timeout=120)
    out = ours.recv() if ours.poll() else ""
    return child.exitcode, out


def _state(db):
    with Store(db, create=False) as s:
        integrity = s.conn.execute("PRAGMA integrity_check").fetchone()[0]
        return integrity, s.counts()["readings"], s.conn.execute("SELECT count(*) FROM imports").fetchone()[0]


def test_import_killed_at_any_moment_leaves_nothing_and_a_rerun_completes(tmp_path, big_file):
    db = _fresh_db(tmp_path)
    # 1. Killed inside the write transaction, every row inserted but not committed.
    code, out = _run_child(db, big_file, "before-commit", None)
    assert code == -signal.SIGKILL and out == ""
    assert _state(db) == ("ok", 0, 0)
    # 2. Killed 50 ms into the write transaction, while the rows go in.
    code, out = _run_child(db, big_file, "while-writing", None)
    assert code == -signal.SIGKILL and out == ""
    assert _state(db) == ("ok", 0, 0)
    # 3. Killed at moments spread over parsing, checking and writing.
    outcomes = []
    for kill_after_s in (0.05, 0.15, 0.25, 0.4, 0.6, 0.9):
        code, out = _run_child(db, big_file, "plain", kill_after_s)
        integrity, readings, imports = _state(db)
        assert integrity == "ok"
        finished = out.startswith("done") or (readings, imports) != (0, 0)
        outcomes.append((kill_after_s, code, finished))
        if finished:  # the child beat the clock (or was killed after its commit): the whole file is in, once
            assert (readings, imports) == (PUMPS * PER_PUMP, 1), outcomes
            break
        assert code == -signal.SIGKILL and (readings, imports) == (0, 0), outcomes
    print(f"kill points (s after ready, exit code, finished): {outcomes}")
    # 4. The cron job runs again and completes the import.
    code, out = _run_child(db, big_file, "plain", None)
    added = 0 if outcomes[-1][2] else PUMPS * PER_PUMP
    assert code == 0 and out.split() == ["done", str(added), "0"]
    assert _state(db) == ("ok", PUMPS * PER_PUMP, 1)


def _plan_child(db: str, out: str, ready) -> None:
    from logbook.cli import main

    ready.send("ready")
    main(["--db", db, "--today", "2026-01-01", "forecast", "--out", out])
    ready.send("done")


def _run_plan(db: str, out, kill_after_s: float | None) -> int:
    ctx = multiprocessing.get_context("fork")
    ours, theirs = ctx.Pipe()
    child = ctx.Process(target=_plan_child, args=(db, str(out), theirs))
    child.start()
    assert ours.recv() == "ready"
    if kill_after_s is not None:
        time.sleep(kill_after_s)
        if child.is_alive():
            os.kill(child.pid, signal.SIGKILL)
    child.join(timeout=120)
    return child.exitcode


def test_plan_run_killed_leaves_the_database_and_no_half_written_plan(store, tmp_path):
    """A plan run only reads the database and writes its file by rename: killed at any
    moment, the database is untouched and the plan file is absent or whole."""
    before = (store.counts(), len(store.audit_trail()))
    out = tmp_path / "plan.md"
    left = []
    for kill_after_s in (0.02, 0.1, 0.3):
        code = _run_plan(store.path, out, kill_after_s)
        assert _state(store.path)[0] == "ok"
        left.append((code, out.read_text() if out.exists() else None))
    assert _run_plan(store.path, out, None) == 0
    whole = out.read_text()
    assert whole.strip() and all(text in (None, whole) for _, text in left)
    assert (store.counts(), len(store.audit_trail())) == before
    print(f"plan runs (exit code, left a file): {[(code, text is not None) for code, text in left]}")
