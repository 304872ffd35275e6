"""What an import tells: the second look computed per fit on arrays (the same lines as a
textbook prediction interval per reading), long lists capped on screen with the whole list
in a file, hints for ';' separators and decimal commas, ISO 4406 codes in the standard's
form, and a progress bar only on a terminal."""

from __future__ import annotations

import io
import math
import random
from dataclasses import replace
from datetime import date, timedelta

import pytest
from rich.console import Console
from scipy import stats

from logbook import validate
from logbook.analysis.fleet import forecast_fleet
from logbook.analysis.normalize import normalized_value
from logbook.analysis.results import FitDetail
from logbook.cli import main
from logbook.commands import SHOWN
from logbook.commands.progress import Steps
from logbook.csvread import read_table
from logbook.model import Reading
from logbook.rounds import second_look
from logbook.store import Store
from tests.store.test_cli import TODAY, demo, demo_master  # noqa: F401  (the demo fleet fixtures)

DAY = date.fromisoformat(TODAY)


def _new_readings(fleet, n_pumps: int, seed: int = 3) -> list[Reading]:
    """Per pump, three new readings after its last: its last values with scatter, one of them far off."""
    rng = random.Random(seed)
    last: dict[str, Reading] = {}
    for r in sorted(fleet.readings, key=lambda r: (r.taken_on, r.machine_hours)):
        if r.superseded_by is None and r.removed_reason is None:
            last[r.serial] = r
    out = []
    for serial in sorted(last)[:n_pumps]:
        r = last[serial]
        for k in range(3):
            wild = k == 2 and rng.random() < 0.5
            out.append(replace(r, id=None, taken_on=min(r.taken_on + timedelta(days=1 + k), DAY),
                               machine_hours=r.machine_hours + 8 * (1 + k),
                               case_drain_lpm=None if r.case_drain_lpm is None else
                               r.case_drain_lpm * (1.8 if wild else 1 + rng.gauss(0, 0.03)),
                               servo_pressure_bar=None if r.servo_pressure_bar is None else
                               r.servo_pressure_bar * (1 + rng.gauss(0, 0.01))))
    return out


def _textbook(before, forecast, new, coverage=0.95) -> set[tuple[str, date, str]]:
    """The second look one reading at a time, as the textbook prediction interval for a new
    observation of a straight-line fit: a + b x +/- t(1 - alpha/2, dof) sqrt(Var(a + b x) + s^2)
    (Draper and Smith, Applied Regression Analysis, 3rd ed., section 3.2), t from
    scipy.stats.t.ppf; on the log scale for the exponential path."""
    from logbook.analysis.fleet import pack_fleet
    from logbook.analysis.timeline import Timeline
    from logbook.model import ALL_KINDS

    packed = pack_fleet(before, forecast.today)
    position = {s: i for i, s in enumerate(packed.serials)}
    new = sorted(new, key=lambda r: (r.serial, r.taken_on, r.machine_hours))
    hours = Timeline(before.fitments, new, before.events).hours
    found = set()
    for i, r in enumerate(new):
        pf = forecast.pump(r.serial)
        if pf is None or r.serial not in position:
            continue
        for kf in pf.kinds:
            if kf.fit is None or r.value(kf.kind) is None:
                continue
            row = 3 * position[r.serial] + ALL_KINDS.index(kf.kind)
            if packed.pack.started[row] and r.taken_on < packed.pack.start_on[row]:
                continue
            x = float(hours[i] - packed.pack.origin[row])
            (a, b), ((c00, c01), (_, c11)) = kf.fit.params, kf.fit.cov
            se = math.sqrt(max(c00 + 2 * x * c01 + x * x * c11 + kf.fit.sigma ** 2, 0.0))
            t = stats.t.ppf(0.5 + coverage / 2, max(kf.fit.dof, 1))
            lo, hi = a + b * x - t * se, a + b * x + t * se
            if kf.fit.path == "exponential":
                lo, hi = math.exp(lo), math.exp(hi)
            value = normalized_value(r, kf.kind, before.models[before.pumps[r.serial].model])
            if not lo <= value <= hi:
                found.add((r.serial, r.taken_on, kf.kind.label))
    return found


def test_second_look_is_one_call_per_fit_and_agrees_with_the_textbook_interval(demo, monkeypatch):
    with Store(demo) as store:
        before = store.fleet()
    forecast = forecast_fleet(before, DAY)
    new = _new_readings(before, 40)
    calls = {"below": 0, "bounds": 0}
    for name in calls:
        real = getattr(FitDetail, name)

        def counted(self, *a, _real=real, _name=name, **k):
            calls[_name] += 1
            return _real(self, *a, **k)

        monkeypatch.setattr(FitDetail, name, counted)
    lines = second_look(before, forecast, new)
    fits = {(r.serial, kf.kind) for r in new for kf in forecast.pump(r.serial).kinds
            if kf.fit is not None and r.value(kf.kind) is not None}
    assert 0 < calls["below"] <= len(fits) and calls["bounds"] <= calls["below"]  # not one per reading
    got = {(line.split()[0], date.fromisoformat(line.split()[1]), " ".join(line.split()[2:4])) for line in lines}
    got = {(s, d, k if k in ("case drain", "neutral drift") else "servo pressure") for s, d, k in got}
    expected = _textbook(before, forecast, new)
    assert expected and got == expected
    assert len(lines) < len(new)  # scatter inside the band is not flagged


