"""The command line end to end on the demo fleet: exit codes, messages, nothing
written on rejection, and every command documented in the README."""

from __future__ import annotations

import re
import shutil
from pathlib import Path

import pytest

from logbook.cli import build_parser, main
from logbook.store import Store

TODAY = "2026-12-01"
README = Path(__file__).resolve().parents[2] / "README.md"


@pytest.fixture(scope="module")
def demo_master(tmp_path_factory):
    path = tmp_path_factory.mktemp("cli") / "demo.db"
    # Global options after the command, as a user types them.
    assert main(["demo", "--no-ui", "--db", str(path), "--today", TODAY]) == 0
    return path


@pytest.fixture
def demo(demo_master, tmp_path):
    path = tmp_path / "demo.db"
    shutil.copy(demo_master, path)
    return path


def test_demo_builds_the_invented_fleet(demo):
    with Store(demo) as store:
        counts = store.counts()
        sites = {m.site for m in store.machines().values()}
    assert counts["models"] == 4 and len(sites) == 3
    assert 35 <= counts["machines"] <= 45 and 100 <= counts["pumps"] <= 140
    assert counts["readings"] > 1000 and counts["events"] > 0


def test_demo_refuses_to_replace_someone_elses_database(tmp_path, capsys):
    path = tmp_path / "mine.db"
    assert main(["--db", str(path), "--as", "ana", "init"]) == 0
    with Store(path, user="ana") as store:
        from logbook.model import Machine

        store.add_machines([Machine("K-1", "Yard")])
    assert main(["--db", str(path), "--today", TODAY, "demo", "--no-ui"]) == 2
    assert "not replacing" in capsys.readouterr().err
    with Store(path) as store:
        assert store.counts()["machines"] == 1


def _readings(path):
    with Store(path) as store:
        return store.counts()["readings"]


def test_record_accepts_units_and_rejects_bad_values_writing_nothing(demo, capsys):
    serial = "C-28412"
    with Store(demo) as store:
        last = store.readings(serial)[-1]
    before = _readings(demo)
    args = ["--db", str(demo), "--today", TODAY, "record", serial, "--date", TODAY, "--hours", str(last.machine_hours + 50)]
    assert main(args + ["--servo-pressure", "400psi", "--technician", "Test"]) == 0
    with Store(demo) as store:
        saved = store.readings(serial)[-1]
    # 400 psi in bar: 400 * 6894.757293168361 Pa / 1e5 (NIST SP 811 psi).
    assert saved.servo_pressure_bar == pytest.approx(400 * 6894.757293168361 / 1e5)
    assert _readings(demo) == before + 1
    capsys.readouterr()
    assert main(args + ["--hours", "1", "--case-drain", "abc"]) == 2
    err = capsys.readouterr().err
    assert "case_drain = 'abc'" in err and "nothing was written" in err
    assert _readings(demo) == before + 1


def test_pumps_show_and_model_commands_print(demo, capsys):
    assert main(["--db", str(demo), "--today", TODAY, "pumps", "--limit", "5"]) == 0
    out = capsys.readouterr().out
    assert "over limit" in out and "next reading" in out
    assert main(["--db", str(demo), "--today", TODAY, "show", "D-15264"]) == 0
    assert "past limit" in capsys.readouterr().out
    assert main(["--db", str(demo), "show", "NOPE"]) == 2


def test_missing_database_is_a_message_not_a_traceback(tmp_path, capsys):
    assert main(["--db", str(tmp_path / "none.db"), "pumps"]) == 1
    assert "logbook init" in capsys.readouterr().err


def test_every_command_is_in_the_readme():
    commands = set(build_parser()._subparsers._group_actions[0].choices)
    documented = set(re.findall(r"`logbook ([a-z]+)", README.read_text()))
    assert commands <= documented, sorted(commands - documented)
