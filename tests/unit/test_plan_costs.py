"""The plan with costs: least expected cost within the same limits as the greedy pass."""

from __future__ import annotations

from datetime import date

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from logbook.costing import PlanCosts, PumpCosts
from logbook.economics import JobCosts
from logbook.plan import PlanSettings, make_plan
from tests.unit.forecast_builders import TODAY, fleet, kind_forecast, pump_forecast

START = date(2026, 4, 1)


def _fleet(specs):
    pumps = [pump_forecast(f"P{i}", [kind_forecast(f"P{i}", p10_days=d, spread=s, past=past)], model=model, site=site)
             for i, (d, s, past, model, site) in enumerate(specs)]
    return fleet(pumps)


def _costs(fc, planned=4000.0, failure=20000.0, per_hour=0.4):
    return PlanCosts("EUR", {p.serial: PumpCosts(JobCosts(planned, failure), per_hour) for p in fc.pumps})


def _check_limits(plan, s: PlanSettings):
    for month, n in plan.shop_load.items():
        assert s.capacity_per_month is None or n <= s.capacity_per_month
    for (month, site), n in plan.site_load.items():
        assert site not in s.site_capacity or n <= s.site_capacity[site]
    for (month, model), n in plan.spares_out.items():
        assert model not in s.exchange_on_hand or n <= s.exchange_on_hand[model]
    for line in plan.lines:
        assert line.month <= line.target_month  # never after the P10 month


pump_spec = st.tuples(
    st.floats(5, 200),  # P10 days ahead (TODAY is 2026-03-10, the plan starts 2026-04-01)
    st.floats(1.1, 2.5),  # spread P50/P10 and P90/P50
    st.booleans(),  # past the limit
    st.sampled_from(["AX90", "BX45"]),
    st.sampled_from(["North", "South"]),
)


@settings(max_examples=40, deadline=None)
@given(
    specs=st.lists(pump_spec, min_size=1, max_size=9),
    capacity=st.one_of(st.none(), st.integers(1, 3)),
    site_cap=st.dictionaries(st.sampled_from(["North", "South"]), st.integers(1, 2), max_size=2),
    spares=st.dictionaries(st.sampled_from(["AX90", "BX45"]), st.integers(1, 2), max_size=2),
    turnaround=st.integers(0, 2),
    ratio=st.floats(1.2, 12.0),
)
@pytest.mark.slow
def test_least_cost_plan_is_never_costlier_than_the_greedy_plan(specs, capacity, site_cap, spares, turnaround, ratio):
    fc = _fleet(specs)
    s = PlanSettings(START, horizon_months=4, capacity_per_month=capacity, site_capacity=site_cap,
                     exchange_on_hand=spares, turnaround_months=turnaround)
    plan = make_plan(fc, s, _costs(fc, planned=1000.0, failure=1000.0 * ratio))
    greedy = make_plan(fc, s)
    assert plan.placement == "least expected cost"
    _check_limits(plan, s)
    _check_limits(greedy, s)
    # as many pumps placed as the greedy pass manages (leaving a due pump over costs a penalty), and on
    # the same number placed never a higher expected cost
    assert len(plan.unplaced) <= len(greedy.unplaced)
    policies = plan.costs.policies
    if len(plan.unplaced) == len(greedy.unplaced):
        assert policies["cost_optimal"] <= policies["at_p10"] + 1e-6 * (1 + abs(policies["at_p10"]))
    # the greedy figure is the expected cost of the greedy plan's months, line by line
    if len(plan.unplaced) == len(greedy.unplaced) == 0:
        at_p10 = 0.0
        for line in greedy.lines:
            if line.shop:
                i = s.months.index(line.month)
                at_p10 += plan.costs.by_month[line.serial].expected[i]
        assert policies["at_p10"] == pytest.approx(at_p10)


def test_lines_carry_the_cost_of_moving_a_month_either_way():
    fc = _fleet([(60.0, 1.6, False, "AX90", "North"), (20.0, 1.4, False, "AX90", "North")])
    s = PlanSettings(START, horizon_months=6)
    plan = make_plan(fc, s, _costs(fc))
    assert plan.currency == "EUR"
    for line in plan.lines:
        costs = plan.costs.by_month[line.serial].expected
        i = s.months.index(line.month)
        assert line.expected_cost == costs[i] == min(costs[: s.months.index(line.target_month) + 1])
        assert line.cost_month_later == costs[i + 1]
        assert line.cost_month_earlier == (costs[i - 1] if i else None)
    assert sum(plan.spend_per_month().values()) == pytest.approx(sum(line.expected_cost for line in plan.lines))


def test_without_costs_for_every_shop_job_the_greedy_pass_places_and_says_why():
    fc = _fleet([(60.0, 1.6, False, "AX90", "North"), (20.0, 1.4, False, "AX90", "North")])
    costs = PlanCosts("EUR", {"P0": PumpCosts(JobCosts(1.0, 5.0), 0.1)})
    plan = make_plan(fc, PlanSettings(START), costs)
    assert plan.placement == "greedy" and "no costs for 1 pump" in plan.placement_note
    assert all(line.expected_cost is None for line in plan.lines)


def test_sensitivity_lists_pumps_whose_month_moves_with_the_cost_ratio():
    # a cheap failure makes waiting attractive, an expensive one pulls the job forward
    fc = _fleet([(100.0, 1.8, False, "AX90", "North")])
    plan = make_plan(fc, PlanSettings(START, horizon_months=6), _costs(fc, planned=4000.0, failure=8000.0, per_hour=0.3))
    moves = {factor: (base, moved) for _, factor, base, moved in plan.costs.sensitivity}
    if 2.0 in moves:
        base, moved = moves[2.0]
        assert moved is not None and (base is None or moved <= base)
    assert all(f in (0.5, 2.0) for f in moves)
    assert TODAY < START


def test_a_pump_the_least_cost_plan_cannot_place_says_what_is_full():
    # No exchange pump of its model on hand: the greedy pass said "no room up to ...: no exchange AX90
    # pump", the least-cost pass only "no room up to ...". Both now name what is full.
    fc = _fleet([(40.0, 1.5, False, "AX90", "North"), (45.0, 1.5, False, "BX45", "North")])
    s = PlanSettings(START, horizon_months=4, exchange_on_hand={"AX90": 0})
    for plan in (make_plan(fc, s), make_plan(fc, s, _costs(fc))):
        left = {line.serial: line.note for line in plan.unplaced}
        assert list(left) == ["P0"], plan.placement
        assert left["P0"].startswith("no room up to ") and left["P0"].endswith(": no exchange AX90 pump"), plan.placement
        assert [line.serial for line in plan.lines] == ["P1"]
