"""A pump's urgency in plain words, each with a symbol so that it never rests on colour alone."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date, timedelta

from logbook.analysis.results import FLAG_STEP, KindForecast, Outcome, PumpForecast

OVER_LIMIT = "✖ over limit"
STEP_CHANGE = "⚠ step change - inspect"
OVERHAUL_DUE = "▲ overhaul due"
PLAN_OVERHAUL = "△ plan overhaul"
STEADY = "✓ steady"
TOO_FEW = "… too few readings"
NO_READINGS = "- no readings"

#: Most urgent first; views may sort on this.
STATUS_ORDER = (OVER_LIMIT, STEP_CHANGE, OVERHAUL_DUE, PLAN_OVERHAUL, TOO_FEW, STEADY, NO_READINGS)


@dataclass(frozen=True)
class StatusThresholds:
    """When a forecast becomes urgent (defaults: common practice, no published source)."""

    due_days: int = 90  # P10 date within this: overhaul due
    plan_days: int = 365  # P50 date within this: plan the overhaul


def _within(d: date | None, today: date, days: int) -> bool:
    return d is not None and d <= today + timedelta(days=days)


def _hours_within(hours: float | None, per_day: float | None, days: int) -> bool:
    return hours is not None and per_day is not None and hours <= per_day * days


def kind_status(kf: KindForecast, today: date, per_day: float | None, th: StatusThresholds) -> str:
    """Status words of one reading kind."""
    if kf.outcome is Outcome.PAST_LIMIT:
        return OVER_LIMIT
    if FLAG_STEP in kf.flags:
        return STEP_CHANGE
    if kf.outcome is Outcome.CROSSING:
        if _within(kf.p10_date, today, th.due_days) or _hours_within(kf.p10_hours, per_day, th.due_days):
            return OVERHAUL_DUE
        if _within(kf.p50_date, today, th.plan_days) or _hours_within(kf.p50_hours, per_day, th.plan_days):
            return PLAN_OVERHAUL
        return STEADY
    if kf.outcome is Outcome.NO_CROSSING:
        if _within(kf.p10_date, today, th.due_days):
            return OVERHAUL_DUE
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


def pump_statuses(
    outcome, step, p10_day, p50_day, p10_hours, p50_hours, per_day, today: date,
    thresholds: StatusThresholds | None = None,
) -> list[str]:  # fmt: skip
    """``pump_status`` of many pumps at once from (P, K) numpy arrays: outcome (Outcome values as strings),
    step flag, P10/P50 day ordinals and hours (NaN for none) and (P,) hours per day (NaN for none)."""
    import numpy as np  # here, so that the views can import this module without numpy

    th = thresholds or StatusThresholds()
    t = today.toordinal()
    rate = np.asarray(per_day, dtype=float)[:, None]
    with np.errstate(invalid="ignore"):
        due = (p10_day <= t + th.due_days) | (p10_hours <= rate * th.due_days)
        plan = (p50_day <= t + th.plan_days) | (p50_hours <= rate * th.plan_days)
        word = np.select(
            [outcome == Outcome.PAST_LIMIT.value, step,
             (outcome == Outcome.CROSSING.value) & due, (outcome == Outcome.CROSSING.value) & plan,
             outcome == Outcome.CROSSING.value, (outcome == Outcome.NO_CROSSING.value) & (p10_day <= t + th.due_days),
             outcome == Outcome.NO_CROSSING.value, outcome == Outcome.TOO_FEW.value, outcome == Outcome.NO_LIMIT.value],
            [_RANK[OVER_LIMIT], _RANK[STEP_CHANGE], _RANK[OVERHAUL_DUE], _RANK[PLAN_OVERHAUL], _RANK[STEADY],
             _RANK[OVERHAUL_DUE], _RANK[STEADY], _RANK[TOO_FEW], _RANK[STEADY]],
            _RANK[NO_READINGS],
        )  # fmt: skip
    usable = np.isin(word, [_RANK[STEADY], _RANK[PLAN_OVERHAUL], _RANK[OVERHAUL_DUE]]).any(axis=1, keepdims=True)
    word = np.where(usable & (word == _RANK[TOO_FEW]), len(STATUS_ORDER), word)
    return [STATUS_ORDER[w] for w in word.min(axis=1).tolist()]


_RANK = {word: i for i, word in enumerate(STATUS_ORDER)}

#: Outcome of the worst kind, most urgent first (used after the status to break ties).
_OUTCOME_RANK = {
    Outcome.PAST_LIMIT: 0,
    Outcome.CROSSING: 1,
    Outcome.NO_CROSSING: 2,
    Outcome.TOO_FEW: 3,
    Outcome.NO_DATA: 4,
    Outcome.NO_LIMIT: 5,
}


def status_rank(status: str) -> int:
    """Position of a status word in ``STATUS_ORDER`` (unknown words last)."""
    return _RANK.get(status, len(STATUS_ORDER))


def urgency_key(pf: PumpForecast) -> tuple:
    """The one "most urgent first" order of pumps (every list sorts on it): status in
    ``STATUS_ORDER``, then the worst kind's outcome, then furthest past its limit, earliest
    P10 date, earliest P50 date, serial."""
    status = status_rank(pf.status)
    kf = pf.worst
    if kf is None:
        return (status, 9, date.max, date.max, 0.0, pf.serial)
    rank = _OUTCOME_RANK.get(kf.outcome, 8)
    if kf.outcome is Outcome.PAST_LIMIT:
        over = kf.percent_of_limit or 0.0
        if kf.limit is not None and kf.limit.direction == "below":
            over = -over
        return (status, rank, date.min, date.min, -over, pf.serial)
    return (status, rank, kf.p10_date or date.max, kf.p50_date or date.max, 0.0, pf.serial)


def most_urgent_first(pumps) -> list[PumpForecast]:
    """``pumps`` sorted by ``urgency_key``."""
    return sorted(pumps, key=urgency_key)
