"""What an overhaul choice costs (pure: numpy/scipy).

Two questions, one model of money:

- Per pump model, the age-replacement policy (Barlow and Proschan, Mathematical Theory
  of Reliability, Wiley 1965, ch. 4): overhaul at age T or at failure, whichever comes
  first. With R the survival function of time between overhauls, Cp the cost of a
  planned overhaul and Cf that of an in-service failure, the long-run cost per
  operating hour is

      C(T) = [Cp R(T) + Cf F(T)] / integral_0^T R(t) dt.

  For a Weibull life, integral_0^T R = scale * Gamma(1 + 1/k) * P(1/k, (T/scale)^k)
  (P the regularized lower incomplete gamma function). A finite optimum T* exists only
  when the hazard rises (shape k > 1) and Cf > Cp; it solves the first-order condition
  h(T) * integral_0^T R - F(T) = Cp / (Cf - Cp), whose left side rises from 0 without
  bound for k > 1, so it has one root.

- Per pump, the expected cost of overhauling in each month of the plan, from that
  pump's own crossing distribution today (``chance`` = P(the limit is crossed by day
  t)): the chance of failing before the job times the failure cost, plus the planned
  cost otherwise, plus the value of the operating hours given up by pulling it early
  (expected hours it would still have run, E[(T - t)+], times the cost per operating
  hour of its renewal cycle).

Costs are in the user's currency; downtime enters both costs as hours times the
machine's cost per hour.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass

import numpy as np
from scipy import optimize, special


@dataclass(frozen=True)
class JobCosts:
    """Money of one pump model's jobs, downtime included (see ``with_downtime``)."""

    planned: float  # planned overhaul or exchange: parts and shop labour
    failure: float  # in-service failure: parts, secondary damage, circuit flush

    @classmethod
    def with_downtime(
        cls, planned: float, failure: float, downtime_cost_per_hour: float, planned_hours: float, failure_hours: float
    ) -> "JobCosts":
        """Job costs plus the machine's downtime of each kind of job."""
        return cls(planned + downtime_cost_per_hour * planned_hours, failure + downtime_cost_per_hour * failure_hours)

    @property
    def failure_is_cheaper(self) -> bool:
        """A failure costing no more than a planned job: run to failure is cheapest."""
        return self.failure <= self.planned


# ------------------------------------------------------------------ age replacement


def weibull_survival(t, shape: float, scale: float):
    return np.exp(-np.power(np.asarray(t, dtype=float) / scale, shape))


def weibull_mean_up_to(t, shape: float, scale: float):
    """integral_0^t R(u) du for a Weibull life (the mean operating time of a cycle cut at t)."""
    t = np.asarray(t, dtype=float)
    return scale * special.gamma(1.0 + 1.0 / shape) * special.gammainc(1.0 / shape, np.power(t / scale, shape))


def cost_rate(age, shape: float, scale: float, costs: JobCosts):
    """C(T): long-run cost per operating hour of overhauling at ``age`` hours or at failure."""
    r = weibull_survival(age, shape, scale)
    with np.errstate(divide="ignore", invalid="ignore"):
        return (costs.planned * r + costs.failure * (1.0 - r)) / weibull_mean_up_to(age, shape, scale)


@dataclass(frozen=True)
class AgeOptimum:
    """The cost-optimal overhaul age of one model, against running every pump to failure."""

    age_hours: float | None  # None: no finite optimum (run to failure is cheapest)
    cost_per_hour: float  # at the optimal age (= run-to-failure rate when there is none)
    run_to_failure_cost_per_hour: float  # Cf / mean life
    reason: str  # why there is no finite optimum, or ""

    @property
    def saving(self) -> float:
        """Share of the run-to-failure cost per hour saved by overhauling at the optimal age."""
        return 1.0 - self.cost_per_hour / self.run_to_failure_cost_per_hour


def optimal_age(shape: float, scale: float, costs: JobCosts) -> AgeOptimum:
    """T* minimizing ``cost_rate`` (the root of the first-order condition, by Brent's method)."""
    for name, value in (("shape", shape), ("scale", scale)):
        if not (math.isfinite(value) and value > 0):
            raise ValueError(f"Weibull {name} = {value!r}: must be a positive number")
    mean_life = scale * math.gamma(1.0 + 1.0 / shape)
    rtf = costs.failure / mean_life
    if costs.failure_is_cheaper:
        return AgeOptimum(None, rtf, rtf, "a failure costs no more than a planned job: run to failure is cheapest")
    if shape <= 1.0:
        return AgeOptimum(None, rtf, rtf, f"Weibull shape {shape:.2f} <= 1: no wear-out, run to failure is cheapest")
    target = costs.planned / (costs.failure - costs.planned)

    def condition(log_age: float) -> float:
        t = math.exp(log_age)
        hazard = shape / scale * (t / scale) ** (shape - 1.0)
        return hazard * float(weibull_mean_up_to(t, shape, scale)) - (1.0 - float(weibull_survival(t, shape, scale))) - target

    lo, hi = math.log(scale) - 30.0 / shape, math.log(scale) + 5.0
    while condition(hi) < 0:  # very cheap failures push the optimum far out
        hi += 5.0
        if hi > math.log(scale) + 60:
            return AgeOptimum(None, rtf, rtf, "the optimum lies beyond any pump's life: run to failure")
    age = math.exp(optimize.brentq(condition, lo, hi, xtol=1e-12, rtol=1e-12))
    return AgeOptimum(age, float(cost_rate(age, shape, scale, costs)), rtf, "")


