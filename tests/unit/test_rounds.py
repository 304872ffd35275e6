"""Reading rounds: interval due dates on continuous hours, the earlier-test rule, second looks.

Expected values are worked by hand from the documented rules (docs/rounds.md) and
calendar day counts; the earlier-test rule is our own (no published source).
"""

from __future__ import annotations

import csv
import html
import io
import math
from dataclasses import replace
from datetime import date, timedelta

import pytest

from logbook import rounds
from logbook.analysis.results import FLAG_JUMP
from logbook.cautions import SAFETY
from logbook.csvread import quote_formula, unquote_formula
from logbook.exports import round_sheet
from logbook.imports import COLUMNS, read_table
from logbook.model import Event, EventKind, Fitment, Fleet, Kind, Limit, Machine, Pump, PumpModel, Reading
from logbook.units import UnitPrefs
from tests.unit.forecast_builders import TODAY, kind_forecast, pump_forecast

MODEL = PumpModel(
    code="TX-90", description="test", displacement_cc=90, rated_pressure_bar=400, max_speed_rpm=2200,
    ref_temp_c=50, ref_pressure_bar=400, oil_grade=46, oil_vi=100, test_speed_rpm=2000,
    test_temp_min_c=40, test_temp_max_c=60, reading_interval_hours=300, reading_interval_days=None,
    limits=(Limit(Kind.CASE_DRAIN, 10.0, "above"), Limit(Kind.SERVO_PRESSURE, 18.0, "below"),
            Limit(Kind.NEUTRAL_DRIFT, 10.0, "above")),
)  # fmt: skip


def _fleet(model=MODEL, *, new_meter_start=0.0, extra_readings=(), events=(), fitted_hours=1000.0):
    """Pump P-1 in M-1 since 2026-01-01 (meter 1000), read on 2026-02-01 at 1200 h; the meter was
    replaced on 2026-03-01 (old 1400 h, new ``new_meter_start``); pump P-2 in the same machine
    was read on 2026-03-15 at new meter + 150 h."""
    fits = (
        Fitment(1, "P-1", "M-1", "main", date(2026, 1, 1), None, fitted_hours, 0.0),
        Fitment(2, "P-2", "M-1", "swing", date(2026, 1, 1), None, fitted_hours, 500.0),
    )
    reads = (
        Reading(1, "P-1", date(2026, 2, 1), 1200.0, servo_pressure_bar=26.0, machine="M-1"),
        Reading(2, "P-2", date(2026, 3, 15), new_meter_start + 150.0, servo_pressure_bar=26.0, machine="M-1"),
        *extra_readings,
    )
    meter_change = Event(1, EventKind.METER_REPLACED, date(2026, 3, 1), machine="M-1", hours=1400.0, to_hours=new_meter_start)
    return Fleet(
        models={model.code: model}, machines={"M-1": Machine("M-1", "North Yard", "loader")},
        pumps={"P-1": Pump("P-1", model.code), "P-2": Pump("P-2", model.code)},
        fitments=fits, readings=reads, events=(meter_change, *events),
    )  # fmt: skip


# -- due by hours, across a meter replacement ---------------------------------------------
@pytest.mark.parametrize("new_meter_start", [0.0, 5000.0])
def test_hours_since_reading_run_across_a_meter_replacement(new_meter_start):
    # By hand: old meter ran 1200 -> 1400 (200 h) before the swap, new meter ran 150 h after: 350 h.
    # The raw meters differ by 150 - 1200 = -1050 h (new meter at 0) or 5150 - 1200 = 3950 h (at 5000).
    tests = rounds.next_tests(_fleet(new_meter_start=new_meter_start), None, date(2026, 3, 15))
    assert tests["P-1"].hours_since_reading == pytest.approx(350.0)


@pytest.mark.parametrize("new_meter_start", [0.0, 5000.0])
@pytest.mark.parametrize("interval_h, due", [(300.0, True), (400.0, False)])
def test_due_by_hours_is_neither_hidden_nor_invented_by_a_new_meter(new_meter_start, interval_h, due):
    model = replace(MODEL, reading_interval_hours=interval_h)
    test = rounds.next_tests(_fleet(model, new_meter_start=new_meter_start), None, date(2026, 3, 15))["P-1"]
    assert test.is_due(date(2026, 3, 15)) is due
    assert "350 h run since the last reading" in test.reason


