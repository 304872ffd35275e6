"""The greedy pass never plans a pump after another of the same site and model whose P10
date is later: swapping their months is always feasible (same shop, site and exchange
pool), so an earlier deadline gets the earlier month. Pumps are taken most urgent first
by status (a step change before an overhaul due), and the second pass falls back to the
first when spares or sites make the order matter: both paths are covered here."""

from __future__ import annotations

import pytest

from datetime import date

from hypothesis import given, settings
from hypothesis import strategies as st

from logbook.analysis.status import OVER_LIMIT, OVERHAUL_DUE, PLAN_OVERHAUL, STEADY, STEP_CHANGE
from logbook.plan import PlanSettings, make_plan

try:
    from forecast_builders import fleet, kind_forecast, pump_forecast
except ImportError:  # when tests/ is a package
    from .forecast_builders import fleet, kind_forecast, pump_forecast

START = date(2026, 4, 1)

pump_specs = st.lists(
    st.tuples(
        st.one_of(st.none(), st.integers(1, 240)),  # P10 in days from today; None: past its limit
        st.sampled_from([STEP_CHANGE, OVERHAUL_DUE, PLAN_OVERHAUL, STEADY]),  # the urgency order is by status first
        st.sampled_from(["North", "South"]),
        st.sampled_from(["AX90", "KV40"]),
    ),
    min_size=2, max_size=24,
)


def _pumps(specs):
    out = []
    for i, (p10, status, site, model) in enumerate(specs):
        serial = f"P{i:02d}"
        kf = kind_forecast(serial, past=True) if p10 is None else kind_forecast(serial, p10_days=p10)
        out.append(pump_forecast(serial, [kf], model=model, site=site, status=OVER_LIMIT if p10 is None else status))
    return out


def inversions(plan) -> list[tuple[str, str]]:
    """Pairs (a, b) of shop lines of one site and model: a's P10 earlier, a's month later."""
    shop = [line for line in plan.lines if line.shop]
    found = []
    for a in shop:
        for b in shop:
            if (a.site, a.model) != (b.site, b.model) or a is b:
                continue
            a_p10 = date.min if a.p10_date is None else a.p10_date
            b_p10 = date.min if b.p10_date is None else b.p10_date
            if a_p10 < b_p10 and a.month > b.month:
                found.append((a.serial, b.serial))
    return found


@settings(max_examples=300, deadline=None)
@given(
    specs=pump_specs,
    capacity=st.one_of(st.none(), st.integers(0, 3)),
    north=st.one_of(st.none(), st.integers(0, 2)),
    spares=st.one_of(st.none(), st.integers(0, 2)),
    turnaround=st.integers(0, 3),
)
@pytest.mark.slow
def test_an_earlier_p10_is_never_planned_after_a_later_one_of_its_site_and_model(specs, capacity, north, spares,
                                                                                  turnaround):
    cfg = PlanSettings(START, horizon_months=8, capacity_per_month=capacity,
                       site_capacity={} if north is None else {"North": north},
                       exchange_on_hand={} if spares is None else {"AX90": spares}, turnaround_months=turnaround)
    plan = make_plan(fleet(_pumps(specs)), cfg)
    assert inversions(plan) == []
    for line in plan.lines:  # and every pump still by its P10 month
        assert START <= line.month <= line.target_month


def test_a_step_change_with_a_late_p10_no_longer_takes_the_month_before_an_earlier_p10():
    # Two pumps of one site and model, one shop job a month: the step change (more urgent by
    # status) was placed first, in its P10 month; the overhaul due pump, whose P10 is earlier, then
    # had to go back a month. The months are swapped: the earlier deadline first.
    pumps = _pumps([(75, STEP_CHANGE, "North", "AX90"), (70, OVERHAUL_DUE, "North", "AX90")])
    plan = make_plan(fleet(pumps), PlanSettings(START, capacity_per_month=1))
    step, due = plan.line_for("P00"), plan.line_for("P01")
    assert due.p10_date < step.p10_date
    assert due.month < step.month and inversions(plan) == []
