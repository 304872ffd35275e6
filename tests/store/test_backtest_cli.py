"""`logbook backtest` end to end on the demo fleet: every format, the figures adding up across
groups, the html self-contained, bad arguments named with nothing written."""

from __future__ import annotations

import csv
import io
import json
import re

import pytest

from logbook.cli import main

TODAY = "2026-12-01"
SPAN = ["--from", "2025-01-15", "--to", "2025-07-15", "--every", "3-months", "--today", TODAY]


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    path = tmp_path_factory.mktemp("backtest") / "demo.db"
    assert main(["demo", "--no-ui", "--db", str(path), "--today", TODAY]) == 0
    return path


def _run(capsys, demo, *argv) -> str:
    capsys.readouterr()
    assert main(["backtest", "--db", str(demo), *SPAN, *argv]) == 0
    return capsys.readouterr().out


@pytest.fixture(scope="module")
def as_json(demo, tmp_path_factory):
    out = tmp_path_factory.mktemp("backtest_json") / "b.json"
    assert main(["backtest", "--db", str(demo), *SPAN, "--out", str(out)]) == 0  # json from the suffix
    return json.loads(out.read_text())


def test_json_holds_the_origins_and_figures_that_add_up(as_json):
    data = as_json
    assert data["kind"] == "logbook backtest" and data["calibration"] is True
    assert data["origins"] == ["2025-01-15", "2025-04-15", "2025-07-15"]
    overall = data["overall"]
    assert overall["later_readings"] > 1000
    assert sum(overall["pit_histogram"]) == overall["later_readings"]
    for grouping in ("by_model", "by_path", "by_readings", "by_horizon"):
        groups = data[grouping].values()
        assert sum(g["later_readings"] for g in groups) == overall["later_readings"], grouping
        assert sum(g["series"] for g in groups) == overall["series"], grouping
    assert sum(p["later_readings"] for p in data["pumps"].values()) == overall["later_readings"]
    assert overall["before_p10"] + overall["inside_p10_p90"] + overall["after_p90"] + overall["open"] == overall["series"]
    assert 0 <= overall["below_p10"] <= 1 and len(overall["observed_at_nominal"]) == len(data["nominal"]["quantiles"])


def test_text_fits_80_columns_and_names_what_is_left_out(demo, capsys, monkeypatch):
    monkeypatch.setenv("COLUMNS", "80")
    out = _run(capsys, demo)
    assert "by pump model" in out and "<P10" in out and "PIT histogram" in out
    assert all(len(line) <= 80 for line in out.splitlines())


def test_md_csv_and_html(demo, capsys, tmp_path, as_json):
    md = _run(capsys, demo, "--format", "md")
    assert "## by pump model" in md and "| TQ-55 |" in md
    rows = list(csv.DictReader(io.StringIO(_run(capsys, demo, "--format", "csv"))))
    overall = next(r for r in rows if r["grouping"] == "overall")
    assert int(overall["readings"]) == as_json["overall"]["later_readings"]
    assert sum(int(overall[f"pit_{i}"]) for i in range(1, 11)) == int(overall["readings"])
    out = tmp_path / "b.html"
    assert main(["backtest", "--db", str(demo), *SPAN, "--out", str(out)]) == 0  # format from the suffix
    page = out.read_text()
    assert page.startswith("<!DOCTYPE html>") and page.count("<svg") == 2 and "<polyline" in page
    # nothing fetched: no scripts, links or sources; the only URL is the SVG namespace (a name, never loaded)
    assert "<script" not in page and "src=" not in page and "href=" not in page
    assert set(re.findall(r"https?://[^\"' ]+", page)) == {"http://www.w3.org/2000/svg"}


def test_model_choice_and_raw_bands(demo, capsys, as_json):
    one = json.loads(_run(capsys, demo, "--format", "json", "--model", "TQ-55"))
    assert list(one["by_model"]) == ["TQ-55"]
    assert one["overall"]["later_readings"] == as_json["by_model"]["TQ-55"]["later_readings"]
    raw = json.loads(_run(capsys, demo, "--format", "json", "--no-calibration"))
    assert raw["calibration"] is False and raw["overall"]["later_readings"] == as_json["overall"]["later_readings"]
    assert raw["overall"]["pit_histogram"] != as_json["overall"]["pit_histogram"]


@pytest.mark.parametrize("argv, named", [
    (["--every", "2-weeks"], "--every = '2-weeks'"),
    (["--every", "0-months"], "--every = '0-months'"),
    (["--from", "2025-13-01"], "--from = '2025-13-01'"),
    (["--from", "2025-06-01", "--to", "2025-01-01"], "a day on or before --to"),
    (["--to", "2027-01-01"], "today (2026-12-01) or earlier"),
    (["--model", "NOPE"], "--model = 'NOPE'"),
    (["--site", "Nowhere"], "--site = 'Nowhere'"),
])
def test_bad_arguments_are_named_and_nothing_is_written(demo, capsys, tmp_path, argv, named):
    out = tmp_path / "b.json"
    capsys.readouterr()
    assert main(["backtest", "--db", str(demo), "--today", TODAY, "--out", str(out), *argv]) == 2
    err = capsys.readouterr().err
    assert named in err and "nothing done" in err
    assert not out.exists()


def test_the_database_is_never_the_output(demo, capsys):
    before = demo.read_bytes()
    assert main(["backtest", "--db", str(demo), *SPAN, "--format", "json", "--out", str(demo)]) == 2
    assert "it is the database itself" in capsys.readouterr().err
    assert demo.read_bytes() == before


def test_forecast_says_what_its_bands_were_calibrated_on(demo, capsys):
    def forecast(*extra):
        capsys.readouterr()
        assert main(["forecast", "--db", str(demo), "--today", TODAY, "--format", "json", *extra]) == 0
        return json.loads(capsys.readouterr().out)

    calibrated, raw = forecast(), forecast("--no-calibration")
    most = {}
    for row in calibrated["forecasts"]:
        key = (row["model"], row["kind"])
        most[key] = max(most.get(key, 0), row["band_checked_on_readings"])
    line = next(n for n in calibrated["notes"] if n.startswith("TQ-55 bands"))
    assert f"case drain {most[('TQ-55', 'case_drain')]:,}" in line and most[("TQ-55", "case_drain")] >= 30
    assert any("uncalibrated bands (--no-calibration)" in n for n in raw["notes"])
    assert all(row["band_checked_on_readings"] == 0 for row in raw["forecasts"])
    p10 = {(r["serial"], r["kind"]): r["p10_hours"] for r in calibrated["forecasts"]}
    assert any(p10[(r["serial"], r["kind"])] != r["p10_hours"] for r in raw["forecasts"])  # the raw bands differ
