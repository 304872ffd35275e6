"""Measured oil viscosity, the trusted range of normalization, parked machines and seasons (issue 12 items 6, 7).

Each check names its outside reference: ASTM D341 and D2270 worked examples, scipy's
Theil-Sen slope (Sen, JASA 1968), hand computations of the stated rules.
"""

from __future__ import annotations

from datetime import date, timedelta

import numpy as np
import pytest
from scipy import stats

from logbook import oil, validate
from logbook.analysis import normalize, utilisation
from logbook.analysis.fleet import forecast_fleet
from logbook.model import Event, EventKind, Fitment, Fleet, Kind, Limit, Machine, Pump, PumpModel, Reading

MODEL = PumpModel(
    code="T1", description="test pump", displacement_cc=50.0, rated_pressure_bar=350.0, max_speed_rpm=2500.0,
    ref_temp_c=50.0, ref_pressure_bar=250.0, oil_grade=46, oil_vi=100.0, test_speed_rpm=1450.0,
    test_temp_min_c=40.0, test_temp_max_c=60.0, reading_interval_hours=500.0, reading_interval_days=90,
    limits=(Limit(Kind.CASE_DRAIN, 6.0, "above"),),
)  # fmt: skip


def _reading(**kw) -> Reading:
    base = dict(id=1, serial="A", taken_on=date(2026, 1, 5), machine_hours=100.0, case_drain_lpm=2.0,
                oil_temp_c=50.0, test_pressure_bar=250.0, test_speed_rpm=1450.0)  # fmt: skip
    base.update(kw)
    return Reading(**base)


# ----------------------------------------------------------------------------- measured viscosity


def test_measured_two_points_follow_the_d341_worked_example():
    # ASTM D341 worked example (as quoted by a secondary source, re-derived): 32 cSt at 40 C and
    # 5.4 cSt at 100 C give about 8.53 cSt at 80 C.
    a, b = oil.measured_walther(32.0, 5.4, 100.0)
    assert oil.walther_viscosity(80.0, a, b) == pytest.approx(8.53, abs=0.01)


def test_measured_40c_alone_takes_its_100c_value_from_the_vi():
    # ASTM D2270 worked example (procedure A): 73.30 cSt at 40 C and 8.86 cSt at 100 C is VI 92.43;
    # given the 40 C value and that VI, the 100 C value must come back.
    a, b = oil.measured_walther(73.30, None, 92.43)
    assert oil.walther_viscosity(100.0, a, b) == pytest.approx(8.86, abs=0.005)
    assert oil.walther_viscosity(40.0, a, b) == pytest.approx(73.30, rel=1e-9)


def test_measured_viscosity_replaces_the_grade_midpoint():
    # Laminar leakage ~ 1/nu (Rabie, Fluid Power Engineering, 2009, eq. 2.19): an oil measured 10 % thicker
    # than its grade's midpoint at 40 C (and 100 C) leaks less; at the reference temperature the normalized
    # value is the reading times nu_measured(50 C) / nu_ref(50 C), each from ASTM D341 through two points.
    nu40, nu100 = 50.6, 7.2
    r = _reading(nu40_cst=nu40, nu100_cst=nu100)
    got = normalize.normalized_value(r, Kind.CASE_DRAIN, MODEL)
    want = 2.0 * oil.viscosity_from_points(50.0, 40.0, nu40, 100.0, nu100) / oil.viscosity_cst(50.0, 46, 100.0)
    assert got == pytest.approx(want, rel=1e-12)
    assert got > normalize.normalized_value(_reading(), Kind.CASE_DRAIN, MODEL) * 1.05


def test_the_array_path_gives_the_one_reading_value_with_measured_oil():
    rows = [_reading(oil_temp_c=t, nu40_cst=n40, nu100_cst=n100)
            for t, n40, n100 in ((45.0, 44.0, 6.6), (55.0, None, None), (50.0, 48.0, None))]  # fmt: skip
    cond = normalize.ReadingConditions(
        np.array([250.0] * 3), np.array([r.oil_temp_c for r in rows]), np.full(3, np.nan), np.full(3, np.nan),
        [MODEL], np.zeros(3, dtype=int), lambda i: None,
        np.array([np.nan if r.nu40_cst is None else r.nu40_cst for r in rows]),
        np.array([np.nan if r.nu100_cst is None else r.nu100_cst for r in rows]),
    )  # fmt: skip
    got = cond.case_drain_at_reference(np.full(3, 2.0))
    want = [normalize.normalized_value(r, Kind.CASE_DRAIN, MODEL) for r in rows]
    assert got == pytest.approx(want, rel=1e-12)


