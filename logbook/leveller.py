"""The cost-minimizing leveller: which month each shop job goes in, as an integer program (pure).

Variables x[j, m] = 1 when job j is done in month m of the horizon (m = 0 .. M-1), or
x[j, M] = 1 when it is left until after the horizon. Minimize sum c[j, m] x[j, m]
subject to
- each job in exactly one choice;
- shop capacity per month (all sites) and per site per month;
- exchange pumps per model: a job in month m takes a spare for months m .. m+turnaround-1,
  and no more spares than the pool may be out in any month;
- no job later than its deadline month (the month of its P10 date) unless lateness is
  allowed; a job with a deadline inside the horizon may still be left over ("no room"),
  at a penalty far above any cost, so the program is always feasible and leaves over as
  few as the constraints force.
Solved by scipy.optimize.milp (the HiGHS branch-and-cut solver: Huangfu and Hall,
Mathematical Programming Computation 10, 2018).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field

import numpy as np
from scipy import optimize, sparse


@dataclass(frozen=True)
class Job:
    """One pump's shop job: where it is, and the expected cost of each choice (months, then 'after')."""

    key: str
    site: str
    model: str
    deadline: int | None  # last month index the job may go in; None = none inside the horizon
    costs: tuple[float, ...]  # length months + 1: cost in month 0 .. M-1, then left until after the horizon


@dataclass(frozen=True)
class ShopLimits:
    months: int
    capacity: int | None = None  # jobs per month, all sites
    site_capacity: dict[str, int] = field(default_factory=dict)
    spares: dict[str, int] = field(default_factory=dict)  # model -> exchange pumps in the pool
    turnaround: int = 1  # months a spare is out per job
    allow_late: bool = False  # may a job go after its deadline month


@dataclass(frozen=True)
class Levelled:
    months: tuple[int | None, ...]  # per job: month index, or None (after the horizon / no room)
    total_cost: float  # expected cost of the choices, penalties excluded
    left_over: tuple[int, ...]  # jobs with a deadline inside the horizon that found no room
    status: str


def choice_allowed(job: Job, month: int, limits: ShopLimits) -> bool:
    """May ``job`` take choice ``month`` (``limits.months`` = after the horizon)?"""
    if month == limits.months or job.deadline is None or limits.allow_late:
        return True
    return month <= job.deadline


def spare_months(month: int, limits: ShopLimits) -> range:
    """Months in which a job done in ``month`` keeps an exchange pump out of the pool (none for a
    turnaround of 0: the rebuilt pump is back as a spare within the month, as in the greedy pass)."""
    return range(month, min(month + limits.turnaround, limits.months))


def _penalty(jobs: Sequence[Job]) -> float:
    spread = max((abs(c) for j in jobs for c in j.costs if np.isfinite(c)), default=1.0)
    return 1e3 * (spread + 1.0) * max(len(jobs), 1)


def cost_of(jobs: Sequence[Job], months: Sequence[int | None], limits: ShopLimits) -> float:
    """Expected cost of an assignment (None = after the horizon), penalties excluded."""
    return float(sum(j.costs[limits.months if m is None else m] for j, m in zip(jobs, months)))


def feasible(jobs: Sequence[Job], months: Sequence[int | None], limits: ShopLimits) -> bool:
    """Does an assignment respect every capacity, pool and deadline rule (leaving a job over is allowed)?"""
    load: dict[int, int] = {}
    site_load: dict[tuple[int, str], int] = {}
    out: dict[tuple[int, str], int] = {}
    for job, month in zip(jobs, months):
        if month is None:
            continue
        if not choice_allowed(job, month, limits):
            return False
        load[month] = load.get(month, 0) + 1
        site_load[(month, job.site)] = site_load.get((month, job.site), 0) + 1
        if job.model in limits.spares:
            for m in spare_months(month, limits):
                out[(m, job.model)] = out.get((m, job.model), 0) + 1
    if limits.capacity is not None and any(n > limits.capacity for n in load.values()):
        return False
    if any(n > limits.site_capacity[s] for (_, s), n in site_load.items() if s in limits.site_capacity):
        return False
    return all(n <= limits.spares[model] for (_, model), n in out.items())


def level(jobs: Sequence[Job], limits: ShopLimits, *, time_limit: float = 60.0) -> Levelled:
    """The least-cost feasible assignment of ``jobs`` (see the module docstring)."""
    n, width = len(jobs), limits.months + 1
    if n == 0:
        return Levelled((), 0.0, (), "nothing to level")
    penalty = _penalty(jobs)
    cost = np.zeros(n * width)
    upper = np.ones(n * width)
    for j, job in enumerate(jobs):
        if len(job.costs) != width:
            raise ValueError(f"job {job.key}: {len(job.costs)} costs given, {width} needed (months + after)")
        for m in range(width):
            cost[j * width + m] = job.costs[m]
            upper[j * width + m] = 1.0 if choice_allowed(job, m, limits) else 0.0
        if job.deadline is not None and job.deadline < limits.months:
            cost[j * width + limits.months] += penalty  # left over although due inside the horizon

    blocks: list[tuple[np.ndarray, np.ndarray]] = []  # (constraint row of each cell, variable of each cell)
    lower_b: list[float] = []
    upper_b: list[float] = []

    def constraints(cells: np.ndarray, count: int, lo: float, hi: float) -> None:
        """``count`` constraints; ``cells`` is (count, k) variable indices, -1 for none."""
        r = np.repeat(np.arange(len(lower_b), len(lower_b) + count), cells.shape[1]).reshape(cells.shape)
        keep = cells >= 0
        blocks.append((r[keep], cells[keep]))
        lower_b.extend([lo] * count)
        upper_b.extend([hi] * count)

    every = np.arange(n)[:, None] * width
    constraints(every + np.arange(width)[None, :], n, 1.0, 1.0)  # each job once
    month_no = np.arange(limits.months)
    if limits.capacity is not None:
        constraints((every + month_no[None, :]).T, limits.months, 0.0, float(limits.capacity))
    for site, cap in limits.site_capacity.items():
        at = np.flatnonzero([job.site == site for job in jobs])
        if at.size:
            constraints((at[:, None] * width + month_no[None, :]).T, limits.months, 0.0, float(cap))
    for model, pool in limits.spares.items():
        of = np.flatnonzero([job.model == model for job in jobs])
        if not of.size or limits.turnaround <= 0:
            continue
        for m in range(limits.months):  # a job started in m - turnaround + 1 .. m still holds a spare in m
            starts = np.arange(max(0, m - limits.turnaround + 1), m + 1)
            constraints((of[:, None] * width + starts[None, :]).reshape(1, -1), 1, 0.0, float(pool))
    rows = np.concatenate([b[0] for b in blocks])
    cols = np.concatenate([b[1] for b in blocks])
    matrix = sparse.csr_array((np.ones(len(rows)), (rows, cols)), shape=(len(lower_b), n * width))
    result = optimize.milp(
        cost,
        integrality=np.ones(n * width),
        bounds=optimize.Bounds(np.zeros(n * width), upper),
        constraints=optimize.LinearConstraint(matrix, lower_b, upper_b),
        options={"time_limit": time_limit},
    )
    if result.x is None:
        raise RuntimeError(f"the leveller found no plan: {result.message}")
    choice = np.rint(result.x).reshape(n, width).argmax(axis=1)
    months = tuple(None if m == limits.months else int(m) for m in choice)
    left = tuple(j for j, job in enumerate(jobs) if months[j] is None and job.deadline is not None
                 and job.deadline < limits.months)
    return Levelled(months, cost_of(jobs, months, limits), left, result.message)
