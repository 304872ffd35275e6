"""Monthly overhaul plan: capacity, targets, overflow, exchange pool, risk figures."""

from __future__ import annotations

import dataclasses
from collections import Counter
from datetime import date, timedelta

import pytest
from dateutil.relativedelta import relativedelta
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import stats

from logbook.analysis.results import Outcome
from logbook.model import InputRejected, Kind
from logbook.plan import (
    PlanSettings,
    add_months,
    crossing_probability,
    make_plan,
    month_start,
    months_between,
    parse_month,
)

try:
    from forecast_builders import TODAY, fleet, kind_forecast, pump_forecast
except ImportError:  # when tests/ is a package
    from .forecast_builders import TODAY, fleet, kind_forecast, pump_forecast

START = date(2026, 4, 1)


def due_pump(serial, p10_days, **kw):
    return pump_forecast(serial, [kind_forecast(serial, p10_days=p10_days)], **kw)


def past_pump(serial, **kw):
    return pump_forecast(serial, [kind_forecast(serial, past=True)], **kw)


# ---------------------------------------------------------------- months


@pytest.mark.parametrize("n", [-25, -13, -1, 0, 1, 8, 11, 12, 30])
def test_add_months_matches_dateutil(n):
    # Outside reference: dateutil.relativedelta month arithmetic.
    for start in (date(2026, 1, 1), date(2025, 11, 1), date(2024, 12, 1)):
        assert add_months(start, n) == start + relativedelta(months=n)
        assert months_between(start, add_months(start, n)) == n


def test_parse_month_accepts_iso_and_names_bad_field():
    assert parse_month("2026-04") == date(2026, 4, 1)
    with pytest.raises(InputRejected) as err:
        parse_month("2026-13", "--month")
    assert "--month" in str(err.value) and "2026-13" in str(err.value) and "YYYY-MM" in str(err.value)
    for unicode_digits in ("\u0968\u0966\u0968\u096c-\u0966\u096a", "\uff12\uff10\uff12\uff16-\uff10\uff14"):  # Devanagari, full-width
        with pytest.raises(InputRejected):
            parse_month(unicode_digits)


def test_settings_reject_bad_values_with_field_names():
    with pytest.raises(InputRejected) as err:
        PlanSettings(START, horizon_months=0, capacity_per_month=-1, exchange_on_hand={"AX90": -2})
    text = str(err.value)
    assert "horizon" in text and "capacity" in text and "exchange AX90" in text


# ---------------------------------------------------------------- risk


def test_crossing_probability_reproduces_the_given_quantiles():
    # Definition of P10/P50/P90: P(T <= P10 date) = 0.1 etc.
    kf = kind_forecast("A", p10_days=30, spread=2.0)
    assert crossing_probability(kf, TODAY, kf.p10_date) == pytest.approx(0.1, abs=1e-9)
    assert crossing_probability(kf, TODAY, kf.p50_date) == pytest.approx(0.5, abs=1e-9)
    assert crossing_probability(kf, TODAY, kf.p90_date) == pytest.approx(0.9, abs=1e-9)


def test_crossing_probability_symmetric_case_is_scipy_lognormal():
    # Outside reference: scipy.stats.lognorm with s = ln(spread)/z0.9 and scale = median days.
    kf = kind_forecast("A", p10_days=40, spread=1.5)
    d50 = (kf.p50_date - TODAY).days
    s = (__import__("math").log(d50 / 40)) / stats.norm.ppf(0.9)
    for days in (10, 50, 61, 75, 200):
        expected = stats.lognorm.cdf(days, s, scale=d50)
        assert crossing_probability(kf, TODAY, TODAY + timedelta(days=days)) == pytest.approx(expected, abs=1e-9)


def test_crossing_probability_edges():
    assert crossing_probability(kind_forecast("A", past=True), TODAY, TODAY) == 1.0
    assert crossing_probability(kind_forecast("A"), TODAY, TODAY + timedelta(days=99)) is None


# ---------------------------------------------------------------- plan


