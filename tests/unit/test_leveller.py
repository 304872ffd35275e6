"""The integer-program leveller against exhaustive search on small cases and its own rules."""

from __future__ import annotations

import itertools

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from logbook.leveller import Job, ShopLimits, choice_allowed, cost_of, feasible, level


@st.composite
def small_cases(draw):
    months = draw(st.integers(1, 3))
    n = draw(st.integers(1, 4))
    sites = ["North", "South"]
    models = ["AX90", "BX45"]
    jobs = []
    for j in range(n):
        costs = tuple(draw(st.floats(0, 1000, allow_nan=False)) for _ in range(months + 1))
        deadline = draw(st.one_of(st.none(), st.integers(0, months - 1)))
        jobs.append(Job(f"P{j}", draw(st.sampled_from(sites)), draw(st.sampled_from(models)), deadline, costs))
    limits = ShopLimits(
        months=months,
        capacity=draw(st.one_of(st.none(), st.integers(0, 3))),
        site_capacity=draw(st.dictionaries(st.sampled_from(sites), st.integers(0, 2), max_size=2)),
        spares=draw(st.dictionaries(st.sampled_from(models), st.integers(0, 2), max_size=2)),
        turnaround=draw(st.integers(0, 3)),
        allow_late=draw(st.booleans()),
    )
    return jobs, limits


def _brute_force(jobs, limits):
    """Every assignment, in the leveller's own terms: fewest jobs left over that are due, then least cost."""
    choices = list(range(limits.months)) + [None]
    best = None
    for months in itertools.product(choices, repeat=len(jobs)):
        if not feasible(jobs, months, limits):
            continue
        left = sum(1 for j, m in zip(jobs, months) if m is None and j.deadline is not None)
        key = (left, cost_of(jobs, months, limits))
        if best is None or key < best[0]:
            best = (key, months)
    return best


@pytest.mark.slow
@settings(max_examples=150, deadline=None)
@given(small_cases())
def test_matches_exhaustive_search(case):
    # reference: exhaustive enumeration of every assignment (independent of the solver)
    jobs, limits = case
    result = level(jobs, limits)
    (left, cost), _ = _brute_force(jobs, limits)
    assert feasible(jobs, result.months, limits)
    assert len(result.left_over) == left
    assert result.total_cost == pytest.approx(cost, abs=1e-6 * (1 + abs(cost)))


@pytest.mark.slow
@settings(max_examples=60, deadline=None)
@given(small_cases())
def test_every_rule_holds(case):
    jobs, limits = case
    result = level(jobs, limits)
    for job, month in zip(jobs, result.months):
        if month is not None:
            assert choice_allowed(job, month, limits)
            if not limits.allow_late and job.deadline is not None:
                assert month <= job.deadline
    assert feasible(jobs, result.months, limits)


def test_spares_out_for_the_turnaround():
    # one spare, two months out per job: two jobs of the model cannot start in consecutive months
    jobs = [Job("A", "N", "AX90", 2, (0.0, 10.0, 20.0, 99.0)), Job("B", "N", "AX90", 2, (0.0, 10.0, 20.0, 99.0))]
    result = level(jobs, ShopLimits(months=3, spares={"AX90": 1}, turnaround=2))
    assert sorted(m for m in result.months if m is not None) == [0, 2]


def test_costs_must_cover_every_choice():
    with pytest.raises(ValueError, match="costs given"):
        level([Job("A", "N", "AX90", 0, (1.0,))], ShopLimits(months=2))
