"""Turning forecasts into table cells and sort keys (pure: no Textual, no SQL).

Nothing here computes a forecast: it picks, orders and words what the engine made.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date
from typing import Callable

from logbook import fmt
from logbook.analysis.results import (
    FLAG_JUMP,
    FLAG_OUTLIER,
    FLAG_POOLED,
    FLAG_STEP,
    OUTCOME_WORDS,
    KindForecast,
    Outcome,
    PumpForecast,
)
from logbook.analysis.status import STATUS_ORDER
from logbook.model import Kind

KIND_SHORT = {Kind.CASE_DRAIN: "drain", Kind.SERVO_PRESSURE: "servo", Kind.NEUTRAL_DRIFT: "drift"}

FLAG_WORDS = {
    FLAG_POOLED: "pooled with its model's fleet",
    FLAG_OUTLIER: "a wild reading set aside",
    FLAG_STEP: "sudden step (breakage?)",
    FLAG_JUMP: "newest reading far from the trend",
}

#: Outcome order for "most urgent first" (past the limit, then by P10 date, ...).
_OUTCOME_RANK = {
    Outcome.PAST_LIMIT: 0,
    Outcome.CROSSING: 1,
    Outcome.NO_CROSSING: 2,
    Outcome.TOO_FEW: 3,
    Outcome.NO_DATA: 4,
    Outcome.NO_LIMIT: 5,
}


def flag_words(flags) -> str:
    return ", ".join(FLAG_WORDS.get(f, f.replace("_", " ")) for f in sorted(flags))


def trend(kf: KindForecast | None) -> tuple[str, str]:
    """(arrow, words) for the direction the normalized value moves near today.

    The arrow shows the value (up or down); the words say whether that is toward
    the limit. A change under 1 % of the limit per 1000 h counts as steady
    (common practice, no published source).
    """
    if kf is None or kf.rate_per_1000h is None:
        return "·", "no trend"
    rate = kf.rate_per_1000h
    scale = abs(kf.limit.value) if kf.limit is not None and kf.limit.value else max(abs(kf.latest_value or 0.0), 1.0)
    if abs(rate) < 0.01 * scale:
        return "→", "steady"
    arrow = "↑" if rate > 0 else "↓"
    if kf.limit is None:
        return arrow, "rising" if rate > 0 else "falling"
    toward = (rate > 0) == (kf.limit.direction == "above")
    return arrow, "toward limit" if toward else "away from limit"


def urgency_key(pf: PumpForecast) -> tuple:
    """Most urgent first: the engine's status order, then furthest past the limit,
    earliest P10, earliest P50, serial."""
    status = STATUS_ORDER.index(pf.status) if pf.status in STATUS_ORDER else len(STATUS_ORDER)
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


def status_rank(status: str) -> int:
    """Position of a status word in the engine's most-urgent-first order."""
    return STATUS_ORDER.index(status) if status in STATUS_ORDER else len(STATUS_ORDER)


def where(pf: PumpForecast) -> str:
    if not pf.machine:
        return "not fitted"
    return f"{pf.machine} {pf.position or ''}".strip()


@dataclass(frozen=True)
class Column:
    """A fleet table column as laid out: key, label, width and how to word a cell."""

    key: str
    label: str
    width: int
    cell: Callable[[PumpForecast], str]


def clip(text: str, width: int) -> str:
    """Text cut to ``width`` cells with an ellipsis, so that columns never run together."""
    return text if len(text) <= width else text[: max(width - 1, 0)] + "…"


def _month(d: date | None) -> str:
    return fmt.month(d)


def _hours_cell(pf: PumpForecast) -> str:
    return "-" if pf.hours_since_overhaul is None else f"{pf.hours_since_overhaul:,.0f}"


def _worst_date(getter, shown):
    return lambda p: shown(getter(p.worst) if p.worst is not None else None)


def _closest(p: PumpForecast, long: bool) -> str:
    if p.worst is None:
        return "-"
    return p.worst.kind.label if long else KIND_SHORT[p.worst.kind]


