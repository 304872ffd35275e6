"""Malformed CSV files (generated) and bad command-line input: a clear message,
never an unhandled exception, nothing written."""

from __future__ import annotations

import random

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from logbook import csvread, imports
from logbook.cli import main
from logbook.imports import import_bytes
from logbook.store import Store

from .conftest import MACHINES, MODELS, PUMPS, READINGS, TODAY, load

BASE = {
    "readings": (
        "serial,date,machine_hours,case_drain,servo_pressure,neutral_drift,oil_temp,test_pressure,test_speed,technician,note\n"
        "S-100,2025-08-01,1900,3.9,25,1.6,50,400,2000,Ana,\n"
        "S-200,2025-08-01,5900,4.1,26,-2.1,50,400,2000,Ben,after filter change\n"
        "S-100,2025-09-01,2000,4.0,24.8,1.7,51,400,2000,Ana,\n"
    ),
    "events": (
        "date,kind,serial,machine,hours,to_machine,to_position,to_hours,note\n"
        "2025-08-15,neutral_reset,S-200,,5950,,,,\n"
        "2025-09-15,move,S-300,,,M-2,aux,6100,from the shelf\n"
    ),
    "pumps": "serial,model,machine,position,fitted_on,machine_hours_at_fit\nS-500,TX-90,M-1,aux,2025-06-01,1600\nS-600,TX-90,,,,\n",
    "machines": "unit,site,description\nM-7,South Yard,spare loader\n",
    "models": "model,displacement,rated_pressure,max_speed,case_drain_limit\nTX-45,45,350,2600,5\n",
}
BAD_CELLS = ["", " ", "abc", "1,5", "1e999", "nan", "-inf", "=A1*2", "=SUM(B2:B9)", "@cmd", "+SUM(1)", "01/08/2025",
             "2025-02-30", "2999-01-01", "4.2gpm", "x" * 600, "line\rbreak", "S 100;", "'; DROP TABLE readings; --",
             "\x00", "\u202e", "−5", "１２", "0x10", "TRUE"]


@st.composite
def mutated(draw):
    """A base file with one to three things wrong with it (or, rarely, right)."""
    table = draw(st.sampled_from(sorted(BASE)))
    lines = [line.split(",") for line in BASE[table].strip("\n").split("\n")]
    for _ in range(draw(st.integers(1, 3))):
        kind = draw(st.sampled_from(["cell", "cell", "drop_cell", "extra_cell", "header", "unit", "drop_column",
                                     "row_copy", "quote", "blank_rows"]))
        row = draw(st.integers(1, len(lines) - 1)) if len(lines) > 1 else 0
        col = draw(st.integers(0, len(lines[0]) - 1))
        if kind == "cell" and col < len(lines[row]):
            lines[row][col] = draw(st.one_of(st.sampled_from(BAD_CELLS), st.text(max_size=12)))
        elif kind == "drop_cell" and lines[row]:
            lines[row].pop(col % len(lines[row]))
        elif kind == "extra_cell":
            lines[row].append(draw(st.sampled_from(BAD_CELLS)))
        elif kind == "header":
            lines[0][col] = draw(st.one_of(st.sampled_from(["colour", "", "serial", "date", "Case Drain", "note"]), st.text(max_size=8)))
        elif kind == "unit":
            lines[0][col] += draw(st.sampled_from([" [psi]", " [kPa]", " [gpm]", " [F]", " []", " [bar", " [h]", " [x]"]))
        elif kind == "drop_column":
            for line in lines:
                if col < len(line):
                    line.pop(col)
        elif kind == "row_copy":
            lines.append(list(lines[row]))
        elif kind == "quote":
            lines[row][col % max(1, len(lines[row]))] = '"unclosed'
        elif kind == "blank_rows":
            lines.insert(row, [""] * len(lines[0]))
    text = "\n".join(",".join(cells) for cell_row in [lines] for cells in cell_row) + "\n"
    encoding = draw(st.sampled_from(["utf-8", "utf-8", "utf-8-sig", "utf-16", "latin-1", "cp1252"]))
    data = text.encode(encoding, errors="replace")
    tail = draw(st.sampled_from([b"", b"", b"\xff\xfe\x00", b"\x00\x00", b"\r\n\r\n", b",,,,\n"]))
    return table, data + tail


def _state(store):
    return store.counts(), len(store.audit_trail()), store.conn.execute("SELECT count(*) FROM imports").fetchone()[0]


