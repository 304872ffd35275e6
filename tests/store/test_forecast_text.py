"""`logbook forecast` on a terminal: the plan's months as tables that fit it, not pages of Markdown."""

from __future__ import annotations

import json
import re

from logbook.cli import main

TODAY = "2026-12-01"


def test_the_text_plan_lists_every_planned_pump_within_80_columns(tmp_path, capsys, monkeypatch):
    monkeypatch.setenv("COLUMNS", "80")  # a terminal 80 wide
    db = tmp_path / "d.db"
    assert main(["demo", "--no-ui", "--db", str(db), "--today", TODAY]) == 0
    capsys.readouterr()
    assert main(["--db", str(db), "--today", TODAY, "forecast", "--format", "json"]) == 0
    planned = [line["serial"] for line in json.loads(capsys.readouterr().out)["plan"]["lines"]]
    assert planned
    assert main(["--db", str(db), "--today", TODAY, "forecast", "--format", "text"]) == 0
    out = capsys.readouterr().out
    assert out.startswith("Overhaul plan 2026-12 to ") and f"planned ({len(planned)})" in out
    assert "assumed: shop capacity no limit; exchange pumps no limit set" in " ".join(out.split())
    rows = [m.group(1) for m in re.finditer(r"^\d{4}-\d{2}  ([A-Z]-\d+) ", out, re.M)]
    assert rows == planned  # the plan's own order, every line
    assert max(len(line) for line in out.splitlines()) <= 80
    # text is for the terminal: a file gets one of the file formats, nothing is written
    assert main(["--db", str(db), "forecast", "--format", "text", "--out", str(tmp_path / "p.txt")]) == 2
    assert "--format" in capsys.readouterr().err and not (tmp_path / "p.txt").exists()