def fleet_layout(width: int, serial_width: int = 7) -> tuple[Column, ...]:
    """Columns that fit ``width`` cells (one space between columns).

    The narrow layout (80 columns) shows months for P50/P10, short kind names and an
    arrow for the trend; each step up adds detail while it still fits: full dates,
    full status, longer machine/position, the site, kind names, trend words.
    """
    w = {"serial": max(6, min(serial_width, 12)), "where": 15, "model": 6, "hours": 6, "kind": 5,
         "p50": 7, "p10": 7, "trend": 1, "status": 15, "site": 0}
    full_dates = long_kind = trend_words = False

    def total() -> int:
        shown = [v for v in w.values() if v]
        return sum(shown) + len(shown) - 1

    for step in ("dates", "status", "where", "site", "kind", "trend"):
        before = dict(w)
        if step == "dates":
            w["p50"] = w["p10"] = 10
        elif step == "status":
            w["status"] = 23
        elif step == "where":
            w["where"] = 19
        elif step == "kind":
            w["kind"] = 14
        elif step == "site":
            w["site"] = 14
        elif step == "trend":
            w["trend"] = 17
        if total() > width:
            w = before
            break
        full_dates |= step == "dates"
        long_kind |= step == "kind"
        trend_words |= step == "trend"
    for key, least in (("where", 9), ("status", 10), ("serial", 6)):  # narrower than 80 columns: squeeze
        if total() > width:
            w[key] = max(least, w[key] - (total() - width))
    if total() < width and w["where"] < 19:
        w["where"] = min(19, w["where"] + width - total())
    day = fmt.day if full_dates else _month
    cols = [
        Column("serial", "Serial", w["serial"], lambda p: p.serial),
        Column("where", "Machine, position" if w["where"] >= 17 else "Machine", w["where"], where),
        Column("site", "Site", w["site"], lambda p: p.site or "-"),
        Column("model", "Model", w["model"], lambda p: p.model),
        Column("hours", "Hours" if w["kind"] < 14 else "Hours", w["hours"], _hours_cell),
        Column("kind", "Closest to limit" if long_kind else "Worst", w["kind"], lambda p: _closest(p, long_kind)),
        Column("p50", "P50 date" if full_dates else "P50", w["p50"], _worst_date(lambda k: k.p50_date, day)),
        Column("p10", "P10 date" if full_dates else "P10", w["p10"], _worst_date(lambda k: k.p10_date, day)),
        Column("trend", "Trend" if trend_words else "T", w["trend"],
               (lambda p: " ".join(trend(p.worst))) if trend_words else (lambda p: trend(p.worst)[0])),
        Column("status", "Status", w["status"], lambda p: p.status or "-"),
    ]
    return tuple(
        Column(c.key, clip(c.label, c.width), c.width, (lambda cell, w: lambda p: clip(cell(p), w))(c.cell, c.width))
        for c in cols if c.width
    )


def _date_key(getter):
    def key(pf: PumpForecast) -> tuple:
        d = getter(pf.worst) if pf.worst is not None else None
        return (d is None, d or date.max, pf.serial)

    return key


#: Sort key of each column; "status" sorts most urgent first.
SORT_KEYS: dict[str, Callable[[PumpForecast], tuple]] = {
    "serial": lambda p: (p.serial,),
    "where": lambda p: (where(p), p.serial),
    "site": lambda p: (p.site or "~", where(p), p.serial),
    "model": lambda p: (p.model, p.serial),
    "hours": lambda p: (p.hours_since_overhaul is None, -(p.hours_since_overhaul or 0.0), p.serial),
    "kind": lambda p: ((p.worst.kind.value if p.worst else "~"), urgency_key(p)),
    "p50": _date_key(lambda k: k.p50_date),
    "p10": _date_key(lambda k: k.p10_date),
    "trend": lambda p: (trend(p.worst)[1], urgency_key(p)),
    "status": urgency_key,
}
SORT_ORDER = ("status", "p10", "p50", "hours", "serial", "where", "site", "model", "kind", "trend")
SORT_WORDS = {
    "status": "most urgent first", "p10": "P10 date", "p50": "P50 date", "hours": "hours since overhaul (most first)",
    "serial": "serial", "where": "machine and position", "site": "site", "model": "model",
    "kind": "reading closest to its limit", "trend": "trend",
}


FORECASTING = "… forecasting"


def provisional_pumps(fleet) -> list[PumpForecast]:
    """Pumps in service from the snapshot alone, shown while the first forecast runs
    (no figures: every forecast field is left empty)."""
    out = []
    for f in fleet.fitments:
        if f.removed_on is None and f.serial in fleet.pumps:
            machine = fleet.machines.get(f.machine)
            out.append(PumpForecast(f.serial, fleet.pumps[f.serial].model, f.machine, f.position,
                                    machine.site if machine else None, None, None, (), status=FORECASTING))
    return out


def select_pumps(
    pumps, *, site: str | None = None, model: str | None = None, status: str | None = None,
    sort_key: str = "status", reverse: bool = False,
) -> list[PumpForecast]:
    """The pumps passing the filters (None = any), in the order of one column."""
    chosen = [
        p for p in pumps
        if (site is None or (p.site or "-") == site)
        and (model is None or p.model == model)
        and (status is None or p.status == status)
    ]
    chosen.sort(key=SORT_KEYS[sort_key], reverse=reverse)
    return chosen


def outcome_line(kf: KindForecast, prefs) -> str:
    """One line for a kind: latest against its limit, and what the engine projects."""
    latest = fmt.value(kf.kind, kf.latest_value, prefs)
    limit = fmt.value(kf.kind, kf.limit.value, prefs) if kf.limit else "no limit"
    share = f" ({kf.percent_of_limit:.0f} % of limit)" if kf.percent_of_limit is not None else ""
    words = OUTCOME_WORDS[kf.outcome]
    if kf.outcome is Outcome.CROSSING:
        words = f"P10 {fmt.day(kf.p10_date)} · P50 {fmt.day(kf.p50_date)} · P90 {fmt.day(kf.p90_date)}"
    return f"{kf.kind.label}: {latest} against {limit}{share}; {words}"
