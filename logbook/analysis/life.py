"""Fleet life per pump model: Weibull time between overhauls with right-censoring (numpy/scipy).

Fit: maximum likelihood with right-censored intervals (pumps still running) and
left-truncated ones (a pump first recorded with hours already on it has survived
to that age: its likelihood is conditioned on that survival). The scale is profiled
out in closed form (scale^shape = sum(t^shape - entry^shape) / failures) and the
shape found by a bounded one-dimensional search on log(shape).

Confidence bounds: Fisher-matrix (delta method) on the log parameters. The observed
information of (log shape, log scale) is computed analytically at the optimum; a
life quantile t_p = scale * (-ln(1-p))^(1/shape) gets bounds exp(ln t_p +/- z * se).

Fewer than ``MIN_FAILURES`` failures give no fit, with the reason in words.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy import optimize, special

from logbook.analysis.results import FleetForecast
from logbook.analysis.timeline import Timeline
from logbook.model import Event, EventKind, Fitment, Fleet

MIN_FAILURES = 2
FEW_FAILURES = 5  # below this the bounds are wide: say so
_SHAPE_BOUNDS = (0.05, 50.0)


@dataclass(frozen=True)
class WeibullFit:
    """Two-parameter Weibull fitted by maximum likelihood (hours)."""

    shape: float
    scale_hours: float
    loglik: float
    failures: int
    censored: int
    cov_log: tuple[tuple[float, float], tuple[float, float]]  # covariance of (ln shape, ln scale)

    def quantile_hours(self, p: float) -> float:
        """Hours by which a fraction ``p`` of pumps has reached overhaul."""
        return self.scale_hours * (-math.log1p(-p)) ** (1.0 / self.shape)

    def quantile_bounds(self, p: float, confidence: float = 0.90) -> tuple[float, float]:
        """Two-sided Fisher-matrix bounds on ``quantile_hours(p)`` (delta method, log scale)."""
        c = math.log(-math.log1p(-p))
        grad = np.array([-c / self.shape, 1.0])  # d ln t_p / d(ln shape, ln scale)
        var = float(grad @ np.asarray(self.cov_log) @ grad)
        z = special.ndtri(0.5 + confidence / 2)  # = scipy.stats.norm.ppf
        mid = math.log(self.quantile_hours(p))
        half = z * math.sqrt(max(var, 0.0))
        return math.exp(mid - half), math.exp(mid + half)

    def survival(self, hours) -> np.ndarray:
        return np.exp(-((np.asarray(hours, float) / self.scale_hours) ** self.shape))

    def chance_within(self, age_hours, horizon_hours) -> np.ndarray:
        """P(overhaul within the next ``horizon_hours`` | running at ``age_hours``)."""
        age = np.asarray(age_hours, float)
        later = age + np.asarray(horizon_hours, float)
        log_ratio = (age / self.scale_hours) ** self.shape - (later / self.scale_hours) ** self.shape
        return -np.expm1(log_ratio)


class NoFit(ValueError):
    """The data cannot support a Weibull fit; the message says why."""


def _arrays(hours, observed, entry):
    t = np.asarray(hours, float)
    d = np.asarray(observed, bool)
    e = np.zeros_like(t) if entry is None else np.asarray(entry, float)
    if t.shape != d.shape or t.shape != e.shape or t.ndim != 1:
        raise NoFit("hours, observed and entry must be one-dimensional and the same length")
    if np.any(~np.isfinite(t)) or np.any(t <= 0):
        raise NoFit("every interval must be a positive number of hours")
    if np.any(e < 0) or np.any(e >= t):
        raise NoFit("entry hours must be zero or more and below the interval's end")
    return t, d, e


def _profile_loglik(log_shape: float, t, d, e) -> tuple[float, float]:
    """(log-likelihood, scale) with the scale at its closed-form optimum for this shape."""
    k = math.exp(log_shape)
    r = int(d.sum())
    tmax = float(t.max())  # scale the hours so the powers do not overflow
    exposure = float(np.sum((t / tmax) ** k) - np.sum((e / tmax) ** k))
    scale = tmax * (exposure / r) ** (1.0 / k)
    lt = np.log(t[d])
    ll = r * math.log(k) - r * k * math.log(scale) + (k - 1) * float(lt.sum()) - r
    return ll, scale


def _observed_information(k: float, scale: float, t, d, e) -> np.ndarray:
    """Minus the Hessian of the log-likelihood in (ln shape, ln scale)."""
    r = int(d.sum())
    v = math.log(scale)
    zt = k * (np.log(t) - v)
    ee = e[e > 0]
    ze = k * (np.log(ee) - v)
    et, eze = np.exp(zt), np.exp(ze)
    zf = zt[d]
    d2_uu = zf.sum() - (np.sum((zt + zt**2) * et) - np.sum((ze + ze**2) * eze))
    d2_uv = -k * r + k * (np.sum((1 + zt) * et) - np.sum((1 + ze) * eze))
    d2_vv = -k * k * (et.sum() - eze.sum())
    return -np.array([[d2_uu, d2_uv], [d2_uv, d2_vv]])


def fit_weibull(hours, observed, entry=None) -> WeibullFit:
    """Maximum-likelihood Weibull of intervals ``hours``; ``observed`` False = still running.

    ``entry`` (optional) is the age at which each interval was first seen (left truncation).
    Raises NoFit with the reason when fewer than MIN_FAILURES failures or no finite optimum.
    """
    t, d, e = _arrays(hours, observed, entry)
    r = int(d.sum())
    if r < MIN_FAILURES:
        raise NoFit(f"{r} overhaul(s) recorded; at least {MIN_FAILURES} are needed to fit a life distribution")
    if np.ptp(np.log(t[d])) == 0 and not np.any(t[~d] > t[d][0]):
        raise NoFit("all recorded intervals are equally long: the spread of lives cannot be estimated")
    lo, hi = (math.log(b) for b in _SHAPE_BOUNDS)
    res = optimize.minimize_scalar(
        lambda u: -_profile_loglik(u, t, d, e)[0], bounds=(lo, hi), method="bounded", options={"xatol": 1e-10}
    )
    if not res.success or min(res.x - lo, hi - res.x) < 1e-3:
        raise NoFit("the likelihood has no maximum at a reasonable shape (0.05 to 50)")
    k = math.exp(float(res.x))
    ll, scale = _profile_loglik(float(res.x), t, d, e)
    info = _observed_information(k, scale, t, d, e)
    try:
        cov = np.linalg.inv(info)
    except np.linalg.LinAlgError as exc:
        raise NoFit("the information matrix is singular: too little data for bounds") from exc
    if np.any(np.diag(cov) <= 0):
        raise NoFit("the information matrix is not positive definite: too little data for bounds")
    return WeibullFit(
        shape=k,
        scale_hours=scale,
        loglik=ll,
        failures=r,
        censored=int((~d).sum()),
        cov_log=((float(cov[0, 0]), float(cov[0, 1])), (float(cov[1, 0]), float(cov[1, 1]))),
    )


@dataclass(frozen=True)
class LifeFigures:
    """Fleet life of one pump model, or the reason there is none."""

    model: str
    intervals: int
    failures: int
    censored: int
    fit: WeibullFit | None
    reason: str  # why there is no fit, or a caution about few failures; "" otherwise
    confidence: float
    b10_hours: float | None = None
    b10_bounds: tuple[float, float] | None = None
    median_hours: float | None = None
    median_bounds: tuple[float, float] | None = None
    running: int = 0  # pumps counted in the expectation below
    horizon_hours: float | None = None  # mean horizon in operating hours
    expected_overhauls: float | None = None  # within the horizon, among running pumps
    expected_sd: float | None = None  # its standard deviation (sum of p(1-p))

    method = "Weibull, maximum likelihood with right-censoring; Fisher-matrix bounds on log parameters"


def life_figures(
    model: str,
    hours,
    observed,
    entry=None,
    ages_hours=(),
    horizon_hours=(),
    confidence: float = 0.90,
) -> LifeFigures:
    """Fit, B10 and median with bounds, and expected overhauls of running pumps.

    ``ages_hours``/``horizon_hours``: per running pump, hours since its last overhaul now
    and operating hours it will run within the horizon.
    """
    t = np.asarray(hours, float)
    d = np.asarray(observed, bool)
    base: dict[str, Any] = dict(model=model, intervals=int(t.size), failures=int(d.sum()), censored=int((~d).sum()))
    try:
        fit = fit_weibull(t, d, entry)
    except NoFit as exc:
        return LifeFigures(**base, fit=None, reason=str(exc), confidence=confidence)
    caution = ""
    if fit.failures < FEW_FAILURES:
        caution = f"only {fit.failures} overhauls recorded: the bounds are wide"
    ages = np.asarray(ages_hours, float)
    expected, sd, horizon = _expected_overhauls(fit, ages, horizon_hours)
    return LifeFigures(
        **base,
        fit=fit,
        reason=caution,
        confidence=confidence,
        b10_hours=fit.quantile_hours(0.10),
        b10_bounds=fit.quantile_bounds(0.10, confidence),
        median_hours=fit.quantile_hours(0.50),
        median_bounds=fit.quantile_bounds(0.50, confidence),
        running=int(ages.size),
        horizon_hours=horizon,
        expected_overhauls=expected,
        expected_sd=sd,
    )


def _expected_overhauls(fit: WeibullFit, ages: np.ndarray, horizon_hours) -> tuple[float | None, ...]:
    """(expected overhauls, their sd, mean horizon) of running pumps aged ``ages`` within their horizons:
    the sum of each one's chance and the sd of that sum of independent Bernoulli trials; None for no pumps."""
    if not ages.size:
        return None, None, None
    ahead = np.broadcast_to(np.asarray(horizon_hours, float), ages.shape)
    chance = fit.chance_within(ages, ahead)
    return float(chance.sum()), float(math.sqrt(np.sum(chance * (1 - chance)))), float(np.mean(ahead))