def test_due_by_days():
    # Calendar count: 2026-02-01 + 90 days = 2026-05-02 (Feb 28 + Mar 31 + Apr 30 = 89 days to May 1).
    model = replace(MODEL, reading_interval_hours=None, reading_interval_days=90)
    fleet = _fleet(model)
    test = rounds.next_tests(fleet, None, date(2026, 5, 1))["P-1"]
    assert test.interval_due_on == date(2026, 5, 2)
    assert not test.is_due(date(2026, 5, 1))
    assert rounds.next_tests(fleet, None, date(2026, 5, 2))["P-1"].is_due(date(2026, 5, 2))


def test_whichever_interval_runs_out_first_wins():
    # 90 days after 2026-02-01 is 2026-05-02; 300 h had run by 2026-03-15 (350 h): hours first.
    model = replace(MODEL, reading_interval_hours=300, reading_interval_days=90)
    test = rounds.next_tests(_fleet(model), None, date(2026, 3, 15))["P-1"]
    assert test.interval_due_on < date(2026, 5, 2)
    assert test.reason.startswith("every 300 h")


def test_interval_due_date_ahead_comes_from_utilisation():
    # 100 h left at 10 h/day: due 10 days ahead (ceil(100 / 10)).
    due, why = rounds.interval_due(MODEL, date(2026, 3, 1), 200.0, 10.0, date(2026, 3, 15))
    assert due == date(2026, 3, 25) and "200 h" in why
    # 50 h over at 10 h/day: ran out floor(50 / 10) = 5 days ago.
    due, _ = rounds.interval_due(MODEL, date(2026, 3, 1), 350.0, 10.0, date(2026, 3, 15))
    assert due == date(2026, 3, 10)


def test_a_machine_that_hardly_runs_gets_no_date_rather_than_a_crash():
    # 290 h left at 1e-7 h a day is about 8 million years: beyond any calendar (the engine's
    # hours-to-date rule gives no date past 200 years), and no utilisation at all gives none either
    for per_day in (1e-7, None):
        due, why = rounds.interval_due(MODEL, date(2026, 1, 1), 10.0, per_day, date(2026, 1, 2))
        assert due is None and "about 10 h run" in why and "no date" in why


def test_a_pump_never_read_or_overhauled_since_needs_a_baseline():
    fleet = _fleet()
    fleet = replace(fleet, readings=tuple(r for r in fleet.readings if r.serial != "P-2"))
    assert rounds.next_tests(fleet, None, date(2026, 3, 15))["P-2"].test_on == date(2026, 1, 1)
    overhaul = Event(2, EventKind.OVERHAUL, date(2026, 2, 10), serial="P-1", machine="M-1", hours=1300.0)
    test = rounds.next_tests(_fleet(events=(overhaul,)), None, date(2026, 3, 15))["P-1"]
    assert test.test_on == date(2026, 2, 10) and "overhaul" in test.reason


# -- the earlier-test rule -----------------------------------------------------------------
def test_width_ratio_by_hand():
    # kind_forecast: P10 = d, P50 = s d, P90 = s^2 d (hours = 10 h/day x days).
    kf = kind_forecast("A", p10_days=60, spread=2.0)  # 600, 1200, 2400 h: (2400 - 600) / 1200 = 1.5
    assert rounds.band_width_ratio(kf) == pytest.approx(1.5)
    assert rounds.band_width_ratio(kind_forecast("A", p10_days=None)) is None
    assert rounds.band_width_ratio(replace(kf, p90_hours=None)) == math.inf


def test_a_wide_near_forecast_moves_the_test_forward():
    # P10 60 days ahead, ratio 1.5 > 1: test at today + max(7, 60 / 2) = today + 30 days.
    pf = pump_forecast("A", [kind_forecast("A", p10_days=60, spread=2.0)])
    when, why, asap = rounds.forecast_test_date(pf, TODAY, TODAY + timedelta(days=120))
    assert (when, asap) == (TODAY + timedelta(days=30), False)
    assert "case drain" in why and "P10" in why


