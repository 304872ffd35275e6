"""Step of the engine: each pump's status in plain words (with a symbol, so that it never rests on colour
alone), the kind closest to its limit, and the one most-urgent-first order of pumps.

Status of one kind: past its limit -> over limit; its newest reading set aside as far off
its trend (a unit mix-up looks like this) -> test again, until a second reading confirms or
clears it; a step flagged -> step change;
a crossing whose P10 date (or P10 hours at the machine's utilisation) is within
``due_days`` -> overhaul due, within ``plan_days`` -> plan overhaul (the plan schedules
every pump by its P10), else steady; no crossing within the horizon -> the same by its
P10 date when it has one, else steady; too few
readings; no limit -> steady; no readings. A pump takes its most urgent kind's status,
but "too few" only when no kind has a usable forecast.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date

from typing import TYPE_CHECKING

from logbook.analysis.results import Outcome, PumpForecast

if TYPE_CHECKING:  # annotations only: the views import this module without numpy
    import numpy as np

OVER_LIMIT = "✖ over limit"
RETEST = "? test again"  # the newest reading is far off the trend: read it again before acting on it
STEP_CHANGE = "↯ step change - inspect"  # not ⚠: that sign marks safety lines only (logbook.cautions)
OVERHAUL_DUE = "▲ overhaul due"
PLAN_OVERHAUL = "△ plan overhaul"
STEADY = "✓ steady"
TOO_FEW = "… too few readings"
NO_READINGS = "- no readings"

#: Most urgent first; views may sort on this.
STATUS_ORDER = (OVER_LIMIT, RETEST, STEP_CHANGE, OVERHAUL_DUE, PLAN_OVERHAUL, TOO_FEW, STEADY, NO_READINGS)


@dataclass(frozen=True)
class StatusThresholds:
    """When a forecast becomes urgent (defaults: common practice, no published source)."""

    due_days: int = 90  # P10 date within this: overhaul due
    plan_days: int = 365  # P10 date within this: plan the overhaul


def pump_statuses(
    outcome, step, jump, p10_day, p10_hours, per_day, today: date,
    thresholds: StatusThresholds | None = None,
) -> list[str]:  # fmt: skip
    """The status of many pumps at once (module docstring) from (P, K) numpy arrays: outcome (Outcome
    values as strings), step flag, newest-reading-set-aside flag, P10 day ordinals and hours (NaN for none) and (P,) hours per day."""
    import numpy as np  # here, so that the views can import this module without numpy

    th = thresholds or StatusThresholds()
    t = today.toordinal()
    rate = np.asarray(per_day, dtype=float)[:, None]
    with np.errstate(invalid="ignore"):
        due = (p10_day <= t + th.due_days) | (p10_hours <= rate * th.due_days)
        plan = (p10_day <= t + th.plan_days) | (p10_hours <= rate * th.plan_days)
        word = np.select(
            [outcome == Outcome.PAST_LIMIT.value, jump & (outcome != Outcome.NO_LIMIT.value), step,
             (outcome == Outcome.CROSSING.value) & due, (outcome == Outcome.CROSSING.value) & plan,
             outcome == Outcome.CROSSING.value, (outcome == Outcome.NO_CROSSING.value) & (p10_day <= t + th.due_days),
             (outcome == Outcome.NO_CROSSING.value) & (p10_day <= t + th.plan_days),
             outcome == Outcome.NO_CROSSING.value, outcome == Outcome.TOO_FEW.value, outcome == Outcome.NO_LIMIT.value],
            [_RANK[OVER_LIMIT], _RANK[RETEST], _RANK[STEP_CHANGE], _RANK[OVERHAUL_DUE], _RANK[PLAN_OVERHAUL], _RANK[STEADY],
             _RANK[OVERHAUL_DUE], _RANK[PLAN_OVERHAUL], _RANK[STEADY], _RANK[TOO_FEW], _RANK[STEADY]],
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


def worst_kinds(code: np.ndarray, candidate: np.ndarray, progress: np.ndarray, p10_days: np.ndarray,
                p10_hours: np.ndarray, past: int, crossing: int) -> list[int]:  # fmt: skip
    """Per pump, the kind closest to its limit (-1 for none) among the (P, K) ``candidate`` kinds (those
    with a limit and readings): past limit first, then the earliest P10 (days ahead, -1 for none, else
    hours: the plan schedules by it),
    then the furthest along toward its limit (``progress``: latest value over limit, inverted for a lower
    limit); the first such kind on a tie. ``code``: forecast outcome codes, ``past``/``crossing`` two of them."""
    import numpy as np

    n_pumps, kinds = candidate.shape
    is_past, is_crossing = code == past, code == crossing
    rank = np.where(is_past, 0, np.where(is_crossing, 1, 2)).astype(float)
    when = np.where(is_past, 0.0, np.where(is_crossing, np.where(p10_days >= 0, p10_days, np.inf), -progress))
    hours = np.where(is_crossing, np.nan_to_num(p10_hours, nan=0.0), 0.0)
    best = np.where(candidate[:, 0], 0, -1)
    rows = np.arange(n_pumps)
    for j in range(1, kinds):
        held = np.maximum(best, 0)
        best_rank, best_when, best_hours = rank[rows, held], when[rows, held], hours[rows, held]
        less = (rank[:, j] < best_rank) | ((rank[:, j] == best_rank) & (
            (when[:, j] < best_when) | ((when[:, j] == best_when) & (hours[:, j] < best_hours))))
        best = np.where(candidate[:, j] & ((best < 0) | less), j, best)
    return best.tolist()
