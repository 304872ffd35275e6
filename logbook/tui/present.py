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
    KindForecast,
    Outcome,
    PumpForecast,
    outcome_words,
)
from logbook.analysis.status import status_rank as status_rank  # re-exported: the views rank statuses by it
from logbook.analysis.status import urgency_key  # the engine's one most-urgent-first order
from logbook.model import Kind
from logbook.tui.layout import clip, fleet_columns

KIND_SHORT = {Kind.CASE_DRAIN: "drain", Kind.SERVO_PRESSURE: "servo", Kind.NEUTRAL_DRIFT: "drift"}

FLAG_WORDS = {
    FLAG_POOLED: "pooled with its model's fleet",
    FLAG_OUTLIER: "a wild reading set aside",
    FLAG_STEP: "sudden step (breakage?)",
    FLAG_JUMP: "newest reading far from the trend",
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


def next_cell(test, today: date) -> str:
    """The next reading in four cells: 'now!' (the last reading jumped), 'due' (due or
    overdue), '12d' (days to go), '-' (nothing asks for one, or not fitted)."""
    if test is None or (test.test_on is None and not test.asap):
        return "-"
    if test.asap:
        return "now!"
    days = (test.test_on - today).days
    if days <= 0:
        return "due"
    return f"{days}d" if days <= 999 else f"{days // 365}y"


def next_words(test, today: date) -> str:
    """The next reading in full words with the reason, for the pump view."""
    if test is None:
        return "Next: no reading planned (not fitted in a machine)"
    return f"Next: {test.words(today)} · {test.reason}"


def is_reading_due(tests, serial: str, today: date) -> bool:
    """The pump's next reading (``tests``: serial -> rounds.NextTest) is due by ``today``."""
    test = tests.get(serial) if tests else None
    return test is not None and test.is_due(today)


def short_money(value: float | None) -> str:
    """An amount in at most five cells: 980, 8.4k, 125k, 1.2M, 35M ('' for none)."""
    if value is None or value != value:
        return ""
    v = abs(value)
    sign = "-" if value < 0 else ""
    if v < 999.5:
        return f"{sign}{v:.0f}"
    if v < 9_950:
        return f"{sign}{v / 1e3:.1f}k"
    if v < 999_500:
        return f"{sign}{v / 1e3:.0f}k"
    if v < 9_950_000:
        return f"{sign}{v / 1e6:.1f}M"
    return f"{sign}{v / 1e6:.0f}M"


def whole_money(value: float | None) -> str:
    """An amount in full with thousands separators: 12,500, or 12,500.50 with cents ('' for none)."""
    if value is None or value != value:
        return ""
    return f"{value:,.0f}" if value == round(value) else f"{value:,.2f}"


def setup_words(setup, models=()) -> str:
    """The plan settings (plan_setup.PlanSetup) in one line, as the plan screen states them."""
    return setup.words(models)


def either_way(line) -> str:
    """What moving a plan line's job one month earlier / later adds to its expected cost ('' without costs)."""
    if line.expected_cost is None:
        return ""

    def delta(other: float | None) -> str:
        if other is None:
            return "-"
        change = other - line.expected_cost
        return ("+" if change >= 0 else "") + short_money(change)

    return f"{delta(line.cost_month_earlier)}/{delta(line.cost_month_later)}"


def plan_money_lines(plan) -> list[str]:
    """Under the plan: its expected cost against the other policies, and the spend per month."""
    from logbook.plan import month_label

    if plan.costs is None:
        why = f" ({plan.placement_note})" if plan.placement_note else ""
        return [f"No costs weighed{why}: each pump goes no later than its P10 month. Costs: m (models) "
                "or logbook costs."]
    cur = plan.currency or "no currency set"
    p = plan.costs.policies
    spend = plan.spend_per_month()
    months = ", ".join(f"{month_label(m)} {short_money(spend.get(m, 0.0))}" for m in plan.settings.months)
    return [f"Expected {cur}: this plan {short_money(p['cost_optimal'])} · all at P10 month "
            f"{short_money(p['at_p10'])} · all run to failure {short_money(p['run_to_failure'])}",
            f"Spend {months}"]


def fleet_layout(width: int, serial_width: int = 7, tests=None, today: date | None = None,
                 costs: dict[str, float] | None = None) -> tuple[Column, ...]:
    """The columns of ``layout.fleet_columns`` (what fits ``width``) with how each cell
    is worded (user text made ``fmt.visible``), clipped to its column; ``tests`` (serial -> rounds.NextTest, None while
    not computed) words the next-reading column as of ``today``; ``costs`` (serial -> expected cost of its
    month in the plan; empty or None without costs) the cost column, blank for a pump the plan does not take."""
    costs = costs or {}
    spec = fleet_columns(width, serial_width)
    day = fmt.day if spec.full_dates else _month
    cells: dict[str, Callable[[PumpForecast], str]] = {
        "serial": lambda p: p.serial,
        "where": where,
        "site": lambda p: p.site or "-",
        "model": lambda p: p.model,
        "hours": _hours_cell,
        "kind": lambda p: _closest(p, spec.long_kind),
        "p50": _worst_date(lambda k: k.p50_date, day),
        "p10": _worst_date(lambda k: k.p10_date, day),
        "trend": (lambda p: " ".join(trend(p.worst))) if spec.trend_words else (lambda p: trend(p.worst)[0]),
        "status": lambda p: p.status or "-",
        "next": (lambda p: "") if tests is None or today is None else (lambda p: next_cell(tests.get(p.serial), today)),
        "cost": lambda p: short_money(costs.get(p.serial)),
    }
    return tuple(
        Column(c.key, c.label, c.width, (lambda cell, w: lambda p: clip(fmt.visible(cell(p)), w))(cells[c.key], c.width))
        for c in spec.columns
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
SORT_ORDER = ("status", "p10", "next", "cost", "p50", "hours", "serial", "where", "site", "model", "kind", "trend")
SORT_WORDS = {
    "status": "most urgent first", "p10": "P10 date", "p50": "P50 date", "hours": "hours since overhaul (most first)",
    "serial": "serial", "where": "machine and position", "site": "site", "model": "model",
    "kind": "reading closest to its limit", "trend": "trend", "next": "next reading (soonest first)",
    "cost": "expected cost of the planned month (dearest first)",
}


def cost_sort_key(costs: dict[str, float] | None) -> Callable[[PumpForecast], tuple]:
    """Dearest planned month first; pumps the plan does not cost last, most urgent first."""
    costs = costs or {}

    def key(pf: PumpForecast) -> tuple:
        value = costs.get(pf.serial)
        return (value is None, -(value or 0.0), urgency_key(pf))

    return key


def next_sort_key(tests, today: date | None) -> Callable[[PumpForecast], tuple]:
    """Soonest next reading first ('now!', then by date); pumps without one last."""
    def key(pf: PumpForecast) -> tuple:
        t = tests.get(pf.serial) if tests else None
        when = t.test_on if t is not None else None
        return (when is None and not (t and t.asap), not (t and t.asap), when or date.max, urgency_key(pf))

    return key


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
    sort_key: str = "status", reverse: bool = False, due: bool = False, tests=None, today: date | None = None,
    costs: dict[str, float] | None = None,
) -> list[PumpForecast]:
    """The pumps passing the filters (None = any; ``due``: only pumps whose next reading
    in ``tests`` is due by ``today``), in the order of one column."""
    chosen = [
        p for p in pumps
        if (site is None or (p.site or "-") == site)
        and (model is None or p.model == model)
        and (status is None or p.status == status)
        and (not due or (today is not None and is_reading_due(tests, p.serial, today)))
    ]
    key = next_sort_key(tests, today) if sort_key == "next" else cost_sort_key(costs) if sort_key == "cost" \
        else SORT_KEYS[sort_key]
    chosen.sort(key=key, reverse=reverse)
    return chosen


def outcome_line(kf: KindForecast, prefs) -> str:
    """One line for a kind: latest against its limit, and what the engine projects."""
    latest = fmt.value(kf.kind, kf.latest_value, prefs)
    versus = fmt.against_limit(kf.kind, kf.latest_value, kf.limit, prefs) or "no limit"
    words = outcome_words(kf)
    if kf.outcome is Outcome.NO_CROSSING and kf.p10_date is not None:
        words = f"P10 {fmt.day(kf.p10_date)} · {words}"
    if kf.outcome is Outcome.CROSSING:
        words = f"P10 {fmt.day(kf.p10_date)} · P50 {fmt.day(kf.p50_date)} · P90 {fmt.day(kf.p90_date)}"
    return f"{kf.kind.label}: {latest}, {versus}; {words}"
