"""`--as-of DATE` on the commands: the output on the full database equals the output on a copy
cut back to DATE (everything dated after it deleted, later corrections and removals undone,
by plain SQL in ``test_as_of._cut_copy``, independent of logbook.asof), on the demo fleet."""

from __future__ import annotations

import json
import shutil
from datetime import date

import pytest

from logbook.cli import main
from logbook.store import Store
from tests.store.test_as_of import DEMO_TODAY, _cut_copy

TODAY = DEMO_TODAY.isoformat()


@pytest.fixture(scope="module")
def master(tmp_path_factory):
    path = tmp_path_factory.mktemp("asofcli") / "demo.db"
    assert main(["demo", "--no-ui", "--db", str(path), "--today", TODAY]) == 0
    return path


def _out(capsys, argv) -> str:
    capsys.readouterr()
    assert main(argv) == 0
    return capsys.readouterr().out


def _forecast_json(capsys, db, *clock) -> dict:
    data = json.loads(_out(capsys, ["forecast", "--format", "json", "--db", str(db), *clock]))
    data.pop("provenance")  # names the database file
    data["notes"] = [n for n in data["notes"] if not n.startswith("as of ")]
    return data


def _same_outputs(capsys, full, cut, day: str) -> None:
    as_of, clock = ["--as-of", day, "--today", TODAY], ["--today", day]
    assert _forecast_json(capsys, full, *as_of) == _forecast_json(capsys, cut, *clock)
    for argv in (["pumps", "--format", "json"], ["round", "--all"]):
        assert _out(capsys, [*argv, "--db", str(full), *as_of]) == _out(capsys, [*argv, "--db", str(cut), *clock])


@pytest.mark.parametrize("day", ["2024-09-30", "2025-07-15", "2026-05-01"])
def test_commands_as_of_equal_the_cut_copy(master, tmp_path, capsys, day):
    cut = tmp_path / "cut.db"
    _cut_copy(master, cut, date.fromisoformat(day))
    _same_outputs(capsys, master, cut, day)
    # the day lies inside the history: the output holds pumps, and differs from today's
    pumps = json.loads(_out(capsys, ["pumps", "--format", "json", "--db", str(master), "--as-of", day, "--today", TODAY]))
    now = json.loads(_out(capsys, ["pumps", "--format", "json", "--db", str(master), "--today", TODAY]))
    assert pumps != now and len(json.dumps(pumps)) > 1000


def test_as_of_between_a_reading_and_its_correction(master, tmp_path, capsys):
    path = tmp_path / "corrected.db"
    shutil.copy(master, path)
    with Store(path, user="tester") as store:
        reading = next(r for r in store.readings() if r.case_drain_lpm is not None and date(2025, 3, 1) < r.taken_on < date(2025, 9, 1))
        store.correct_reading(reading.id, reason="typed in the wrong unit", today=DEMO_TODAY,
                              case_drain_lpm=round(reading.case_drain_lpm * 1.5, 2))
    day = (reading.taken_on).isoformat()  # after the reading, before the correction was entered
    cut = tmp_path / "cut.db"
    _cut_copy(path, cut, reading.taken_on)
    _same_outputs(capsys, path, cut, day)
    shown = json.loads(_out(capsys, ["show", reading.serial, "--format", "json", "--db", str(path), "--as-of", day,
                                     "--today", TODAY]))
    mine = [r for r in shown["readings"] if r["id"] == reading.id]
    assert len(mine) == 1 and mine[0]["state"] == "current"  # the original as it stood, not yet corrected


def test_as_of_is_refused_where_it_makes_no_sense(master, capsys):
    assert main(["record", "X-1", "--date", "2025-01-01", "--hours", "10", "--db", str(master), "--as-of", "2025-01-01"]) == 2
    assert "--as-of = 2025-01-01: not with `record`" in capsys.readouterr().err
    assert main(["pumps", "--db", str(master), "--as-of", "2027-01-01", "--today", TODAY]) == 2
    assert "a day after today (2026-12-01)" in capsys.readouterr().err


def test_the_fleet_summary_without_a_terminal_is_as_of_the_day(master, tmp_path, capsys):
    day = "2025-07-15"
    cut = tmp_path / "cut.db"
    _cut_copy(master, cut, date.fromisoformat(day))
    as_of = _out(capsys, ["--db", str(master), "--as-of", day, "--today", TODAY])  # no command, no terminal: the summary
    assert as_of.startswith(f"{as_of.split()[0]} pumps on {day}:")
    assert as_of == _out(capsys, ["--db", str(cut), "--today", day])


def test_show_all_readings_as_of_a_day_lists_them_as_they_stood(master, tmp_path, capsys):
    path = tmp_path / "corrected.db"
    shutil.copy(master, path)
    with Store(path, user="tester") as store:
        reading = next(r for r in store.readings() if r.case_drain_lpm is not None and r.taken_on < date(2025, 6, 1))
        fixed = store.correct_reading(reading.id, reason="typed in the wrong unit", today=DEMO_TODAY,
                                      case_drain_lpm=round(reading.case_drain_lpm * 1.5, 2))

    def states(*clock):
        shown = json.loads(_out(capsys, ["show", reading.serial, "--all-readings", "--format", "json", "--db", str(path),
                                         *clock]))
        return {r["id"]: r["state"] for r in shown["readings"]}

    before = states("--as-of", reading.taken_on.isoformat(), "--today", TODAY)
    assert before[reading.id] == "current" and fixed.id not in before  # the correction was not entered yet
    now = states("--today", TODAY)
    assert now[reading.id] == "corrected" and now[fixed.id] == "current"