# ------------------------------------------------------------------ one pump, month by month


@dataclass(frozen=True)
class MonthCosts:
    """Expected cost of doing one pump's job at the start of each candidate month."""

    days: tuple[int, ...]  # days from today to each candidate job day; the last is "after the horizon"
    expected: tuple[float, ...]  # expected cost of each choice
    chance_failed: tuple[float, ...]  # P(crossed before that day)
    hours_given_up: tuple[float, ...]  # expected operating hours of life thrown away

    @property
    def best(self) -> int:
        return int(np.argmin(self.expected))


def month_costs(
    chance: Callable[[np.ndarray], np.ndarray],
    job_days: Sequence[int],
    costs: JobCosts,
    cost_per_operating_hour: float,
    hours_per_day: float,
    *,
    tail_days: int = 3650,
    days_left: Callable[[np.ndarray], np.ndarray] | None = None,
) -> MonthCosts:
    """Expected cost of the job on each of ``job_days`` (days from today).

    ``chance(days)`` is P(the limit is crossed within ``days``), vectorized. The hours given up
    by a job on day d are hours_per_day * E[(T - d)+] = hours_per_day * integral_d^inf (1 - chance(t)) dt:
    from ``days_left(d)`` when the distribution gives it in closed form, else by the trapezoid rule on
    a daily grid out to ``tail_days`` past the last job day.
    """
    job = np.asarray(job_days, dtype=float)
    if days_left is not None:
        left = days_left(job) * hours_per_day
    else:
        grid = np.arange(0.0, float(job.max()) + tail_days + 1.0)
        survive = 1.0 - np.clip(chance(grid), 0.0, 1.0)
        pieces = 0.5 * (survive[1:] + survive[:-1])  # integral from each grid day on: reversed cumulative trapezoid
        after = np.concatenate([np.cumsum(pieces[::-1])[::-1], [0.0]])
        left = np.interp(job, grid, after) * hours_per_day
    failed = np.clip(chance(job), 0.0, 1.0)
    expected = failed * costs.failure + (1.0 - failed) * costs.planned + cost_per_operating_hour * left
    return MonthCosts(tuple(int(d) for d in job), tuple(map(float, expected)), tuple(map(float, failed)),
                      tuple(map(float, left)))


@dataclass(frozen=True)
class SplitLognormal:
    """Days to the crossing as a split (two-piece) lognormal through a P10/P50/P90 of days ahead: ln t is
    normal around ln d50 with the spread below the median set by d10 and above it by d90 (the three
    quantiles are reproduced; each half is half of an ordinary lognormal)."""

    d50: float
    low: float  # sd of ln t below the median
    high: float  # ... above it

    @classmethod
    def through(cls, d10: float, d50: float, d90: float | None) -> "SplitLognormal":
        z90 = float(special.ndtri(0.9))
        d10 = max(d10, 0.5)
        d50 = max(d50, d10 * (1 + 1e-9))
        low = (math.log(d50) - math.log(d10)) / z90
        high = (math.log(d90) - math.log(d50)) / z90 if d90 is not None and d90 > d50 else low
        return cls(d50, low, high)

    def cdf(self, days: np.ndarray) -> np.ndarray:
        z = np.log(np.maximum(np.asarray(days, dtype=float), 1e-9) / self.d50)
        return special.ndtr(z / np.where(z < 0, self.low, self.high))

    def days_left(self, days: np.ndarray) -> np.ndarray:
        """E[(T - d)+] in closed form: the partial expectations of the two lognormal halves,
        E[T; T > d] = exp(mu + s^2/2) Phi((mu + s^2 - ln d) / s) (any text on the lognormal), less d P(T > d)."""
        d = np.maximum(np.asarray(days, dtype=float), 1e-9)
        mu, lo, hi = math.log(self.d50), self.low, self.high
        upper_half = math.exp(mu + hi * hi / 2)  # times Phi(...) gives the high lognormal's partial expectation
        above = np.where(d >= self.d50, upper_half * special.ndtr((mu + hi * hi - np.log(d)) / hi),
                         upper_half * special.ndtr(hi)
                         + math.exp(mu + lo * lo / 2) * (special.ndtr((mu + lo * lo - np.log(d)) / lo) - special.ndtr(lo)))
        return np.maximum(above - d * (1.0 - self.cdf(d)), 0.0)


def split_lognormal_chance(d10: float, d50: float, d90: float | None) -> Callable[[np.ndarray], np.ndarray]:
    """P(crossed within t days) of the ``SplitLognormal`` through a P10/P50/P90 of days ahead."""
    return SplitLognormal.through(d10, d50, d90).cdf
