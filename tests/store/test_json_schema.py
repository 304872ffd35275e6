"""Every `--format json` listing parses and matches its documented JSON Schema
(docs/logbook.schema.json, described in docs/json.md); CSV listings hold the same pumps.

The validator is the `jsonschema` package (JSON Schema draft 2020-12, the published
specification at json-schema.org), a test extra."""

from __future__ import annotations

import csv
import io
import json
from pathlib import Path

import jsonschema
import pytest

from logbook.cli import main
from tests.store.test_cli import TODAY, demo, demo_master  # noqa: F401  (the demo fleet fixtures)

SCHEMA = json.loads((Path(__file__).resolve().parents[2] / "docs" / "logbook.schema.json").read_text())
VALIDATOR = jsonschema.Draft202012Validator(SCHEMA)
COMMANDS = [("pumps",), ("pumps", "--units", "us"), ("show", "D-15264", "--all-readings"), ("show", "C-28412"),
            ("history", "C-28412"), ("check",)]


def _json(capsys, db, *args) -> dict:
    code = main(["--db", str(db), "--today", TODAY, *args, "--format", "json"])
    assert code == 0
    return json.loads(capsys.readouterr().out)


def test_the_schema_is_a_valid_json_schema():
    jsonschema.Draft202012Validator.check_schema(SCHEMA)


@pytest.mark.parametrize("args", COMMANDS, ids=" ".join)
def test_json_output_matches_the_documented_schema(demo, capsys, args):
    doc = _json(capsys, demo, *args)
    errors = [f"{list(e.absolute_path)}: {e.message}" for e in VALIDATOR.iter_errors(doc)]
    assert not errors, errors[:5]
    assert doc["schema"] == f"logbook.{args[0]}" and doc["schema_version"] == 1


def test_forecast_json_matches_the_documented_schema(demo, capsys):
    doc = _json(capsys, demo, "forecast", "--capacity", "2")
    errors = [f"{list(e.absolute_path)}: {e.message}" for e in VALIDATOR.iter_errors(doc)]
    assert not errors, errors[:5]
    assert doc["schema"] == "logbook.forecast" and doc["units"]["flow"] == "L/min"
    assert all(line["unit"] in ("L/min", "bar") for line in doc["plan"]["lines"])
    assert {r["status"]["code"] for r in doc["forecasts"]} <= set(SCHEMA["$defs"]["status"]["properties"]["code"]["enum"])


def test_the_schema_rejects_what_it_must(demo, capsys):
    doc = _json(capsys, demo, "pumps")
    bad = json.loads(json.dumps(doc))
    bad["pumps"][0]["status"] = "✖ over limit"  # a display string, as before schema version 1
    assert not VALIDATOR.is_valid(bad)
    bad = json.loads(json.dumps(doc))
    del bad["units"]
    assert not VALIDATOR.is_valid(bad)
    bad = json.loads(json.dumps(doc))
    bad["pumps"][0]["readings"][0]["p10_date"] = "03/01/2027"
    assert not VALIDATOR.is_valid(bad)


def test_units_follow_the_choice_and_values_convert(demo, capsys):
    metric = _json(capsys, demo, "pumps")
    us = _json(capsys, demo, "pumps", "--units", "us")
    assert metric["units"]["pressure"] == "bar" and us["units"]["pressure"] == "psi"
    m = next(k for k in metric["pumps"][0]["readings"] if k["kind"] == "servo_pressure")
    u = next(k for k in us["pumps"][0]["readings"] if k["kind"] == "servo_pressure")
    assert m["unit"] == "bar" and u["unit"] == "psi"
    # 1 bar = 1e5 Pa, 1 psi = 6894.757293168361 Pa (NIST SP 811, Appendix B.8)
    assert u["limit"] == pytest.approx(m["limit"] * 1e5 / 6894.757293168361, rel=1e-4)


def test_status_is_a_code_with_words(demo, capsys):
    from logbook.analysis.status import STATUS_ORDER
    from logbook.exports.listings import status_json

    codes = SCHEMA["$defs"]["status"]["properties"]["code"]["enum"]
    assert sorted(status_json(w)["code"] for w in STATUS_ORDER) == sorted(codes)  # every status documented
    doc = _json(capsys, demo, "pumps")
    first = doc["pumps"][0]["status"]
    assert first["symbol"] + " " + first["words"] in STATUS_ORDER


def test_csv_listing_holds_the_same_pumps_in_the_same_order(demo, capsys):
    doc = _json(capsys, demo, "pumps")
    assert main(["--db", str(demo), "--today", TODAY, "pumps", "--format", "csv"]) == 0
    rows = list(csv.DictReader(io.StringIO(capsys.readouterr().out)))
    assert [r["serial"] for r in rows] == [p["serial"] for p in doc["pumps"]]
    assert [r["status code"] for r in rows] == [p["status"]["code"] for p in doc["pumps"]]