def test_a_narrow_or_far_forecast_is_left_alone():
    interval = TODAY + timedelta(days=120)
    narrow = pump_forecast("A", [kind_forecast("A", p10_days=60, spread=1.2)])  # ratio (1.44 - 1) / 1.2 = 0.37
    far = pump_forecast("A", [kind_forecast("A", p10_days=400, spread=2.0)])  # wide, but P10 beyond 365 days
    for pf in (narrow, far):
        assert rounds.forecast_test_date(pf, TODAY, interval) == (None, "", False)
    # wide and near, but the interval already comes first (today + 30 >= today + 20)
    wide = pump_forecast("A", [kind_forecast("A", p10_days=60, spread=2.0)])
    assert rounds.forecast_test_date(wide, TODAY, TODAY + timedelta(days=20))[0] is None


def test_the_gap_is_at_least_a_week_and_a_jump_means_now():
    pf = pump_forecast("A", [kind_forecast("A", p10_days=6, spread=3.0)])  # max(7, ceil(6 / 2)) = 7
    assert rounds.forecast_test_date(pf, TODAY, None)[0] == TODAY + timedelta(days=7)
    jumped = pump_forecast("A", [kind_forecast("A", p10_days=900, spread=1.1, flags=frozenset({FLAG_JUMP}))])
    when, why, asap = rounds.forecast_test_date(jumped, TODAY, TODAY + timedelta(days=120))
    assert (when, asap) == (TODAY, True) and "jumped" in why


def test_next_tests_take_the_earlier_date_and_say_why():
    model = replace(MODEL, reading_interval_hours=None, reading_interval_days=365)
    fleet = _fleet(model)
    today = date(2026, 3, 15)
    pf = replace(pump_forecast("P-1", [kind_forecast("P-1", p10_days=40, spread=2.0, today=today)]), machine="M-1")
    forecast = replace(_forecast_of([pf]), today=today)
    test = rounds.next_tests(fleet, forecast, today)["P-1"]
    assert test.interval_due_on == date(2027, 2, 1)  # 2026-02-01 + 365 days
    assert test.test_on == today + timedelta(days=20) and test.earlier
    assert test.words(today) == "reading in 20 d (early)"


def _forecast_of(pumps):
    from tests.unit.forecast_builders import fleet as fleet_of

    return fleet_of(pumps)


# -- round list and sheet ----------------------------------------------------------------------
def test_plan_round_keeps_due_pumps_in_walking_order():
    fleet = _fleet(replace(MODEL, reading_interval_hours=None, reading_interval_days=30))
    # P-1 read 2026-02-01 (due 03-03), P-2 read 2026-03-15 (due 04-14)
    today = date(2026, 3, 20)
    assert [t.serial for t in rounds.plan_round(fleet, None, today, within_days=0)] == ["P-1"]
    assert [t.serial for t in rounds.plan_round(fleet, None, today, within_days=30)] == ["P-1", "P-2"]
    assert rounds.plan_round(fleet, None, today, site="Elsewhere", within_days=30) == []


def test_csv_sheet_has_exactly_the_import_columns_and_imports_back():
    fleet = _fleet(replace(MODEL, reading_interval_days=30))
    today = date(2026, 3, 20)
    tests = rounds.plan_round(fleet, None, today, within_days=30)
    sheet = round_sheet.build_sheet(fleet, None, tests, site="North Yard", made_on=today, test_by=today)
    rows = list(csv.reader(io.StringIO(round_sheet.render_csv(sheet))))
    comments = 2 + len(SAFETY.items) + 1  # title, warning, items, deferral
    assert all(len(r) == 1 and r[0].startswith("# ") for r in rows[:comments])
    assert rows[comments] == list(COLUMNS["readings"])
    assert [r[0] for r in rows[comments + 1:]] == ["P-1", "P-2"]
    parsed, lines, problems, blank = read_table("readings", round_sheet.render_csv(sheet).encode(), today)
    assert (parsed, problems, blank) == ([], [], 2)  # untouched sheet: every row blank, none rejected