def test_malformed_files_are_rejected_whole_with_a_message(tmp_path):
    store = Store(tmp_path / "bad.db", user="tester")
    for table, data in (("models", MODELS), ("machines", MACHINES), ("pumps", PUMPS), ("readings", READINGS)):
        load(store, table, data)
    stats = {"cases": 0, "rejected": 0, "accepted": 0}

    @settings(max_examples=200, deadline=None, suppress_health_check=[HealthCheck.too_slow])
    @given(mutated())
    def check(case):
        table, data = case
        stats["cases"] += 1
        before = _state(store)
        report = import_bytes(store, table, data, name="mutated.csv", today=TODAY)
        if report.problems:
            stats["rejected"] += 1
            assert report.added == 0 and _state(store) == before  # nothing written from a rejected file
            for p in report.problems:
                text = str(p)
                assert p.field and p.allowed and text  # names what is wrong ...
                assert p.line is None or p.line >= 1  # ... and where
        else:
            stats["accepted"] += 1
            counts = _state(store)[0]
            assert counts[table] >= before[0][table] + (report.added if table in ("readings", "events") else 0)

    check()
    print(f"malformed-file cases: {stats}")
    assert stats["cases"] >= 100 and stats["rejected"] > stats["accepted"]
    # Whatever was accepted left a sound database (a model imported without limits is
    # allowed, and reported by the check as a gap to fill).
    assert [f for f in store.check() if f.check != "limits"] == []
    store.close()


def test_random_bytes_never_raise(store):
    rng = random.Random(4406)  # fixed seed: the same 50 files every run
    before = _state(store)
    for _ in range(50):
        data = bytes(rng.randrange(256) for _ in range(rng.randrange(1, 400)))
        for table in imports.TABLES:
            report = import_bytes(store, table, data, name="noise.bin", today=TODAY)
            assert report.problems and report.added == 0
    assert _state(store) == before


def test_files_over_the_size_limit_are_refused(store, tmp_path, monkeypatch, capsys):
    monkeypatch.setattr(csvread, "MAX_FILE_BYTES", 1000)
    report = import_bytes(store, "readings", READINGS * 50, name="big.csv", today=TODAY)
    assert report.problems[0].field == "file" and "split it" in report.problems[0].allowed
    big = tmp_path / "huge.csv"
    with open(big, "wb") as f:  # a sparse file: 201 MiB on paper, nothing read
        f.truncate(201 * 1024 * 1024)
    monkeypatch.undo()
    assert main(["--db", store.path, "import", "readings", str(big)]) == 2
    assert "larger than 200 MiB" in " ".join(capsys.readouterr().err.split())