def test_pump_is_planned_in_its_p10_month_when_room():
    pumps = [due_pump("A", p10_days=70), due_pump("B", p10_days=130)]
    plan = make_plan(fleet(pumps), PlanSettings(START))
    assert [(line.serial, line.month) for line in plan.lines] == [
        ("A", month_start(TODAY + timedelta(days=70))),
        ("B", month_start(TODAY + timedelta(days=130))),
    ]
    for line in plan.lines:
        assert line.month <= line.p10_date
        assert 0.1 <= line.chance_by_month_end <= 0.5  # P10 falls inside the planned month
        assert "P10" in line.reason and "case drain" in line.reason
    assert plan.unplaced == ()


def test_past_limit_goes_first_in_start_month_and_not_due_pumps_are_left_out():
    pumps = [due_pump("A", p10_days=100), past_pump("B"), pump_forecast("C"), due_pump("D", p10_days=900)]
    plan = make_plan(fleet(pumps), PlanSettings(START))
    assert [line.serial for line in plan.lines] == ["B", "A"]
    assert plan.lines[0].month == START and plan.lines[0].outcome is Outcome.PAST_LIMIT
    assert "already past" in plan.lines[0].reason


def test_capacity_pulls_the_riskier_forward_and_reports_overflow():
    # Five pumps all due in June; 2 jobs a month; June is month 3 of the plan.
    days = [83, 86, 90, 95, 99]  # P10 dates 2026-06-01 .. 2026-06-17
    pumps = [due_pump(f"P{i}", p10_days=d) for i, d in enumerate(days)] + [past_pump("Z1"), past_pump("Z2")]
    plan = make_plan(fleet(pumps), PlanSettings(START, capacity_per_month=2))
    load = Counter(line.month for line in plan.lines)
    assert all(n <= 2 for n in load.values())
    placed = {line.serial: line.month for line in plan.lines}
    june, may, april = date(2026, 6, 1), date(2026, 5, 1), date(2026, 4, 1)
    assert placed["Z1"] == placed["Z2"] == april
    # the riskier June pumps are the ones pulled forward into May ...
    assert [placed[s] for s in ("P0", "P1", "P2", "P3")] == [may, may, june, june]
    # ... and the least urgent one is reported: April is taken by the two past the limit
    assert [line.serial for line in plan.unplaced] == ["P4"]
    assert plan.unplaced[0].month is None and "shop full" in plan.unplaced[0].note
    assert all(line.month <= line.target_month for line in plan.lines)
    assert plan.line_for("P1").months_early == 1 and "pulled forward" in plan.line_for("P1").note


def test_site_capacity_is_separate_per_site():
    pumps = [due_pump(f"N{i}", 83, site="North") for i in range(3)]
    pumps += [due_pump(f"S{i}", 83, site="South") for i in range(3)]
    plan = make_plan(fleet(pumps), PlanSettings(START, horizon_months=3, site_capacity={"North": 1}))
    north = Counter(line.month for line in plan.lines if line.site == "North")
    assert max(north.values()) == 1 and sum(north.values()) == 3
    assert all(line.month == date(2026, 6, 1) for line in plan.lines if line.site == "South")


def test_exchange_pool_with_turnaround():
    # One spare AX90; turnaround 2 months: a job in April holds the spare in April and May.
    pumps = [due_pump(f"A{i}", p10_days=d) for i, d in enumerate([30, 60, 90, 120])]
    pumps.append(due_pump("K1", p10_days=30, model="KV40"))
    plan = make_plan(fleet(pumps), PlanSettings(START, exchange_on_hand={"AX90": 1}, turnaround_months=2))
    ax = sorted(line.month for line in plan.lines if line.model == "AX90")
    for first, second in zip(ax, ax[1:]):
        assert months_between(first, second) >= 2
    assert len(ax) + len([line for line in plan.unplaced if line.model == "AX90"]) == 4
    assert any("no exchange AX90" in line.note for line in plan.unplaced)
    assert plan.line_for("K1").month == date(2026, 4, 1)  # KV40 has no pool limit
    assert all(v <= 1 for (m, model), v in plan.spares_out.items() if model == "AX90")


def test_zero_spares_blocks_the_model():
    plan = make_plan(fleet([due_pump("A", 30)]), PlanSettings(START, exchange_on_hand={"AX90": 0}))
    assert plan.lines == () and "no exchange AX90" in plan.unplaced[0].note


