"""Reference: the status words of one reading kind and of one pump."""

from __future__ import annotations

from datetime import date, timedelta

from logbook.analysis.results import FLAG_JUMP, FLAG_STEP, KindForecast, Outcome, PumpForecast

from logbook.analysis.status import (
    NO_READINGS,
    OVER_LIMIT,
    OVERHAUL_DUE,
    PLAN_OVERHAUL,
    RETEST,
    STATUS_ORDER,
    STEADY,
    STEP_CHANGE,
    TOO_FEW,
    StatusThresholds,
)


def _within(d: date | None, today: date, days: int) -> bool:
    return d is not None and d <= today + timedelta(days=days)


def _hours_within(hours: float | None, per_day: float | None, days: int) -> bool:
    return hours is not None and per_day is not None and hours <= per_day * days


def kind_status(kf: KindForecast, today: date, per_day: float | None, th: StatusThresholds) -> str:
    """Status words of one reading kind."""
    if kf.outcome is Outcome.PAST_LIMIT:
        return OVER_LIMIT
    if FLAG_JUMP in kf.flags and kf.outcome is not Outcome.NO_LIMIT:
        return RETEST
    if FLAG_STEP in kf.flags:
        return STEP_CHANGE
    if kf.outcome is Outcome.CROSSING:
        if _within(kf.p10_date, today, th.due_days) or _hours_within(kf.p10_hours, per_day, th.due_days):
            return OVERHAUL_DUE
        if _within(kf.p10_date, today, th.plan_days) or _hours_within(kf.p10_hours, per_day, th.plan_days):
            return PLAN_OVERHAUL
        return STEADY
    if kf.outcome is Outcome.NO_CROSSING:
        if _within(kf.p10_date, today, th.due_days):
            return OVERHAUL_DUE
        if _within(kf.p10_date, today, th.plan_days):
            return PLAN_OVERHAUL
        return STEADY
    if kf.outcome is Outcome.TOO_FEW:
        return TOO_FEW
    if kf.outcome is Outcome.NO_LIMIT:
        return STEADY
    return NO_READINGS


def pump_status(pf: PumpForecast, today: date, thresholds: StatusThresholds | None = None) -> str:
    """The most urgent status over the pump's reading kinds."""
    th = thresholds or StatusThresholds()
    words = [kind_status(k, today, pf.hours_per_day, th) for k in pf.kinds]
    if not words:
        return NO_READINGS
    # a pump with a usable forecast on some kind is not "too few" overall
    if TOO_FEW in words and any(w in (STEADY, PLAN_OVERHAUL, OVERHAUL_DUE) for w in words):
        words = [w for w in words if w != TOO_FEW]
    return min(words, key=STATUS_ORDER.index)