def test_long_lists_are_capped_on_screen_and_written_whole_beside_the_file(demo, tmp_path, capsys):
    with Store(demo) as store:
        fleet = store.fleet()
    new = _new_readings(fleet, 119, seed=5)
    new = [replace(r, servo_pressure_bar=None if r.servo_pressure_bar is None else r.servo_pressure_bar * 0.6) for r in new]
    path = tmp_path / "round.csv"
    head = "serial,date,machine,machine_hours,case_drain,servo_pressure,neutral_drift,oil_temp,test_pressure,test_speed\n"
    body = "".join(f"{r.serial},{r.taken_on},{r.machine},{r.machine_hours:.1f},{'' if r.case_drain_lpm is None else round(r.case_drain_lpm, 3)},"
                   f"{'' if r.servo_pressure_bar is None else round(r.servo_pressure_bar, 3)},"
                   f"{'' if r.neutral_drift_bar is None else r.neutral_drift_bar},{r.oil_temp_c or ''},{r.test_pressure_bar or ''},"
                   f"{r.test_speed_rpm or ''}\n" for r in new)
    path.write_text(head + body)
    assert main(["--db", str(demo), "--today", TODAY, "import", "readings", str(path)]) == 0
    out = capsys.readouterr().out
    shown = [line for line in out.splitlines() if line.startswith("  second look:")]
    listed = (tmp_path / "round.csv.second-look.txt").read_text().splitlines()
    assert len(shown) == SHOWN < len(listed)
    assert f"... and {len(listed) - SHOWN} more: all {len(listed)} are in {tmp_path / 'round.csv.second-look.txt'}" in out
    assert all(whole.startswith(line.strip()) for line, whole in zip(shown, listed))  # the same, in the same order


def test_rejected_rows_are_capped_and_listed_whole(demo, tmp_path, capsys):
    path = tmp_path / "bad.csv"
    path.write_text("serial,date,machine_hours,servo_pressure\n" + "".join(f"C-28412,2026-11-{d:02d},x{d},24\n" for d in range(1, 29)))
    assert main(["--db", str(demo), "--today", TODAY, "import", "readings", str(path)]) == 2
    err = capsys.readouterr().err
    assert sum(1 for line in err.splitlines() if line.startswith("  - ")) == SHOWN
    listed = (tmp_path / "bad.csv.problems.txt").read_text().splitlines()
    assert len(listed) == 28 and all("machine_hours" in line for line in listed)
    assert "all 28 are in" in err


def test_semicolon_file_gets_a_hint_first_with_decimal_commas_named():
    data = b"serial;date;machine_hours;case_drain\nS-1;2026-01-01;100;4,2\n"
    _, _, problems, _ = read_table("readings", data, date(2026, 2, 1))
    assert problems[0].field == "file" and "';' between columns" in problems[0].allowed
    assert "decimal comma" in problems[0].allowed and "4.2" in problems[0].allowed
    _, _, problems, _ = read_table("readings", b"serial;date;machine_hours\nS-1;2026-01-01;100\n", date(2026, 2, 1))
    assert "';' between columns" in problems[0].allowed and "decimal comma" not in problems[0].allowed


def test_a_decimal_comma_splitting_a_row_is_named():
    data = b"serial,date,machine_hours,case_drain\nS-1,2026-01-01,100,4,2\n"
    _, _, problems, _ = read_table("readings", data, date(2026, 2, 1))
    assert len(problems) == 1 and "decimal comma" in problems[0].allowed and "4.2" in problems[0].allowed


@pytest.mark.parametrize("typed, stored", [("12/10/08", "12/10/8"), (" 18 / 16 / 13 ", "18/16/13"), ("-/09/07", "-/9/7"),
                                           ("18/16/13", "18/16/13"), ("*/15/12", "*/15/12")])
def test_iso4406_codes_are_stored_in_the_standards_form(typed, stored, store):
    # ISO 4406:2021 writes a code as three scale numbers, e.g. 18/16/13, or -/16/13 when the first is not counted
    assert validate.parse_iso4406(typed) == (stored, None)
    from tests.store.conftest import load

    load(store, "readings", f"serial,date,machine_hours,servo_pressure,iso4406\nS-100,2025-06-01,1700,25,{typed}\n".encode())
    assert [r.iso4406 for r in store.readings("S-100") if r.iso4406] == [stored]


def test_progress_is_shown_only_on_a_terminal():
    plain = Console(file=io.StringIO(), force_terminal=False)
    with Steps(plain, total=3) as steps:
        steps.step("reading")
    assert steps.progress is None and plain.file.getvalue() == ""
    term = Console(file=io.StringIO(), force_terminal=True, width=80)
    with Steps(term, total=3) as steps:
        steps.step("reading the logbook")
        steps.step("second look")
        assert steps.progress.tasks[0].completed == 2 and steps.progress.tasks[0].description == "second look"


@pytest.mark.parametrize("lane", ["column-wise", "row by row"])
def test_the_round_sheet_position_is_checked_on_import(store, monkeypatch, lane):
    from logbook import imports
    from logbook.exports.round_sheet import CSV_COLUMNS
    from logbook.imports import import_bytes

    if lane == "row by row":
        monkeypatch.setattr(imports, "read_columns", lambda *a, **k: None)
    assert CSV_COLUMNS.index("position") == CSV_COLUMNS.index("machine") + 1  # where a technician looks for it
    today = date(2026, 12, 1)
    before = store.counts()["readings"]
    wrong = b"serial,date,machine,position,machine_hours,servo_pressure\nS-100,2025-06-01,M-1,swing,1700,25\n"
    report = import_bytes(store, "readings", wrong, name="r.csv", today=today)
    assert [p.field for p in report.problems] == ["position"] and report.added == 0
    assert "sat at main on M-1" in report.problems[0].allowed and report.problems[0].line == 2
    assert store.counts()["readings"] == before  # nothing written
    right = wrong.replace(b"swing", b"main")
    report = import_bytes(store, "readings", right, name="r.csv", today=today)
    assert report.problems == [] and report.added == 1