# ----------------------------------------------------------------- from the fleet


@dataclass(frozen=True)
class Intervals:
    """Times between overhauls of one pump model: hours, observed (False = running), entry."""

    model: str
    serials: tuple[str, ...]
    hours: tuple[float, ...]
    observed: tuple[bool, ...]
    entry: tuple[float, ...]  # pump hours already run when first recorded (left truncation)
    skipped: tuple[str, ...] = ()  # what could not be used, in words


@dataclass(slots=True)
class _Bucket:
    """Intervals of one pump model as they are found."""

    serials: list[str] = field(default_factory=list)
    hours: list[float] = field(default_factory=list)
    observed: list[bool] = field(default_factory=list)
    entry: list[float] = field(default_factory=list)
    skipped: list[str] = field(default_factory=list)

    def add(self, serial: str, hours: float, observed: bool, entry: float) -> None:
        self.serials.append(serial)
        self.hours.append(hours)
        self.observed.append(observed)
        self.entry.append(entry)

    def intervals(self, model: str) -> Intervals:
        return Intervals(model, tuple(self.serials), tuple(self.hours), tuple(self.observed), tuple(self.entry),
                         tuple(self.skipped))  # fmt: skip


def _pump_intervals(bucket: _Bucket, serial: str, ends: Sequence[Event], at_end: dict[int, float], entry: float,
                    age_now: float | None, latest: float) -> None:  # fmt: skip
    """One pump's intervals between its overhauls/exchanges ``ends`` (pump hours ``at_end`` by event id()),
    then the open one, censored at ``age_now`` or else the ``latest`` pump hours (NaN: unknown)."""
    start: float | None = 0.0
    for event in ends:
        at = at_end[id(event)]
        if at != at:
            bucket.skipped.append(f"{serial}: {event.kind.value} on {event.happened_on}: pump hours unknown")
            start = None  # the next interval's start is unknown
            continue
        if start is not None and at - start > entry:
            bucket.add(serial, at - start, True, entry)
        elif start is not None:
            bucket.skipped.append(f"{serial}: {event.kind.value} on {event.happened_on} is not after the last")
        start, entry = at, 0.0
    age = age_now if age_now is not None else (latest - start if latest == latest and start is not None else None)
    if age is not None and age > entry:
        bucket.add(serial, age, False, entry)


