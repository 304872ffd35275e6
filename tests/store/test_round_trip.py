"""Round sheet CSV out, filled in, imported back: readings present, blanks skipped, a bad row
rejected with its line number (the file's own, the safety comment rows counted) and nothing
written."""

from __future__ import annotations

import csv
import io
from datetime import date

import pytest

from logbook import rounds
from logbook.cautions import SAFETY
from logbook.exports.round_sheet import build_sheet, render_csv
from logbook.imports import import_bytes
from tests.store.conftest import TODAY

#: The sheet's comment rows before its header: the safety title, the warning, items, deferral.
COMMENTS = 1 + len(SAFETY.lines())


def _sheet(store) -> list[list[str]]:
    """A 180-day interval puts S-100 (read 2025-05-01) and S-200 (2025-03-01) on the round."""
    store.update_model("TX-90", reading_interval_days=180)
    fleet = store.fleet()
    tests = rounds.plan_round(fleet, None, TODAY, site="North Yard", within_days=0)
    assert [(t.machine, t.serial) for t in tests] == [("M-1", "S-100"), ("M-2", "S-200")]
    text = render_csv(build_sheet(fleet, None, tests, site="North Yard", made_on=TODAY, test_by=TODAY))
    return list(csv.reader(io.StringIO(text)))


def _fill(rows: list[list[str]], serial: str, **values) -> None:
    assert all(r[0].startswith("# ") for r in rows[:COMMENTS])
    col = {name: i for i, name in enumerate(rows[COMMENTS])}
    row = next(r for r in rows[COMMENTS + 1:] if r[col["serial"]] == serial)
    for name, value in values.items():
        row[col[name]] = str(value)


def _bytes(rows: list[list[str]]) -> bytes:
    buf = io.StringIO()
    csv.writer(buf, lineterminator="\r\n").writerows(rows)
    return buf.getvalue().encode("utf-8")


def test_filled_sheet_imports_and_blank_rows_are_skipped(store):
    rows = _sheet(store)
    assert rows[COMMENTS + 1][:5] == ["S-100", "", "M-1", "main", ""]  # date and meter left for the technician
    _fill(rows, "S-100", date="2026-11-30", machine_hours=2900, case_drain=4.4, servo_pressure=24.8,
          neutral_drift=-1.9, oil_temp=52, technician="Ana")
    before = store.counts()
    report = import_bytes(store, "readings", _bytes(rows), name="round.csv", today=TODAY)
    assert (report.added, report.blank, report.problems) == (1, 1, [])
    new = [r for r in store.readings("S-100") if r.taken_on == date(2026, 11, 30)]
    assert len(new) == 1
    r = new[0]
    assert (r.machine, r.machine_hours, r.case_drain_lpm, r.servo_pressure_bar, r.neutral_drift_bar) == (
        "M-1", 2900, 4.4, 24.8, -1.9)
    # prefilled conditions came from the model: reference pressure 400 bar (rated), test speed 2000 rpm
    assert (r.test_pressure_bar, r.test_speed_rpm, r.oil_temp_c, r.technician) == (400, 2000, 52, "Ana")
    assert store.counts() == {**before, "readings": before["readings"] + 1}


def test_a_bad_row_is_rejected_with_its_line_and_nothing_is_written(store):
    rows = _sheet(store)
    _fill(rows, "S-100", date="2026-11-30", machine_hours=2900, servo_pressure=24.8)
    _fill(rows, "S-200", date="2026-11-30", machine_hours=4000, servo_pressure=25.0)  # meter runs backwards
    before, readings = store.counts(), store.readings()
    report = import_bytes(store, "readings", _bytes(rows), name="round.csv", today=TODAY)
    assert report.added == 0
    assert [(p.line, p.field) for p in report.problems] == [(COMMENTS + 3, "machine_hours")]  # S-200's line
    assert "runs backwards" in str(report.problems[0])
    assert store.counts() == before and store.readings() == readings


def test_a_pump_moved_since_the_sheet_was_made_is_rejected(store):
    rows = _sheet(store)
    _fill(rows, "S-200", machine="M-1", date="2026-11-30", machine_hours=5900, servo_pressure=25.0)
    report = import_bytes(store, "readings", _bytes(rows), name="round.csv", today=TODAY)
    assert [(p.line, p.field) for p in report.problems] == [(COMMENTS + 3, "machine")]


@pytest.mark.parametrize("blank_values", [{}, {"date": "2026-11-30"}, {"date": "2026-11-30", "machine_hours": 2900}])
def test_a_row_with_nothing_measured_is_blank_whatever_else_is_filled(store, blank_values):
    rows = _sheet(store)
    _fill(rows, "S-100", **blank_values)
    report = import_bytes(store, "readings", _bytes(rows), name="round.csv", today=TODAY)
    assert (report.added, report.blank, report.problems) == (0, 2, [])


TREND = b"""serial,date,machine_hours,servo_pressure
S-100,2025-07-01,1900,25.05
S-100,2025-09-01,2300,24.75
S-100,2025-11-01,2700,24.55
S-100,2026-01-01,3100,24.25
S-100,2026-03-01,3500,24.05
"""


def test_round_and_import_commands_end_to_end(store, tmp_path, capsys):
    from logbook.cli import main

    # S-100 servo pressure falls about 0.6 bar per 1000 h (26.0 at 1100 h ... 24.05 at 3500 h)
    assert import_bytes(store, "readings", TREND, name="trend.csv", today=TODAY).added == 5
    store.update_model("TX-90", reading_interval_days=300)  # S-100 due 2026-12-26, S-200 since 2025-12-26
    db = ["--db", str(store.path), "--today", TODAY.isoformat()]
    assert main([*db, "round", "--within", "0"]) == 0
    listed = capsys.readouterr().out
    assert "S-200" in listed and "every 300 days" in listed and "S-100" not in listed
    sheet = tmp_path / "round.csv"
    assert main([*db, "round", "--site", "North Yard", "--within", "300", "--format", "csv", "--out", str(sheet)]) == 0
    rows = list(csv.reader(io.StringIO(sheet.read_text())))
    # the trend says about 26.0 - 0.0008 * 2900 = 23.7 bar at 4000 h; 15 bar is far below it
    _fill(rows, "S-100", date="2026-11-30", machine_hours=4000, servo_pressure=15.0)
    _fill(rows, "S-200", date="2026-11-30", machine_hours=5900, servo_pressure=26.5)
    sheet.write_bytes(_bytes(rows))
    capsys.readouterr()
    assert main([*db, "import", "readings", str(sheet)]) == 0
    out = capsys.readouterr().out
    assert "added 2 readings" in out
    looks = [line for line in out.splitlines() if "second look" in line]
    assert len(looks) == 1 and "S-100 2026-11-30 servo pressure 15.00 bar is below" in looks[0]


def test_round_sheet_needs_a_known_site(store, capsys):
    from logbook.cli import main

    db = ["--db", str(store.path), "--today", TODAY.isoformat()]
    assert main([*db, "round", "--format", "md"]) == 2
    assert main([*db, "round", "--site", "Nowhere"]) == 2
    err = capsys.readouterr().err
    assert "--site is required" in err and "'Nowhere': not a known site; known: North Yard" in err