def test_us_units_go_into_the_headers_and_convert_back():
    fleet = _fleet(replace(MODEL, reading_interval_days=30))
    today = date(2026, 3, 20)
    tests = rounds.plan_round(fleet, None, today, within_days=30)
    sheet = round_sheet.build_sheet(fleet, None, tests, site="North Yard", made_on=today, test_by=today, units=UnitPrefs.us())
    text = round_sheet.render_csv(sheet)
    assert "test_pressure [psi]" in next(line for line in text.splitlines() if line.startswith("serial"))
    filled = text.replace(",,M-1,main,,,,", ",2026-03-20,M-1,main,1600,,380,", 1)  # servo pressure 380 psi
    parsed, _, problems, _ = read_table("readings", filled.encode(), today)
    assert problems == []
    # 400 bar = 5801.5 psi (1 bar = 14.5038 psi, NIST SP 811); written to 0.1 psi, read back within 0.01 bar
    assert parsed[0]["test_pressure"] == pytest.approx(400.0, abs=0.01)
    assert parsed[0]["servo_pressure"] == pytest.approx(380 / 14.503774, rel=1e-5)


FORMULA_NOTES = [
    '=HYPERLINK("http://example.invalid","x")',  # OWASP "CSV Injection" examples
    "-2+3+cmd|' /C calc'!A0",
    "+1",
    "@SUM(A1:A9)",
    "\tindented",
    "- seals checked",
    "'=already quoted",
    "''- twice quoted",
    "-2.5",  # a plain number stays a number
    "it's fine",
    "'",
]


def test_csv_sheet_round_trip_keeps_formula_leading_notes_as_typed():
    """A filled sheet whose notes and technicians start like formulas, written as every CSV
    writer of the program writes (quote_formula), imports back to exactly the typed text."""
    fleet = _fleet(replace(MODEL, reading_interval_days=30))
    today = date(2026, 3, 20)
    tests = rounds.plan_round(fleet, None, today, within_days=30)
    sheet = round_sheet.build_sheet(fleet, None, tests, site="North Yard", made_on=today, test_by=today)
    rows = list(csv.reader(io.StringIO(round_sheet.render_csv(sheet), newline="")))
    header = rows[0] if rows[0][:1] == ["serial"] else next(r for r in rows if r[:1] == ["serial"])
    col = {name: header.index(name) for name in ("serial", "date", "machine_hours", "servo_pressure", "technician", "note")}
    template = next(r for r in rows if r[:1] == ["P-1"])
    filled = [header]
    for i, note in enumerate(FORMULA_NOTES):
        row = list(template)
        row[col["date"]], row[col["machine_hours"]], row[col["servo_pressure"]] = "2026-03-20", str(1600 + i), "24"
        row[col["note"]], row[col["technician"]] = quote_formula(note), quote_formula("-" + note[:5])
        filled.append(row)
    out = io.StringIO(newline="")
    csv.writer(out, lineterminator="\r\n").writerows(filled)
    written = [c for r in csv.reader(io.StringIO(out.getvalue(), newline="")) for c in r]
    assert not [c for c in written if c[:1] in ("=", "+", "@", "\t") or (c[:1] == "-" and c != "-2.5")]
    parsed, _, problems, blank = read_table("readings", out.getvalue().encode(), today)
    assert (problems, blank) == ([], 0)
    assert [r["note"] for r in parsed] == FORMULA_NOTES
    assert [r["technician"] for r in parsed] == ["-" + n[:5] for n in FORMULA_NOTES]


def test_formula_leading_text_is_imported_verbatim_when_not_quoted():
    """A sheet saved by a spreadsheet (no quote added) keeps its text as typed: the importer
    refuses no free text for how it starts."""
    text = "serial,date,machine_hours,servo_pressure,note\r\n" + "".join(
        f"P-1,2026-03-20,{1600 + i},24,{n}\r\n" for i, n in enumerate(["- seals checked", "=1+1", "@x", "+3 bar"]))
    parsed, _, problems, _ = read_table("readings", text.encode(), date(2026, 3, 20))
    assert problems == []
    assert [r["note"] for r in parsed] == ["- seals checked", "=1+1", "@x", "+3 bar"]


@pytest.mark.parametrize("cell", FORMULA_NOTES + ["", "North", "M-1", "18/16/13", "''", "'x", "'-", "-", "=", "\r"])
def test_quote_formula_and_unquote_formula_are_inverse(cell):
    written = quote_formula(cell)
    assert unquote_formula(written) == cell
    assert written[:1] not in ("=", "+", "@", "\t", "\r") and (written[:1] != "-" or written == "-2.5")