def tbo_intervals(fleet: Fleet, ages_now: dict[str, float] | None = None) -> dict[str, Intervals]:
    """Per pump model: intervals between overhaul/exchange events in pump operating hours.

    A pump's hours count from new (or from its last overhaul before it was first
    recorded: ``pump_hours_at_fit`` of its first fitment is taken as that age and
    enters as left truncation). The open interval since the last overhaul is censored
    at ``ages_now[serial]`` (hours since the last overhaul, e.g. the engine's estimate
    for today) when given, else at the latest recorded pump hours. Pump hours at the
    events and the latest ones are the engine's (``Timeline``), from current readings.
    """
    ages_now = ages_now or {}
    timeline = Timeline.of(fleet)  # the engine's, when it forecast this snapshot
    ends = sorted((e for e in fleet.events if e.serial in fleet.pumps and e.kind in (EventKind.OVERHAUL, EventKind.EXCHANGE)),
                  key=lambda e: (e.happened_on, e.id or 0))  # fmt: skip
    at_end = dict(zip(map(id, ends), timeline.event_pump_hours(ends, timeline.latest).tolist()))
    highest = timeline.highest_pump_hours(timeline.latest)
    own: dict[str | None, list[Event]] = {}  # the serials of ``ends`` are pumps of the fleet
    for e in ends:
        own.setdefault(e.serial, []).append(e)
    first_fit: dict[str, Fitment] = {}
    for f in sorted(fleet.fitments, key=lambda f: (f.fitted_on, f.id or 0)):
        first_fit.setdefault(f.serial, f)
    found: dict[str, _Bucket] = {}
    for serial in sorted(s for s in fleet.pumps if s in first_fit):
        bucket = found.setdefault(fleet.models[fleet.pumps[serial].model].code, _Bucket())
        latest = float(highest[timeline.serial_index[serial]])
        _pump_intervals(bucket, serial, own.get(serial, ()), at_end, float(first_fit[serial].pump_hours_at_fit),
                        ages_now.get(serial), latest)  # fmt: skip
    return {model: b.intervals(model) for model, b in sorted(found.items())}


def fleet_life(
    fleet: Fleet, forecast: FleetForecast | None = None, horizon_days: int = 182, confidence: float = 0.90
) -> tuple[LifeFigures, ...]:
    """Life figures per pump model; running pumps' ages and utilisation from ``forecast``."""
    ages: dict[str, float] = {}
    ahead: dict[str, float] = {}
    for pf in forecast.pumps if forecast else ():
        if pf.hours_since_overhaul is not None:
            ages[pf.serial] = pf.hours_since_overhaul
            if pf.hours_per_day is not None and pf.machine is not None:
                ahead[pf.serial] = pf.hours_per_day * horizon_days
    figures = []
    for model, iv in tbo_intervals(fleet, ages).items():
        running = [s for s in sorted(ahead) if fleet.pumps[s].model == model and ages[s] > 0]
        figures.append(
            life_figures(
                model,
                iv.hours,
                iv.observed,
                iv.entry,
                ages_hours=[ages[s] for s in running],
                horizon_hours=[ahead[s] for s in running],
                confidence=confidence,
            )
        )
    return tuple(figures)
