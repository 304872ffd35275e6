"""The command line as a user at an 80-column terminal and a cron job see it: tables that
fit with serials and dates whole, stderr lines never broken when it is not a terminal,
--version, arguments refused before the fleet is read, and TERM=dumb."""

from __future__ import annotations

import json
import os
import re
import subprocess
import sys
import tomllib
from pathlib import Path

import pytest

from logbook.cli import main
from tests.store.test_cli import TODAY, demo, demo_master  # noqa: F401  (the demo fleet fixtures)

ROOT = Path(__file__).resolve().parents[2]
DATE = re.compile(r"\d{4}-\d{2}-\d{2}")


def _run(capsys, monkeypatch, db, *args, columns=80):
    monkeypatch.setenv("COLUMNS", str(columns))
    code = main(["--db", str(db), "--today", TODAY, *args])
    out = capsys.readouterr()
    return code, out.out, out.err


def _fits(out: str, width: int = 80) -> None:
    long = [line for line in out.splitlines() if len(line.rstrip()) > width]
    assert not long, long[:3]


def test_pumps_at_80_columns_shows_every_serial_and_p10_date_whole(demo, capsys, monkeypatch):
    code, out, _ = _run(capsys, monkeypatch, demo, "pumps")
    assert code == 0
    _fits(out)
    code, doc, _ = _run(capsys, monkeypatch, demo, "pumps", "--format", "json")
    pumps = json.loads(doc)["pumps"]
    lines = out.splitlines()
    body = [line for line in lines[1:] if re.match(r"[A-Z]-\d+ ", line)]
    assert [line.split()[0] for line in body] == [p["serial"] for p in pumps]  # every serial whole, in order
    for line, p in zip(body, pumps):
        worst = next(k for k in p["readings"] if k["kind"] == p["nearest_limit"]) if p["nearest_limit"] else None
        p10 = worst["p10_date"] if worst else None
        assert (p10 in DATE.findall(line)) if p10 else "-" in line.split()
    assert "left out at 80 columns" in out  # what a narrow terminal does not show is said


def test_pumps_wide_terminal_keeps_every_column(demo, capsys, monkeypatch):
    _, out, _ = _run(capsys, monkeypatch, demo, "pumps", columns=200)
    header = out.splitlines()[0]
    for col in ("serial", "machine/pos", "model", "h since overhaul", "nearest limit", "P10", "P50", "status", "next reading"):
        assert col in header
    assert "left out" not in out


def test_rows_is_a_count_of_pumps(demo, capsys, monkeypatch):
    code, out, _ = _run(capsys, monkeypatch, demo, "pumps", "--rows", "3", "--format", "csv")
    assert code == 0 and len(out.strip().splitlines()) == 1 + 3
    code, _, err = _run(capsys, monkeypatch, demo, "pumps", "--rows", "-1")
    assert code == 2 and "--rows = -1" in err


@pytest.mark.parametrize("serial", ["C-28412", "D-15264"])
def test_show_at_80_columns_keeps_dates_whole(demo, capsys, monkeypatch, serial):
    code, out, _ = _run(capsys, monkeypatch, demo, "show", serial, "--all-readings")
    assert code == 0
    _fits(out)
    _, doc, _ = _run(capsys, monkeypatch, demo, "show", serial, "--all-readings", "--format", "json")
    taken = [r["taken_on"] for r in json.loads(doc)["readings"]]
    shown = [d for line in out.splitlines() if re.match(r"^\s*\d+( corrected| removed)?\s+\d{4}-", line)
             for d in DATE.findall(line)[:1]]
    assert shown == taken
    assert "drain L/min" in out and "servo bar" in out  # the unit once, in the header


def test_history_round_costs_and_models_fit_80_columns(demo, capsys, monkeypatch):
    for args in (("history", "C-28412"), ("round", "--all"), ("costs",), ("check",), ("model",), ("model", "--units", "us")):
        code, out, _ = _run(capsys, monkeypatch, demo, *args)
        assert code == 0, args
        _fits(out)
    _, out, _ = _run(capsys, monkeypatch, demo, "history", "C-28412")
    assert "when (UTC)" in out.splitlines()[1]  # the header row under the title, not after it on one line
    assert all(re.match(r"\d{4}-\d{2}-\d{2} \d{2}:\d{2}", line) for line in out.splitlines()[2:] if line[:1].isdigit())
    _, out, _ = _run(capsys, monkeypatch, demo, "model")
    header = out.splitlines()[0]
    assert "drain limit L/min" in header and "servo limit bar" in header  # units once, in the header
    assert re.search(r"TQ-90 .*> \d+\.\d\d .*< \d+\.\d\d", out)


def test_stderr_is_not_wrapped_when_it_is_not_a_terminal(demo):
    env = {**os.environ, "COLUMNS": "80"}
    run = subprocess.run([sys.executable, "-m", "logbook", "--db", str(demo), "--today", TODAY, "round", "--format", "md"],
                         capture_output=True, text=True, env=env)
    assert run.returncode == 2
    lines = [line for line in run.stderr.splitlines() if line.strip()]
    # one message, one line (a cron log line stays whole), however long
    assert len(lines) == 1 and len(lines[0]) > 80 and lines[0].endswith("lists the sites)")


def test_version_is_the_distribution_version(capsys):
    project = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]
    with pytest.raises(SystemExit) as stop:
        main(["--version"])
    assert stop.value.code == 0
    assert capsys.readouterr().out.strip() == f"logbook {project['version']}"


def test_round_sheet_without_site_is_refused_before_the_fleet_is_read(demo, capsys, monkeypatch):
    from logbook.store import Store

    def no(*_a, **_k):
        raise AssertionError("the fleet was read before the arguments were checked")

    monkeypatch.setattr(Store, "fleet", no)
    code, _, err = _run(capsys, monkeypatch, demo, "round", "--format", "csv")
    assert code == 2 and "--site is required with --format csv" in err
    code, _, err = _run(capsys, monkeypatch, demo, "round", "--within", "-3")
    assert code == 2 and "--within = -3" in err


def test_dumb_terminal_gets_the_fleet_list_not_a_view_that_cannot_paint(demo, capsys, monkeypatch):
    import logbook.tui.app as app_module
    from logbook.tui import launch

    monkeypatch.setenv("TERM", "dumb")
    monkeypatch.setattr(launch.os, "isatty", lambda fd: True)

    def no_app(*_a, **_k):
        raise AssertionError("the full-screen view was started on TERM=dumb")

    monkeypatch.setattr(app_module, "make_app", no_app)
    code, out, err = _run(capsys, monkeypatch, demo)
    assert code == 0
    assert "TERM='dumb'" in err and "logbook pumps" in err
    assert "pumps on 2026-12-01" in out and "serial" in out