@pytest.mark.parametrize("nu40, nu100, field, words", [
    (None, 6.6, "nu100_cst", "needs the measured viscosity at 40 C"),
    (40.0, 45.0, "nu100_cst", "must be below the viscosity at 40 C"),
])  # fmt: skip
def test_a_viscosity_that_is_not_one_oil_is_refused(nu40, nu100, field, words):
    problems = validate.check_reading_against_model(_reading(nu40_cst=nu40, nu100_cst=nu100), MODEL)
    assert [p.field for p in problems] == [field] and words in str(problems[0])


def test_viscosity_takes_cst_and_mm2_per_s_and_names_the_range():
    spec = validate.READING_FIELDS["nu40_cst"]
    assert validate.parse_quantity(spec, "44.1 mm2/s", "cSt")[0] == 44.1  # 1 cSt = 1 mm^2/s exactly (SI)
    assert validate.parse_quantity(spec, "44.1cSt", "cSt")[0] == 44.1
    value, problem = validate.parse_quantity(spec, "1.5", "cSt")
    assert value is None and "from 2 to 3520 cSt" in str(problem) and "nu40_cst" in str(problem)


# ----------------------------------------------------------------------------- trusted range


@pytest.mark.parametrize("temp_c, dp_bar, trusted", [
    (50.0, 250.0, True), (35.0, 220.0, True),  # the demo fleet's conditions
    (-30.0, 250.0, False), (120.0, 250.0, False),  # issue 12: normalized without a word before
    (50.0, 100.0, False), (50.0, 600.0, False),  # pressure factor 2.5 and 0.42
])  # fmt: skip
def test_readings_outside_the_trusted_range_are_named(temp_c, dp_bar, trusted):
    # The rule (common practice, no published source): nu/nu_ref within 1/3..3, dp_ref/dp within 1/2..2.
    # Checked here with the ASTM D341 viscosity computed directly, not the function under test.
    nu = oil.viscosity_cst(temp_c, 46, 100.0) / oil.viscosity_cst(50.0, 46, 100.0)
    expect = 1 / 3 <= nu <= 3 and 0.5 <= 250.0 / dp_bar <= 2
    assert expect is trusted
    why = normalize.untrusted_reason(_reading(oil_temp_c=temp_c, test_pressure_bar=dp_bar), MODEL)
    assert (why is None) is trusted
    if not trusted:
        assert "trusted from" in why


# ----------------------------------------------------------------------------- fleets


TODAY = date(2026, 12, 1)


