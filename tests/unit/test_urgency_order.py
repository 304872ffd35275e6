"""Every list of pumps puts them in the engine's one most-urgent-first order.

``logbook pumps`` (and the ten-pump summary of ``logbook demo``, which prints its first
ten rows), the fleet view and the plan all sort on ``analysis.status.urgency_key``.
The order itself is our own rule (common practice, no published source): status in
``STATUS_ORDER``, then the worst kind's outcome, furthest past the limit, earliest P10
and P50 dates, serial. These tests check that the lists agree with each other and with
that rule written out here, on the demo fleet.
"""

from __future__ import annotations

import io
from datetime import date

import pytest
from rich.console import Console

import demo_fleet
from logbook.analysis.fleet import forecast_fleet
from logbook.analysis.results import Outcome
from logbook.analysis.status import STATUS_ORDER, STEADY, STEP_CHANGE, urgency_key
from logbook.cli import Context
from logbook.commands.pumps import fleet_table
from logbook.plan import PlanSettings, make_plan
from logbook.store import Store
from logbook.tui.present import select_pumps
from logbook.units import UnitPrefs

TODAY = date(2026, 12, 1)


@pytest.fixture(scope="module")
def forecast():
    store = Store(":memory:")
    demo_fleet.load(store, TODAY, seed=7)
    return forecast_fleet(store.fleet(), TODAY)


def _ctx() -> Context:
    return Context(db_path=None, user=None, today=TODAY, units=UnitPrefs(), console=Console(file=io.StringIO()))


def _table_serials(table) -> list[str]:
    return [str(cell) for cell in table.columns[0]._cells]  # plain text of each cell


def _by_hand(pumps) -> list[str]:
    """The rule in the module docstring, written out independently of the engine."""

    def key(p):
        kf = p.worst
        status = STATUS_ORDER.index(p.status) if p.status in STATUS_ORDER else len(STATUS_ORDER)
        if kf is None:
            return (status, 9, date.max, date.max, 0.0, p.serial)
        outcome = ["past_limit", "crossing", "no_crossing", "too_few", "no_data", "no_limit"].index(kf.outcome.value)
        if outcome == 0:
            over = kf.percent_of_limit or 0.0
            return (status, 0, date.min, date.min, over if kf.limit.direction == "below" else -over, p.serial)
        return (status, outcome, kf.p10_date or date.max, kf.p50_date or date.max, 0.0, p.serial)

    return [p.serial for p in sorted(pumps, key=key)]


@pytest.mark.slow
def test_pumps_command_and_fleet_view_agree(forecast):
    want = _by_hand(forecast.pumps)
    assert _table_serials(fleet_table(forecast, _ctx())) == want
    assert [p.serial for p in select_pumps(forecast.pumps, sort_key="status")] == want


@pytest.mark.slow
def test_the_step_change_pump_is_near_the_top_everywhere(forecast):
    step = [p.serial for p in forecast.pumps if p.status == STEP_CHANGE]
    assert step, "the demo fleet must hold a pump in 'step change - inspect'"
    summary = _table_serials(fleet_table(forecast, _ctx(), limit=10))  # what `logbook demo` prints
    view = [p.serial for p in select_pumps(forecast.pumps, sort_key="status")]
    over = sum(p.status == STATUS_ORDER[0] for p in forecast.pumps)
    for serial in step:
        assert serial in summary
        assert summary.index(serial) == view.index(serial) < over + len(step)


@pytest.mark.slow
def test_the_plan_takes_pumps_in_the_same_order(forecast):
    plan = make_plan(forecast, PlanSettings(start_month=date(2026, 12, 1), horizon_months=12))
    rank = {s: i for i, s in enumerate(_by_hand(forecast.pumps))}
    assert len(plan.lines) > 5
    for month in plan.settings.months:
        serials = [line.serial for line in plan.month_lines(month)]
        assert serials == sorted(serials, key=rank.__getitem__), month
    unplaced = [line.serial for line in plan.unplaced]
    assert unplaced == sorted(unplaced, key=rank.__getitem__)


@pytest.mark.slow
def test_the_key_is_the_engines(forecast):
    assert [p.serial for p in sorted(forecast.pumps, key=urgency_key)] == _by_hand(forecast.pumps)


@pytest.mark.slow
def test_a_planned_pump_shows_the_kind_and_status_the_plan_acts_on(forecast):
    # The plan schedules each pump by its P10. A pump it placed in its months read "steady" in `pumps`
    # and the fleet view, with the P10 of another kind than the plan's (P50 chose the kind shown, and
    # "plan overhaul" needed the P50 within a year). Every planned pump is now at least "plan
    # overhaul" where its P10 falls within a year, and shows the kind whose date the plan acts on.
    plan = make_plan(forecast, PlanSettings(start_month=date(2026, 12, 1), horizon_months=12))
    by_serial = {p.serial: p for p in forecast.pumps}
    lines = [line for line in plan.lines if line.month is not None]
    assert len(lines) > 5
    year_end = date(2027, 12, 1)
    for line in lines:
        kf = by_serial[line.serial].worst
        assert kf is not None, line.serial
        # the kind shown is the plan's, or one the plan leaves to the machine (an on-machine adjustment)
        # that comes due first; either way the date shown is never later than the one the plan acts on
        assert kf.kind == line.kind or kf.kind in plan.settings.on_machine_kinds, line.serial
        if kf.outcome is Outcome.PAST_LIMIT:
            continue
        assert kf.p10_date is not None and (line.p10_date is None or kf.p10_date <= line.p10_date), line.serial
        if kf.p10_date <= year_end:
            assert by_serial[line.serial].status != STEADY, line.serial
