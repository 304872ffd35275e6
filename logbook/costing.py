"""Money in the monthly plan (pure): each candidate pump's expected cost month by month, the
least-cost placement by the integer program of ``logbook.leveller``, and the plan's cost
against the other policies on the same fleet.

Per pump the choices are the horizon's months and "after the horizon". A job in month m
is taken to happen mid-month (day 15). Its expected cost comes from
``economics.month_costs`` on the pump's crossing distribution (the split lognormal through
its P10/P50/P90 dates), its model's job costs with its machine's downtime, and the cost
per operating hour of the model's renewal cycle (the value of an hour of life given up).

Policies compared on the same candidates:
- run to failure: every candidate fails in service (Cf each, no life given up);
- at P10: the months the greedy pass gives (each pump no later than its P10 month);
- cost-optimal: the integer program's months, within the same capacities and deadlines.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from datetime import date, timedelta

import numpy as np

from logbook.economics import AgeOptimum, JobCosts, MonthCosts, SplitLognormal, cost_rate, month_costs, optimal_age
from logbook.leveller import Job, ShopLimits, cost_of, level
from logbook.model import CostBook

JOB_DAY = 14  # a job in a month is costed on its 15th


@dataclass(frozen=True)
class PumpCosts:
    """What one pump's job costs: its model's job costs with its machine's downtime, and the
    cost per operating hour of its model's renewal cycle."""

    costs: JobCosts
    cost_per_operating_hour: float


@dataclass(frozen=True)
class PlanCosts:
    """Costs handed to the plan: per pump serial, in one currency."""

    currency: str
    pumps: dict[str, PumpCosts]
    allow_late: bool = False  # may the cost-optimal plan go past a pump's P10 month
    ratio_factors: tuple[float, ...] = (0.5, 2.0)  # sensitivity: failure-to-planned cost ratio times these


@dataclass(frozen=True)
class Candidate:
    """One shop job the plan must place, as the costing sees it."""

    serial: str
    site: str
    model: str
    deadline: int | None  # month index of its P10 month (None: beyond the horizon)
    p_days: tuple[float, float, float | None] | None  # P10, P50, P90 of days to the crossing; None: past the limit
    hours_per_day: float


@dataclass(frozen=True)
class CostedPlan:
    months: dict[str, int | None]  # serial -> month index (None: after the horizon)
    by_month: dict[str, MonthCosts]  # serial -> expected cost of every choice
    policies: dict[str, float]  # run_to_failure, at_p10, cost_optimal
    left_over: tuple[str, ...]
    sensitivity: tuple[tuple[str, float, int | None, int | None], ...] = field(default=())
    # (serial, ratio factor, month at the base ratio, month at that factor) where the month moves


def job_days(today: date, month_starts: Sequence[date], after: date) -> list[int]:
    """Days from ``today`` to the costed day of each month, then to the first month after the horizon."""
    return [max((m + timedelta(days=JOB_DAY) - today).days, 0) for m in (*month_starts, after)]


def _month_costs(c: Candidate, pc: PumpCosts, days: list[int]) -> MonthCosts:
    """Expected cost of each choice. A pump already past its limit is taken to fail in service if its job
    waits past the first month (no data says how long it would last; the plan's own rule, not a forecast)."""
    if c.p_days is None:
        first = days[0]

        def chance(t):
            return (np.asarray(t, dtype=float) > first).astype(float)

        def left(t):
            return np.maximum(first - np.asarray(t, dtype=float), 0.0)
    else:
        dist = SplitLognormal.through(*c.p_days)
        chance, left = dist.cdf, dist.days_left
    return month_costs(chance, days, pc.costs, pc.cost_per_operating_hour, c.hours_per_day, days_left=left)


def _jobs(cands: Sequence[Candidate], costed: dict[str, MonthCosts]) -> list[Job]:
    return [Job(c.serial, c.site, c.model, c.deadline, costed[c.serial].expected) for c in cands]


def cost_plan(
    cands: Sequence[Candidate],
    plan_costs: PlanCosts,
    limits: ShopLimits,
    days: list[int],
    greedy_months: dict[str, int | None],
) -> CostedPlan:
    """Least expected cost placement of ``cands`` (all must have costs), and the policies' costs."""
    costed = {c.serial: _month_costs(c, plan_costs.pumps[c.serial], days) for c in cands}
    jobs = _jobs(cands, costed)
    limits = ShopLimits(limits.months, limits.capacity, limits.site_capacity, limits.spares, limits.turnaround,
                        plan_costs.allow_late)
    best = level(jobs, limits)
    months = {c.serial: m for c, m in zip(cands, best.months)}
    greedy = [greedy_months.get(c.serial) for c in cands]
    policies = {
        "run_to_failure": sum(plan_costs.pumps[c.serial].costs.failure for c in cands),
        "at_p10": cost_of(jobs, greedy, limits),
        "cost_optimal": best.total_cost,
    }
    sensitivity = []
    for factor in plan_costs.ratio_factors:
        scaled = {}
        for c in cands:
            pc = plan_costs.pumps[c.serial]
            failure = factor * pc.costs.failure  # Cf/Cp times the factor
            scaled[c.serial] = _month_costs(c, PumpCosts(JobCosts(pc.costs.planned, failure),
                                                         pc.cost_per_operating_hour), days)
        moved = level(_jobs(cands, scaled), limits)
        for c, m in zip(cands, moved.months):
            if m != months[c.serial]:
                sensitivity.append((c.serial, factor, months[c.serial], m))
    left = tuple(cands[j].serial for j in best.left_over)
    return CostedPlan(months, costed, policies, left, tuple(sensitivity))