def _fleet(per_day, days, events=(), readings_on=None, temps=None, wear=1e-4) -> Fleet:
    """One machine M1 with one pump P1; its meter runs per_day(day) hours each day from 2023-01-02."""
    start = date(2023, 1, 2)
    meter, hours = {}, 0.0
    for i in range(days + 1):
        d = start + timedelta(i)
        meter[d] = round(hours, 1)
        hours += per_day(d)
    reads = []
    on = readings_on or [start + timedelta(30 * k) for k in range(1, days // 30)]
    for k, d in enumerate(on):
        temp = temps[k] if temps else 50.0
        reads.append(Reading(k + 1, "P1", d, meter[d], case_drain_lpm=round(1.0 + wear * meter[d] + 0.01 * (k % 3), 3),
                             oil_temp_c=temp, test_pressure_bar=250.0, test_speed_rpm=1450.0, machine="M1"))
    fit = Fitment(1, "P1", "M1", "main", start, None, 0.0, 0.0)
    return Fleet(models={"T1": MODEL}, machines={"M1": Machine("M1", "yard")}, pumps={"P1": Pump("P1", "T1")},
                 fitments=(fit,), readings=tuple(reads), events=tuple(events))  # fmt: skip


def test_a_reading_outside_the_range_is_left_out_and_said():
    on = [date(2023, 1, 2) + timedelta(30 * k) for k in range(1, 40)]
    temps = [50.0] * len(on)
    temps[20] = -25.0
    fleet = _fleet(lambda d: 8.0, (TODAY - date(2023, 1, 2)).days, readings_on=on, temps=temps)
    fc = forecast_fleet(fleet, TODAY)
    kf = fc.pumps[0].kinds[0]
    assert kf.n_readings == len(on) - 1
    assert len(kf.not_used) == 1 and kf.not_used[0].startswith(on[20].isoformat())
    assert any("not used in the trend" in n for n in fc.notes)


def test_parked_days_are_not_running_days():
    # Hours a day on running days: the Theil-Sen slope (scipy.stats.theilslopes) of the hours against the
    # calendar days with the parked span taken out, computed here by hand.
    parked_on, back_on = date(2026, 1, 15), date(2026, 8, 15)
    run = lambda d: 0.0 if parked_on <= d < back_on else 10.0  # noqa: E731
    days = (TODAY - date(2023, 1, 2)).days
    events = (Event(90, EventKind.PARKED, parked_on, machine="M1"), Event(91, EventKind.BACK_IN_SERVICE, back_on, machine="M1"))
    fleet = _fleet(run, days, events)
    fc = forecast_fleet(fleet, TODAY)
    pts = sorted((r.taken_on, r.machine_hours) for r in fleet.readings if r.taken_on >= TODAY - timedelta(365))
    lost = (back_on - parked_on).days
    x = [d.toordinal() - (min(max(d.toordinal() - parked_on.toordinal(), 0), lost)) for d, _ in pts]
    want = stats.theilslopes([h for _, h in pts], x)[0]
    assert fc.pumps[0].hours_per_day == pytest.approx(want, rel=1e-9)
    assert fc.pumps[0].hours_per_day == pytest.approx(10.0, rel=0.02)
    # The same meter without the events: on calendar days the parked months would drag the rate under 8 h a
    # day (scipy's Theil-Sen), but the meter shows the spell (readings on 2026-01-16 and 2026-08-14 with the
    # meter unmoved), so those days are left out all the same and the forecast says so.
    plain = forecast_fleet(_fleet(run, days), TODAY).pumps[0]
    assert stats.theilslopes([h for _, h in pts], [d.toordinal() for d, _ in pts])[0] < 8.0
    assert plain.hours_per_day == pytest.approx(10.0, rel=0.05)
    assert "stood still about 210 of the 210 days from 2026-01-16 to 2026-08-14 by its hour meter" in plain.utilisation_basis


def test_a_standstill_the_meter_shows_is_counted_by_hand():
    # Hand computation: points 30 days apart at 300-330 h each, then 160 days with 400 h. The machine's
    # rate over its other intervals is their hours over their days; the 160 days hold 160 - 400 / rate
    # days not run. Its hours a day are then scipy's Theil-Sen slope (Sen, JASA 63, 1968) of the hours
    # against the days with those days taken out after the spell.
    day = np.array([0, 30, 60, 90, 250, 280, 310, 340]) + date(2025, 1, 6).toordinal()
    gain = np.array([300.0, 330.0, 310.0, 400.0, 320.0, 300.0, 315.0])
    hours = 1000.0 + np.r_[0.0, np.cumsum(gain)]
    machine = np.zeros(len(day), dtype=np.int64)
    today = date.fromordinal(int(day[-1]) + 5)
    other = np.r_[0:3, 4:7]
    rate = gain[other].sum() / (30.0 * len(other))
    lost = 160 - 400.0 / rate
    found = utilisation.meter_standstills(machine, day, hours, today)
    assert found == {0: [(int(day[3]), int(day[4]), round(lost))]}
    got = utilisation.utilisation(machine, day, hours, [0], today, spans=utilisation.with_standstills({}, found))[0]
    run_days = np.where(day >= day[4], day - round(lost), day)
    assert got == pytest.approx(stats.theilslopes(hours, run_days)[0], rel=1e-12)
    assert got == pytest.approx(rate, rel=0.03)  # and near the rate it ran at
    # a parked event over the same days takes the spell instead: the meter's rule leaves it alone
    parked = {0: [(int(day[3]) + 10, int(day[4]) - 10)]}
    assert utilisation.meter_standstills(machine, day, hours, today, parked) == {}


def test_a_standstill_read_midway_and_twice_on_a_day_is_one_spell():
    # Hand computation: 10 h a day, read every 30 days, then 100 days with 50 h and 40 h in two intervals
    # (a meter point 40 days in, and a second point on that same day): one run of two slow intervals,
    # 100 - 90 / 10 = 91 days not run, from the first point of the run to the last.
    base = date(2025, 1, 6).toordinal()
    day = np.array([0, 30, 60, 90, 130, 130, 190, 220, 250]) + base
    gain = np.array([300.0, 300.0, 300.0, 50.0, 0.0, 40.0, 300.0, 300.0])
    hours = 500.0 + np.r_[0.0, np.cumsum(gain)]
    found = utilisation.meter_standstills(np.zeros(len(day), dtype=np.int64), day, hours, date.fromordinal(base + 260))
    assert found == {0: [(base + 90, base + 190, 91)]}


def test_steady_machines_read_at_random_show_no_standstill():
    # 300 machines running 4-16 h a day, +/- 25 % a day, weekends at 30 %, read every 20 to 120 days for
    # three years: no run of slow intervals (a false stand-still would move their dates later).
    rng = np.random.default_rng(12)
    codes, days, hours = [], [], []
    for c in range(300):
        daily = rng.uniform(4, 16) * np.clip(1 + 0.25 * rng.standard_normal(1100), 0, 2)
        daily[np.arange(1100) % 7 >= 5] *= 0.3
        meter = np.r_[0.0, np.cumsum(daily)]
        read = np.cumsum(rng.integers(20, 121, 40))
        read = read[read < 1100]
        codes += [c] * len(read)
        days += (read + date(2023, 1, 2).toordinal()).tolist()
        hours += meter[read].tolist()
    found = utilisation.meter_standstills(np.array(codes), np.array(days), np.array(hours), TODAY)
    assert found == {}


def test_a_machine_that_stands_every_winter_runs_at_its_average_over_whole_years():
    # 15 h a day from May to September only, read on 1 June, 15 July and 1 September each year. Its winters
    # are not near-zero months in the meter's intervals (each spans some running days), so no month rates;
    # the meter shows a stand-still every winter: a pattern, so its hours a day are the hours from
    # 2023-09-01 to 2026-09-01 over those 1,096 days (hand computation: 3 seasons of 153 days at 15 h). The
    # old rule, Theil-Sen over the last year (scipy), followed the season: about 10.6 h a day.
    start = date(2023, 1, 2)
    on = [date(y, m, d) for y in (2023, 2024, 2025, 2026) for m, d in ((6, 1), (7, 15), (9, 1))]
    fleet = _fleet(_seasonal, (TODAY - start).days, readings_on=on)
    pf = forecast_fleet(fleet, TODAY).pumps[0]
    assert "taken as its pattern" in pf.utilisation_basis and "runs by season" not in pf.utilisation_basis
    want = 3 * 153 * 15.0 / (date(2026, 9, 1) - date(2023, 9, 1)).days
    assert pf.hours_per_day == pytest.approx(want, rel=2e-3)  # the meter is rounded to 0.1 h
    pts = [(r.taken_on, r.machine_hours) for r in fleet.readings if r.taken_on >= TODAY - timedelta(365)]
    old = stats.theilslopes([h for _, h in pts], [d.toordinal() for d, _ in pts])[0]
    assert old > 1.5 * want


def test_a_pattern_of_whole_winters_runs_only_in_the_other_months():
    # Hand computation: two spells whose every day went unrun (1 Nov to 1 Apr, twice) leave November to
    # March at zero; April to October (214 days) run at one rate r with r * 214 / 365.25 = the whole-year
    # rate. The reference (written one day at a time, tests/reference/calendar.py) agrees.
    from tests.reference.calendar import pattern_months as reference

    spells = [(date(2023, 11, 1), date(2024, 4, 1)), (date(2024, 11, 1), date(2025, 4, 1))]
    found = [(a.toordinal(), b.toordinal(), (b - a).days) for a, b in spells]
    got = utilisation.pattern_months(found, 6.0)
    r = 6.0 * 365.25 / 214
    assert got == pytest.approx([0, 0, 0, r, r, r, r, r, r, r, 0, 0], abs=1e-12)
    assert utilisation.year_average(got) == pytest.approx(6.0, rel=1e-12)
    assert reference([(a, b, (b - a).days) for a, b in spells], 6.0) == pytest.approx(got, abs=1e-12)
    # a spell of 100 days not run among 200 spreads half a day over each of them: their months at half
    half = utilisation.pattern_months([(date(2025, 1, 1).toordinal(), date(2025, 7, 20).toordinal(), 100)], 5.0)
    jan_to_jun = np.array(half[:6]) / half[8]
    assert jan_to_jun == pytest.approx(0.5, abs=1e-12)


def test_a_pattern_machine_read_in_season_is_credited_no_winter_hours():
    # Runs 15 h a day May to September, read on 1 June, 15 July and 1 September: a pattern (as in the
    # test of its average over whole years). From its newest reading (1 September 2026) to 1 December it truly ran the
    # 30 days of September: 450 h. The whole-year rate alone would credit 91 days of it (about 572 h);
    # counted month by month at the pattern's shares the credit must be at least twice as near the truth.
    start = date(2023, 1, 2)
    on = [date(y, m, d) for y in (2023, 2024, 2025, 2026) for m, d in ((6, 1), (7, 15), (9, 1))]
    fleet = _fleet(_seasonal, (TODAY - start).days, readings_on=on)
    pf = forecast_fleet(fleet, TODAY).pumps[0]
    newest = max(fleet.readings, key=lambda r: r.taken_on)
    credited = pf.hours_since_overhaul - newest.machine_hours  # fitted new at the meter's zero
    flat = pf.hours_per_day * (TODAY - newest.taken_on).days
    assert "dates count each month at its share of those spells" in pf.utilisation_basis
    assert abs(credited - 450.0) < 0.5 * abs(flat - 450.0)


def test_a_machine_parked_now_counts_no_hours_and_says_so():
    # Issue 12: a machine parked 8 months was credited 10 h a day (2,500 h it never ran).
    parked_on = TODAY - timedelta(240)
    run = lambda d: 0.0 if d >= parked_on else 10.0  # noqa: E731
    days = (TODAY - date(2023, 1, 2)).days
    on = [date(2023, 1, 2) + timedelta(30 * k) for k in range(1, 70) if date(2023, 1, 2) + timedelta(30 * k) < parked_on]
    parked = _fleet(run, days, (Event(90, EventKind.PARKED, parked_on, machine="M1"),), readings_on=on)
    plain = _fleet(run, days, readings_on=on)
    a, b = forecast_fleet(parked, TODAY).pumps[0], forecast_fleet(plain, TODAY).pumps[0]
    since_last = (TODAY - on[-1]).days
    run_days = (parked_on - on[-1]).days
    # without the event the pump is credited every day since its last reading; with it only the days before parking
    assert b.hours_since_overhaul - a.hours_since_overhaul == pytest.approx(b.hours_per_day * since_last
                                                                          - a.hours_per_day * run_days, rel=1e-6)
    assert a.utilisation_basis.startswith(f"parked since {parked_on.isoformat()}")
    assert "restarts tomorrow" in a.utilisation_basis and b.utilisation_basis == ""
    assert any(n.startswith("M1 parked since") for n in forecast_fleet(parked, TODAY).notes)


def _seasonal(d: date) -> float:
    return 15.0 if 5 <= d.month <= 9 else 0.0  # works May to September only


def test_a_machine_read_only_in_season_gets_its_year_average():
    # Issue 12: read only in season, the Theil-Sen rate was 15.6 h a day against 6.6 over the year.
    # The year average of the month rates is (hours in May..Sep) / 365.25 days, computed by hand.
    start = date(2023, 1, 2)
    on = [d for d in (start + timedelta(14 * k) for k in range(1, 140)) if 5 <= d.month <= 9 and d < TODAY]
    fleet = _fleet(_seasonal, (TODAY - start).days, readings_on=on)
    pf = forecast_fleet(fleet, TODAY).pumps[0]
    assert pf.utilisation_basis.startswith("runs by season")
    year = 15.0 * (31 + 30 + 31 + 31 + 30) / 365.25
    assert pf.hours_per_day == pytest.approx(year, rel=0.08)
    months = utilisation.month_rates(np.zeros(len(on), dtype=np.int64), np.array([d.toordinal() for d in on]),
                                     np.array([r.machine_hours for r in fleet.readings]), [0], TODAY)[0]  # fmt: skip
    assert all(months[m] < 0.2 * year for m in (0, 1, 2, 10, 11))  # Nov to Mar: near zero


def test_seasonal_days_count_each_month_at_its_rate():
    # Hand computation: 15 h a day from May to September, none otherwise. 24 days ahead at the plain year
    # average are 24 * year hours (150.8 h); from 2026-12-01 nothing runs until May, then 15 h a day:
    # ceil(150.8 / 15) = 11 days of May, so the date is 2027-05-11.
    months = np.array([0, 0, 0, 0, 15, 15, 15, 15, 15, 0, 0, 0], dtype=float)
    year = utilisation.year_average(months)
    got = utilisation.seasonal_days(np.array([[24, -1, 0]]), np.array([year]), months[None, :], TODAY)
    assert int(np.ceil(24 * year / 15)) == 11
    assert TODAY + timedelta(int(got[0, 0])) == date(2027, 5, 11)
    assert got[0, 1] == -1 and got[0, 2] == 0
    # more than a year ahead: whole years of the months' hours, then the rest
    got = utilisation.seasonal_days(np.array([[365 + 24, 1, 2]]), np.array([year]), months[None, :], TODAY)
    rest = (365 + 24) * year - 15 * 153  # a year from tomorrow holds May to September once: 153 days
    assert got[0, 0] == 365 + 150 + int(np.ceil(rest / 15))  # Dec 2..Apr 30 is 150 days


def test_a_steady_machine_is_not_seasonal():
    fleet = _fleet(lambda d: 8.0 + (d.toordinal() % 7 == 0) * 4.0, (TODAY - date(2023, 1, 2)).days)
    assert forecast_fleet(fleet, TODAY).pumps[0].utilisation_basis == ""
