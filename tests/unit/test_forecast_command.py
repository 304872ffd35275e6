"""`logbook forecast` end to end on the demo fleet: files, exit codes, messages, no TTY needed."""

from __future__ import annotations

import csv
import io
import json
import subprocess
import sys
from datetime import date

import pytest

from logbook.cautions import SAFETY
from logbook.cli import main

TODAY = "2026-03-02"


@pytest.fixture(scope="module")
def demo_db(tmp_path_factory):
    path = tmp_path_factory.mktemp("forecast") / "demo.db"
    assert main(["--db", str(path), "--today", TODAY, "demo", "--no-ui"]) == 0
    return path


def run_cli(db, *args):
    """Run in a child process with pipes (no terminal), as cron would."""
    cmd = [sys.executable, "-m", "logbook", "--db", str(db), "--today", TODAY, "forecast", *args]
    return subprocess.run(cmd, capture_output=True, stdin=subprocess.DEVNULL, timeout=300)


@pytest.mark.slow
def test_json_to_stdout_in_a_pipe_has_no_progress_noise(demo_db):
    done = run_cli(demo_db, "--format", "json", "--capacity", "2", "--month", "2026-04", "--horizon", "4")
    assert done.returncode == 0, done.stderr
    assert done.stderr == b""  # no progress display and no chatter when not on a terminal
    doc = json.loads(done.stdout)  # parses back (standard library json)
    assert doc["provenance"]["made_on"] == TODAY and doc["provenance"]["safety"] == SAFETY.as_dict()
    assert doc["provenance"]["database"] == str(demo_db)
    months = [line["month"] for line in doc["plan"]["lines"] if line["work"] == "shop"]
    assert all(months.count(m) <= 2 for m in months)
    assert all("2026-04" <= m <= "2026-07" for m in months)


@pytest.mark.slow
def test_csv_file_is_written_and_same_bytes_twice(demo_db, tmp_path):
    out = tmp_path / "plan.csv"
    first = run_cli(demo_db, "--out", str(out), "--capacity", "3", "--site-capacity", "Lowmarsh Pit=1")
    assert first.returncode == 0, first.stderr
    data = out.read_bytes()
    assert run_cli(demo_db, "--out", str(out), "--capacity", "3", "--site-capacity", "Lowmarsh Pit=1").returncode == 0
    assert out.read_bytes() == data
    rows = list(csv.reader(io.StringIO(data.decode("utf-8-sig"), newline="")))
    assert ["# made on", TODAY] in rows
    assert not list(tmp_path.glob(".plan.csv.*"))  # no temporary file left behind


@pytest.mark.parametrize(
    "args, words",
    [
        (("--month", "2026-13"), ["--month", "2026-13", "YYYY-MM"]),
        (("--capacity", "-1"), ["--capacity", "-1"]),
        (("--exchange", "NOPE=1"), ["--exchange", "NOPE=1", "must be one of"]),
        (("--site-capacity", "Lowmarsh Pit"), ["--site-capacity", "NAME=N"]),
        (("--out", "/no/such/folder/plan.csv"), ["--out", "existing folder"]),
    ],
)
@pytest.mark.slow
def test_bad_arguments_exit_2_and_name_the_field(demo_db, args, words):
    done = run_cli(demo_db, *args)
    assert done.returncode == 2 and done.stdout == b""
    for word in words:
        assert word.encode() in done.stderr


@pytest.mark.slow
def test_missing_and_unreadable_database_exit_1(tmp_path):
    done = run_cli(tmp_path / "absent.db")
    assert done.returncode == 1 and b"no logbook database" in done.stderr
    junk = tmp_path / "junk.db"
    junk.write_bytes(b"this is not a database" * 100)
    done = run_cli(junk)
    assert done.returncode == 1 and b"not a usable logbook database" in done.stderr


@pytest.mark.slow
def test_format_follows_the_out_suffix(demo_db, tmp_path, capsys):
    out = tmp_path / "plan.html"
    assert main(["--db", str(demo_db), "--today", TODAY, "forecast", "--out", str(out), "--capacity", "2"]) == 0
    page = out.read_text(encoding="utf-8")
    assert page.startswith("<!DOCTYPE html>") and f"Made on: {date.fromisoformat(TODAY).isoformat()}" in page


@pytest.mark.slow
def test_units_us_reach_every_forecast_format(demo_db, tmp_path):
    # Reference: scipy.constants (NIST SP 811): 1 bar = 14.5038 psi, 1 L/min = 0.264172 US gpm
    from scipy import constants

    factor = {"bar": constants.bar / constants.psi, "L/min": constants.litre / constants.gallon}
    us_unit = {"bar": "psi", "L/min": "gpm"}
    docs = {}
    for units in ("metric", "us"):
        out = tmp_path / f"plan-{units}.json"
        assert main(["--units", units, "--db", str(demo_db), "--today", TODAY, "forecast", "--out", str(out),
                     "--capacity", "2"]) == 0
        docs[units] = json.loads(out.read_text(encoding="utf-8"))
    assert docs["us"]["units"]["pressure"] == "psi" and docs["us"]["units"]["flow"] == "gpm"
    pairs = list(zip(docs["metric"]["forecasts"], docs["us"]["forecasts"]))
    assert pairs and all(u["unit"] == us_unit[m["unit"]] for m, u in pairs)
    for m, u in pairs:
        if m["latest_value"] is not None:
            assert u["latest_value"] == pytest.approx(m["latest_value"] * factor[m["unit"]], rel=1e-3, abs=1e-3)
    for fmt in ("csv", "md", "html"):
        out = tmp_path / f"plan-us.{fmt}"
        assert main(["--units", "us", "--db", str(demo_db), "--today", TODAY, "forecast", "--out", str(out),
                     "--capacity", "2"]) == 0
        text = out.read_text(encoding="utf-8-sig")
        assert " psi" in text and " gpm" in text and " L/min" not in text, fmt