def test_neutral_drift_only_is_on_the_machine_and_uses_no_shop_room():
    drift = pump_forecast("D", [kind_forecast("D", Kind.NEUTRAL_DRIFT, p10_days=40)])
    both = pump_forecast("B", [kind_forecast("B", p10_days=80), kind_forecast("B", Kind.NEUTRAL_DRIFT, p10_days=20)])
    plan = make_plan(fleet([drift, both]), PlanSettings(START, capacity_per_month=0))
    assert plan.line_for("D").month is not None and not plan.line_for("D").shop
    assert plan.line_for("B").kind is Kind.CASE_DRAIN and plan.line_for("B").also_due == (Kind.NEUTRAL_DRIFT,)
    assert plan.line_for("B").month is None  # no shop room at all


def test_no_utilisation_is_reported_not_guessed():
    kf = kind_forecast("U", p10_days=50)
    kf = dataclasses.replace(kf, p10_date=None, p50_date=None, p90_date=None)
    plan = make_plan(fleet([pump_forecast("U", [kf])]), PlanSettings(START))
    assert plan.lines == () and "utilisation" in plan.unplaced[0].note


@settings(max_examples=60, deadline=None)
@given(
    p10s=st.lists(st.one_of(st.none(), st.integers(-30, 260)), min_size=1, max_size=25),
    capacity=st.one_of(st.none(), st.integers(0, 4)),
    spares=st.one_of(st.none(), st.integers(0, 3)),
    turnaround=st.integers(0, 3),
)
def test_plan_invariants(p10s, capacity, spares, turnaround):
    pumps = [past_pump(f"X{i}") if d is None else due_pump(f"X{i}", max(d, 1)) for i, d in enumerate(p10s)]
    cfg = PlanSettings(
        START,
        capacity_per_month=capacity,
        exchange_on_hand={} if spares is None else {"AX90": spares},
        turnaround_months=turnaround,
    )
    plan = make_plan(fleet(pumps), cfg)
    due = {p.serial for p in pumps if p.kinds[0].outcome is Outcome.PAST_LIMIT or p.kinds[0].p10_date <= cfg.end_day}
    placed = {line.serial for line in plan.lines}
    # every due pump is either planned or reported, never both, never silently dropped
    assert placed | {line.serial for line in plan.unplaced} == due
    assert not placed & {line.serial for line in plan.unplaced}
    # capacity, target month and the exchange pool, recounted independently
    per_month = Counter(line.month for line in plan.lines)
    if capacity is not None:
        assert all(n <= capacity for n in per_month.values())
    for line in plan.lines:
        assert START <= line.month <= line.target_month
        if line.p10_date is not None and line.p10_date >= START:
            assert line.month <= line.p10_date
    if spares is not None:
        for month in cfg.months:
            out = sum(1 for line in plan.lines if 0 <= months_between(line.month, month) < turnaround)
            assert out <= spares
    # a pump is reported as not fitting only when every month up to its target is full
    for line in plan.unplaced:
        free = [
            m
            for m in cfg.months
            if m <= line.target_month
            and (capacity is None or per_month[m] < capacity)
            and (
                spares is None
                or all(
                    sum(1 for x in plan.lines if 0 <= months_between(x.month, k) < turnaround) < spares
                    for k in cfg.months
                    if 0 <= months_between(m, k) < max(turnaround, 1)
                )
            )
        ]
        assert free == []


def test_p10_before_the_plan_start_is_said_in_the_note():
    # The P10 date lies in March but the plan starts in April: placed first, and said so.
    plan = make_plan(fleet([due_pump("E", p10_days=5)]), PlanSettings(START))
    line = plan.line_for("E")
    assert line.month == START and "before the plan starts" in line.note
    assert line.chance_by_month_start > 0.1  # already past its P10 when the month begins


def test_crossing_probability_without_p90_uses_the_lower_spread():
    # The engine leaves P90 blank beyond its horizon: the P10-P50 spread is used on both sides,
    # i.e. scipy.stats.lognorm with s = ln(d50/d10)/z0.9.
    kf = kind_forecast("A", p10_days=40, spread=1.5)
    kf = dataclasses.replace(kf, p90_date=None, p90_hours=None)
    d50 = (kf.p50_date - TODAY).days
    s = __import__("math").log(d50 / 40) / stats.norm.ppf(0.9)
    for days in (30, 90, 150):
        expected = stats.lognorm.cdf(days, s, scale=d50)
        assert crossing_probability(kf, TODAY, TODAY + timedelta(days=days)) == pytest.approx(expected, abs=1e-9)