@pytest.mark.parametrize("fmt", ["md", "html"])
def test_paper_sheets_show_safety_conditions_and_blanks(fmt):
    fleet = _fleet(replace(MODEL, reading_interval_days=30))
    today = date(2026, 3, 20)
    tests = rounds.plan_round(fleet, None, today, within_days=30)
    text = round_sheet.render(round_sheet.build_sheet(fleet, None, tests, site="North Yard", made_on=today,
                                                      test_by=today), fmt).decode()
    first_pump = text.index("P-1")
    shown = [html.escape(c) if fmt == "html" else c for c in (SAFETY.title, SAFETY.warning, *SAFETY.items, SAFETY.deferral)]
    assert all(0 <= text.index(c) < first_pump for c in shown)
    assert "speed 2000 rpm" in text and "400.0 bar" in text and "40 C to 60 C" in text
    assert "below 18.00 bar" in text and "Machine M-1" in text
    assert text.count("P-1 - main") == 1 and text.count("P-2 - swing") == 1


# -- second look ------------------------------------------------------------------------
def _trend_fleet():
    """P-1 read every 200 h with servo pressure falling 0.5 bar per 1000 h (+-0.05 bar)."""
    model = replace(MODEL, reading_interval_hours=500)
    readings = tuple(
        Reading(10 + i, "P-1", date(2025, 1, 1) + timedelta(days=20 * i), 1000.0 + 200 * i,
                servo_pressure_bar=28.0 - 0.0005 * 200 * i + (0.05 if i % 2 else -0.05), machine="M-1")
        for i in range(8)
    )  # fmt: skip
    fits = (Fitment(1, "P-1", "M-1", "main", date(2025, 1, 1), None, 1000.0, 0.0),)
    return Fleet(models={model.code: model}, machines={"M-1": Machine("M-1", "North Yard")},
                 pumps={"P-1": Pump("P-1", model.code)}, fitments=fits, readings=readings, events=())


def test_a_reading_far_from_the_trend_gets_a_second_look():
    from logbook.analysis.fleet import forecast_fleet

    fleet = _trend_fleet()
    today = date(2025, 7, 1)
    forecast = forecast_fleet(fleet, today)
    assert forecast.pump("P-1").kinds[1].fit is not None
    # at meter 2600 the line says 28.0 - 0.0005 * 1600 = 27.2 bar
    on_trend = Reading(None, "P-1", date(2025, 6, 20), 2600.0, servo_pressure_bar=27.2, machine="M-1")
    off_trend = replace(on_trend, servo_pressure_bar=24.0)
    assert rounds.second_look(fleet, forecast, [on_trend]) == []
    (line,) = rounds.second_look(fleet, forecast, [off_trend])
    assert line.startswith("P-1 2025-06-20 servo pressure 24.00 bar is below")


def test_the_second_look_uses_continuous_hours_across_a_meter_swap():
    from logbook.analysis.fleet import forecast_fleet

    swap = Event(1, EventKind.METER_REPLACED, date(2025, 6, 1), machine="M-1", hours=2500.0, to_hours=0.0)
    fleet = replace(_trend_fleet(), events=(swap,))
    forecast = forecast_fleet(fleet, date(2025, 7, 1))
    # meter 100 on the new meter is 2600 h on the old scale: 27.2 bar is on the trend there,
    # while at 100 h from the fit's origin the trend would be about 28 bar.
    reading = Reading(None, "P-1", date(2025, 6, 20), 100.0, servo_pressure_bar=27.2, machine="M-1")
    assert rounds.second_look(fleet, forecast, [reading]) == []


def test_new_readings_are_found_by_id():
    before = _fleet()
    added = Reading(99, "P-1", date(2026, 3, 16), 200.0, servo_pressure_bar=25.0, machine="M-1")
    after = replace(before, readings=(*before.readings, added))
    assert rounds.new_readings(before, after) == [added]


@pytest.mark.slow
def test_rounds_is_pure():
    """The rules import neither a user interface nor a database driver."""
    import subprocess
    import sys

    code = ("import sys, logbook.rounds, logbook.analysis.fleet; "
            "print(sorted(m for m in ('textual', 'sqlite3', 'sqlite_utils') if m in sys.modules))")
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    assert done.stdout.strip() == "[]"