# ------------------------------------------------------------------ from the cost book and the fleet's life


@dataclass(frozen=True)
class ModelEconomy:
    """One model's costs as used, its Weibull life and the cost-optimal overhaul age (Barlow and
    Proschan), so anyone can recompute it; ``optimum`` is None without a Weibull fit."""

    model: str
    planned: float
    failure: float
    shape: float | None
    scale_hours: float | None
    optimum: AgeOptimum | None
    note: str  # why there is no optimum, or what the costs mean ("" otherwise)


def model_economies(book: CostBook, life: Sequence) -> dict[str, ModelEconomy]:
    """Per model with costs: the age-replacement optimum on its fleet-life Weibull (``life``: LifeFigures).
    Job costs here exclude downtime, which differs per machine; see ``pump_costs``."""
    fits = {f.model: f.fit for f in life}
    out = {}
    for code, mc in sorted(book.models.items()):
        fit = fits.get(code)
        notes = [] if mc.failure > mc.planned else ["run to failure is cheapest for this model (a failure costs no "
                                                     "more than a planned job)"]
        optimum = None
        if fit is None:
            notes.append("no fleet-life Weibull fit yet: no optimal age")
        else:
            optimum = optimal_age(fit.shape, fit.scale_hours, JobCosts(mc.planned, mc.failure))
            if optimum.reason and mc.failure > mc.planned:
                notes.append(optimum.reason)
        out[code] = ModelEconomy(code, mc.planned, mc.failure, fit.shape if fit else None,
                                 fit.scale_hours if fit else None, optimum, "; ".join(notes))
    return out


def pump_costs(book: CostBook, forecast, economies: dict[str, ModelEconomy]) -> PlanCosts | None:
    """Per pump of ``forecast``: its model's job costs plus its machine's (or site's) downtime, and the
    cost per operating hour of its renewal cycle (the model's optimal-age cost rate; without a Weibull
    fit, the planned job over the pump's expected cycle: hours since overhaul plus P50 hours left).
    None when no model has costs."""
    if book.empty:
        return None
    pumps = {}
    for pf in forecast.pumps:
        mc = book.models.get(pf.model)
        if mc is None:
            continue
        dt = book.downtime(pf.machine, pf.site)
        costs = JobCosts.with_downtime(mc.planned, mc.failure, dt.cost_per_hour, dt.planned_hours, dt.failure_hours) \
            if dt is not None else JobCosts(mc.planned, mc.failure)
        eco = economies.get(pf.model)
        rate = None
        if eco is not None and eco.optimum is not None and eco.shape is not None:
            assert eco.scale_hours is not None  # a Weibull fit gives shape and scale together
            rate = float(cost_rate(eco.optimum.age_hours, eco.shape, eco.scale_hours, costs)) \
                if eco.optimum.age_hours is not None else costs.failure / (eco.scale_hours * math.gamma(1 + 1 / eco.shape))
        if rate is None:
            left = pf.worst.p50_hours if pf.worst is not None and pf.worst.p50_hours is not None else None
            cycle = (pf.hours_since_overhaul or 0.0) + (left or 0.0)
            rate = costs.planned / cycle if cycle > 0 else 0.0
        pumps[pf.serial] = PumpCosts(costs, rate)
    return PlanCosts(book.currency, pumps)


@dataclass(frozen=True)
class FleetMoney:
    """What the costs entered say about a forecast fleet: the cost book, the fleet life it was
    weighed on, each model's economy (cost-optimal age) and each pump's job costs for the plan
    (``costs`` None when no model has costs: the plan is then the greedy pass)."""

    book: CostBook
    life: tuple
    economies: dict[str, ModelEconomy]
    costs: PlanCosts | None

    @property
    def currency(self) -> str:
        return self.book.currency


def fleet_money(book: CostBook, fleet, forecast, horizon_days: int) -> FleetMoney:
    """The steps ``logbook forecast`` takes from a cost book to the plan's costs: fleet life
    (Weibull per model, running pumps over ``horizon_days``), model economies, pump costs."""
    if book.empty:
        return FleetMoney(book, (), {}, None)
    from logbook.analysis.life import fleet_life

    life = fleet_life(fleet, forecast, horizon_days=max(horizon_days, 1))
    economies = model_economies(book, life)
    return FleetMoney(book, life, economies, pump_costs(book, forecast, economies))
