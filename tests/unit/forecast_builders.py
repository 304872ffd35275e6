"""Build forecast records by hand for plan and export tests (no engine needed)."""

from __future__ import annotations

from datetime import date, timedelta

import numpy as np

from logbook.analysis.results import FitDetail, FleetForecast, KindForecast, Outcome, PumpForecast
from logbook.model import ALL_KINDS, Kind, Limit

TODAY = date(2026, 3, 10)
HOURS_PER_DAY = 10.0

LIMITS = {
    Kind.CASE_DRAIN: Limit(Kind.CASE_DRAIN, 8.0, "above"),
    Kind.SERVO_PRESSURE: Limit(Kind.SERVO_PRESSURE, 18.0, "below"),
    Kind.NEUTRAL_DRIFT: Limit(Kind.NEUTRAL_DRIFT, 5.0, "above"),
}


def linear_fit(x_hours, y_value) -> FitDetail:
    """Ordinary least squares fit of y on x, packed as the engine would."""
    x = np.asarray(x_hours, float)
    y = np.asarray(y_value, float)
    design = np.column_stack([np.ones_like(x), x])
    coef, *_ = np.linalg.lstsq(design, y, rcond=None)
    resid = y - design @ coef
    dof = max(len(x) - 2, 1)
    sigma = float(np.sqrt(resid @ resid / dof))
    cov = sigma**2 * np.linalg.inv(design.T @ design)
    return FitDetail(
        x_hours=tuple(float(v) for v in x),
        y_value=tuple(float(v) for v in y),
        used=tuple(True for _ in x),
        path="linear",
        params=(float(coef[0]), float(coef[1])),
        cov=((float(cov[0, 0]), float(cov[0, 1])), (float(cov[1, 0]), float(cov[1, 1]))),
        sigma=sigma,
        dof=dof,
    )


def kind_forecast(
    serial: str,
    kind: Kind = Kind.CASE_DRAIN,
    p10_days: float | None = None,
    spread: float = 1.5,
    past: bool = False,
    outcome: Outcome | None = None,
    latest: float | None = None,
    with_fit: bool = False,
    today: date = TODAY,
    flags: frozenset[str] = frozenset(),
) -> KindForecast:
    """A forecast whose P10 lies ``p10_days`` ahead; P50 and P90 follow by factor ``spread``."""
    limit = LIMITS[kind]
    if outcome is None:
        outcome = Outcome.PAST_LIMIT if past else (Outcome.CROSSING if p10_days is not None else Outcome.NO_CROSSING)
    days = (p10_days, p10_days * spread, p10_days * spread * spread) if p10_days is not None else (None,) * 3
    hours = tuple(None if d is None else d * HOURS_PER_DAY for d in days)
    dates = tuple(None if d is None else today + timedelta(days=int(d)) for d in days)
    if latest is None:
        latest = limit.value * (1.1 if past else 0.7) if limit.direction == "above" else limit.value * (0.9 if past else 1.3)
    fit = None
    if with_fit:
        x = [0.0, 400.0, 900.0, 1500.0, 2100.0]
        base = 2.0 if kind is not Kind.SERVO_PRESSURE else 26.0
        step = (latest - base) / x[-1]
        y = [base + step * xi + (0.05 if i % 2 else -0.05) for i, xi in enumerate(x)]
        fit = linear_fit(x, y)
    return KindForecast(
        serial=serial,
        kind=kind,
        limit=limit,
        outcome=outcome,
        latest_value=latest,
        latest_raw=latest,
        latest_on=today - timedelta(days=20),
        n_readings=5 if with_fit else 3,
        segment_start=today - timedelta(days=400),
        hours_in_segment=2200.0,
        path="linear" if outcome in (Outcome.CROSSING, Outcome.PAST_LIMIT, Outcome.NO_CROSSING) else "none",
        p10_hours=hours[0],
        p50_hours=hours[1],
        p90_hours=hours[2],
        p10_date=dates[0],
        p50_date=dates[1],
        p90_date=dates[2],
        flags=flags,
        fit=fit,
        rate_per_1000h=0.5,
    )


def pump_forecast(
    serial: str,
    kinds: list[KindForecast] | None = None,
    model: str = "AX90",
    site: str | None = "North",
    machine: str | None = None,
    status: str = "",
) -> PumpForecast:
    """A pump with the given kind forecasts; missing kinds are filled as 'no crossing'."""
    given = {k.kind: k for k in (kinds or [])}
    full = tuple(given.get(kind) or kind_forecast(serial, kind) for kind in ALL_KINDS)
    return PumpForecast(
        serial=serial,
        model=model,
        machine=machine or f"M-{serial}",
        position="main",
        site=site,
        hours_since_overhaul=2200.0,
        hours_per_day=HOURS_PER_DAY,
        kinds=full,
        worst=full[0],
        status=status,
        last_reading_on=TODAY - timedelta(days=20),
    )


def fleet(pumps: list[PumpForecast], today: date = TODAY) -> FleetForecast:
    return FleetForecast(today=today, pumps=tuple(pumps), source="/data/demo.db")