BAD_ARGS = [
    ["record", "S-100", "--date", "2025-08-01", "--hours", "abc", "--servo-pressure", "25"],
    ["record", "S-100", "--date", "2025-08-01", "--hours", "1e999", "--servo-pressure", "25"],
    ["record", "S-100", "--date", "2025-08-01", "--hours", "nan", "--servo-pressure", "25"],
    ["record", "S-100", "--date", "01/08/2025", "--hours", "1900", "--servo-pressure", "25"],
    ["record", "S-100", "--date", "2031-01-01", "--hours", "1900", "--servo-pressure", "25"],
    ["record", "S-999", "--date", "2025-08-01", "--hours", "1900", "--servo-pressure", "25"],
    ["record", "S-100'; DROP TABLE readings;--", "--date", "2025-08-01", "--hours", "1900", "--servo-pressure", "25"],
    ["record", "S-100", "--date", "2025-08-01", "--hours", "1900", "--servo-pressure", "25 kPa"],
    ["record", "S-100", "--date", "2025-08-01", "--hours", "1900", "--servo-pressure", "=A1"],
    ["record", "S-100", "--date", "2025-08-01", "--hours", "1900", "--oil-grade", "47", "--iso4406", "30/1/2"],
    ["record", "S-100", "--date", "2025-08-01", "--hours", "1900"],
    ["record", "S-100", "--date", "2025-08-01", "--hours", "1900", "--servo-pressure", "25", "--note", "two\nlines"],
    ["event", "overhaul", "S-100", "--date", "2025-08-01", "--hours", "1900", "--technician", "x" * 501],
    ["event", "explode", "S-100", "--date", "2025-08-01"],
    ["event", "overhaul", "S-100", "--date", "2025-08-01", "--hours", "many"],
    ["event", "move", "S-100", "--date", "2025-08-01", "--hours", "1900"],
    ["event", "meter_replaced", "--date", "2025-08-01", "--hours", "1900"],
    ["event", "overhaul", "S-999", "--date", "2025-08-01", "--hours", "1900"],
    ["import", "readings", "/nonexistent/file.csv"],
    ["import", "readings", "."],
    ["model", "TX-90", "--limit", "junk"],
    ["model", "TX-90", "--limit", "case_drain=abc"],
    ["model", "NOPE", "--limit", "case_drain=5"],
    ["model", "--limit", "case_drain=5"],
    ["show", "S-999"],
    ["history", "S-999"],
    ["correct", "9999", "--servo-pressure", "24", "--reason", "x"],
    ["correct", "1", "--reason", "x"],
    ["correct", "1", "--date", "yesterday", "--reason", "x"],
    ["correct", "1", "--servo-pressure", "24", "--reason", "   "],
    ["remove", "event", "9999", "--reason", "x"],
    ["remove", "reading", "1", "--reason", ""],
    ["backup", "."],
    ["backup", "/nonexistent/dir/copy.db"],
    ["--as", "two\nlines", "record", "S-100", "--date", "2025-08-01", "--hours", "1900", "--servo-pressure", "25"],
    ["forecast", "--month", "2025-13"],
    ["forecast", "--horizon", "-1"],
    ["forecast", "--site-capacity", "junk"],
    ["forecast", "--exchange", "TX-90=abc"],
    ["forecast", "--out", "/nonexistent/dir/plan.md"],
    ["round", "--within", "-5"],
    ["round", "--format", "csv"],
    ["round", "--site", "North Yard", "--format", "csv", "--out", "/nonexistent/dir/sheet.csv"],
]
ARGPARSE_ERRORS = [
    ["record", "S-100"],
    ["import", "sideways", "f.csv"],
    ["pumps", "--limit", "x"],
    ["history", "S-100", "--last", "x"],
    ["correct", "abc", "--reason", "x"],
    ["remove", "pump", "1", "--reason", "x"],
    ["remove", "reading", "1"],
    ["--today", "someday", "check"],
]


@pytest.mark.parametrize("argv", BAD_ARGS, ids=lambda a: " ".join(a)[:60])
def test_bad_command_lines_give_a_message_not_a_traceback(store, argv, capsys):
    before = _state(store)
    code = main(["--db", store.path, "--today", TODAY.isoformat(), *argv])
    err = capsys.readouterr().err
    assert code in (1, 2) and err.strip() and "Traceback" not in err
    assert _state(store) == before


@pytest.mark.parametrize("argv", ARGPARSE_ERRORS, ids=lambda a: " ".join(a)[:60])
def test_malformed_command_lines_are_usage_errors(store, argv, capsys):
    before = _state(store)
    with pytest.raises(SystemExit) as exit_:
        main(["--db", store.path, *argv])
    assert exit_.value.code == 2 and "usage:" in capsys.readouterr().err
    assert _state(store) == before


@pytest.mark.parametrize("db_kind", ["text file", "directory", "missing"])
def test_a_database_path_that_is_not_a_logbook(tmp_path, db_kind, capsys):
    path = tmp_path / "x.db"
    if db_kind == "text file":
        path.write_text("serial,date\nthis is a CSV, not a database\n" * 100)
    elif db_kind == "directory":
        path.mkdir()
    for argv in (["check"], ["pumps"], ["show", "S-1"], ["backup", str(tmp_path / "b.db")]):
        assert main(["--db", str(path), *argv]) == 1
        err = capsys.readouterr().err
        assert "logbook:" in err and "Traceback" not in err


def test_sql_in_text_is_stored_as_text(tmp_path):
    """Values always travel as parameters: SQL typed into a note or a name is just text."""
    evil = "x'); DROP TABLE readings; --"
    s = Store(tmp_path / "t.db", user="Robert'); DROP TABLE audit; --")
    for table, data in (("models", MODELS), ("machines", MACHINES), ("pumps", PUMPS), ("readings", READINGS)):
        load(s, table, data)
    data = f"serial,date,machine_hours,servo_pressure,technician,note\nS-200,2025-08-01,5900,25,Ana,{evil}\n".encode()
    assert import_bytes(s, "readings", data, name=f"{evil}.csv", today=TODAY).problems == []
    assert s.readings("S-200")[-1].note == evil
    assert s.counts()["readings"] == 4 and s.audit_trail()[-1]["who"] == "Robert'); DROP TABLE audit; --"
    assert s.check() == []
    s.close()
