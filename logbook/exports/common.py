"""Rows and summary figures shared by the export formats (pure, deterministic)."""

from __future__ import annotations

import dataclasses
import math
import re
from collections import Counter
from datetime import date

from logbook.exports import in_units, unit_of
from logbook.exports.listings import status_json
from logbook.analysis.results import KindForecast, Outcome, PumpForecast, outcome_words
from logbook.plan import PlanLine, month_label
from logbook.units import UnitPrefs

METRIC = UnitPrefs()

_in, _unit = in_units, unit_of

#: Plan table columns: (key, header). One row per pump in the plan or not fitting.
PLAN_COLUMNS = (
    ("plan", "plan"),
    ("month", "month"),
    ("target_month", "latest month"),
    ("serial", "serial"),
    ("model", "model"),
    ("machine", "machine"),
    ("site", "site"),
    ("reading", "reading"),
    ("unit", "unit"),
    ("latest", "latest (normalized)"),
    ("limit", "limit"),
    ("direction", "direction"),
    ("p10_date", "P10 date"),
    ("p50_date", "P50 date"),
    ("p90_date", "P90 date"),
    ("p10_hours", "P10 operating hours left (h)"),
    ("p50_hours", "P50 operating hours left (h)"),
    ("p90_hours", "P90 operating hours left (h)"),
    ("chance_by_month_start", "chance crossed by month start (%)"),
    ("chance_by_month_end", "chance crossed by month end (%)"),
    ("months_early", "months early"),
    ("expected_cost", "expected cost"),
    ("cost_month_earlier", "expected cost one month earlier"),
    ("cost_month_later", "expected cost one month later"),
    ("also_due", "also due"),
    ("action", "action"),
    ("reason", "why"),
    ("note", "note"),
    ("status", "pump status"),
    ("flags", "flags"),
)

#: Short table for md/html (the full set is in csv and json).
PLAN_BRIEF = ("month", "serial", "model", "machine", "site", "reading", "unit", "latest", "limit", "p10_date", "p50_date",
              "p10_hours", "chance_by_month_end", "note")


def plan_brief_keys(plan) -> tuple[str, ...]:
    """Columns of the short plan table (md, html): the brief set, the costs when the plan has them, why."""
    money = ("expected_cost", "cost_month_earlier", "cost_month_later") if plan.costs is not None else ()
    return PLAN_BRIEF + money + ("reason",)


COST_NOTE = ("Cost-optimal age: overhaul at that age or at failure, whichever comes first, minimizes the cost per "
             "operating hour C(T) = [Cp R(T) + Cf F(T)] / integral of R from 0 to T (Barlow and Proschan, 1965), on "
             "the model's fleet-life Weibull; job costs without downtime.")


def num(value: float | None, digits: int = 2) -> str:
    if value is None or not math.isfinite(value):
        return ""
    return f"{value:.{digits}f}"


def day(value: date | None) -> str:
    return value.isoformat() if value is not None else ""


_BREAKABLE = re.compile(r"(?<![^\s>])([^\s<>]*[-/][^\s<>]*)(?![^\s<])")


def keep_whole(html_text: str) -> str:
    """Escaped HTML text with every word that holds a hyphen or slash (a serial, a date,
    an ISO 4406 code, a range) in ``<span class="k">``, which the print CSS keeps on one
    line: browsers otherwise break 2026-11-22 after a hyphen at a line end."""
    return _BREAKABLE.sub(r'<span class="k">\1</span>', html_text)


def flag_words(flags) -> str:
    """Flags in words for people: ``step_detected`` -> ``step detected``."""
    return ", ".join(sorted(flag.replace("_", " ") for flag in flags))


def status_words(status: str) -> str:
    """A pump's status without its symbol (``"✖ over limit"`` -> ``"over limit"``)."""
    return status_json(status)["words"]


def percent(chance: float | None, digits: int = 1) -> str:
    """A chance (0..1) as a percentage number, e.g. 0.255 -> '25.5' (the header says %)."""
    return "" if chance is None or not math.isfinite(chance) else f"{100.0 * chance:.{digits}f}"


def pumps_by_serial(report) -> dict[str, PumpForecast]:
    return {p.serial: p for p in report.forecast.pumps}


def kind_of(pump: PumpForecast | None, line: PlanLine) -> KindForecast | None:
    if pump is None:
        return None
    for kf in pump.kinds:
        if kf.kind is line.kind:
            return kf
    return None


def plan_lines(report) -> list[PlanLine]:
    """Planned lines (month order), then the ones that do not fit."""
    return list(report.plan.lines) + list(report.plan.unplaced)


def reason(line: PlanLine, units: UnitPrefs = METRIC) -> str:
    """``PlanLine.reason`` with the values in ``units`` (the same sentence in metric units)."""
    if units == METRIC:
        return line.reason
    unit, value, limit = _unit(line.kind, units), _in(line.latest_value, line.kind, units), _in(line.limit_value, line.kind, units)
    metric = dataclasses.replace(line, latest_value=None, limit_value=None).reason
    if value is None or limit is None:
        return metric
    where = f" at {value:.2f} {unit} against a limit of {limit:.2f} {unit}"
    return line.kind.label + where + metric[len(line.kind.label):]


def retest_reason(r, units: UnitPrefs = METRIC) -> str:
    """``Retest.reason`` with the set-aside value in ``units``."""
    if units == METRIC or r.reading is None:
        return r.reason
    return dataclasses.replace(r, reading=None).reason.replace(
        " reading is far", f" reading ({_in(r.reading, r.kind, units):.2f} {_unit(r.kind, units)} on "
        f"{r.taken_on.isoformat()}) is far", 1) if r.taken_on else r.reason


def plan_row(line: PlanLine, pump: PumpForecast | None, units: UnitPrefs = METRIC) -> dict[str, str]:
    """One plan line as the tables print it; values of the reading in ``units``."""
    kf = kind_of(pump, line)
    if line.month is None:
        plan = "does not fit"
    else:
        plan = "shop" if line.shop else "on machine"
    return {
        "plan": plan,
        "month": month_label(line.month) if line.month else "",
        "target_month": month_label(line.target_month),
        "serial": line.serial,
        "model": line.model,
        "machine": line.machine or "",
        "site": line.site or "",
        "reading": line.kind.label,
        "unit": _unit(line.kind, units),
        "latest": num(_in(line.latest_value, line.kind, units)),
        "limit": num(_in(line.limit_value, line.kind, units)),
        "direction": kf.limit.direction if kf is not None and kf.limit is not None else "",
        "p10_date": day(line.p10_date),
        "p50_date": day(line.p50_date),
        "p90_date": day(line.p90_date),
        "p10_hours": num(line.p10_hours, 0),
        "p50_hours": num(line.p50_hours, 0),
        "p90_hours": num(line.p90_hours, 0),
        "chance_by_month_start": percent(line.chance_by_month_start),
        "chance_by_month_end": percent(line.chance_by_month_end),
        "months_early": "" if line.months_early is None else str(line.months_early),
        "expected_cost": num(line.expected_cost, 0),
        "cost_month_earlier": num(line.cost_month_earlier, 0),
        "cost_month_later": num(line.cost_month_later, 0),
        "also_due": ", ".join(k.label for k in line.also_due),
        "action": line.action,
        "reason": reason(line, units),
        "note": line.note,
        "status": status_words(pump.status) if pump is not None else "",  # no symbol: plain text in any spreadsheet
        "flags": flag_words(kf.flags) if kf is not None else "",
    }


def plan_rows(report) -> list[dict[str, str]]:
    pumps = pumps_by_serial(report)
    return [plan_row(line, pumps.get(line.serial), report.units) for line in plan_lines(report)]


def summary(report) -> list[tuple[str, str]]:
    """Headline counts for the top of an export."""
    plan = report.plan
    s = plan.settings
    pumps = report.forecast.pumps
    worst = Counter(p.worst.outcome for p in pumps if p.worst is not None)
    shop = sum(1 for line in plan.lines if line.shop)
    cap = "no limit" if s.capacity_per_month is None else str(s.capacity_per_month)
    rows = [
        ("forecast date", report.forecast.today.isoformat()),
        ("plan", f"{month_label(s.start_month)} for {s.horizon_months} month(s), to {s.end_day.isoformat()}"),
        ("shop capacity per month", cap),
        ("pumps in service", str(len(pumps))),
        ("past a limit", str(worst.get(Outcome.PAST_LIMIT, 0))),
        ("planned in the shop", str(shop)),
        ("planned on the machine", str(len(plan.lines) - shop)),
        ("do not fit", str(len(plan.unplaced))),
        ("to test again first", str(len({r.serial for r in plan.retests}))),
    ]
    if s.site_capacity:
        rows.append(("site capacity per month", ", ".join(f"{k}={v}" for k, v in sorted(s.site_capacity.items()))))
    if s.exchange_on_hand:
        rows.append(("exchange pumps on hand", ", ".join(f"{k}={v}" for k, v in sorted(s.exchange_on_hand.items()))))
        rows.append(("exchange turnaround", f"{s.turnaround_months} month(s)"))
    for month in s.months:
        rows.append((f"shop jobs {month_label(month)}", str(plan.shop_load.get(month, 0))))
    return rows + cost_summary(plan)


SHOP_LOAD_HEADERS = ("month", "shop jobs planned", "capacity", "spare")


def shop_load_rows(report) -> list[tuple[str, str, str, str]]:
    """(month, shop jobs planned, capacity, spare) per month of the plan; capacity and spare
    are empty when the shop has no limit."""
    s = report.plan.settings
    cap = s.capacity_per_month
    out = []
    for month in s.months:
        jobs = report.plan.shop_load.get(month, 0)
        out.append((month_label(month), str(jobs), "" if cap is None else str(cap),
                    "" if cap is None else str(cap - jobs)))
    return out


POLICY_WORDS = {
    "run_to_failure": "run every due pump to failure",
    "at_p10": "each pump at its P10 month (greedy pass)",
    "cost_optimal": "least expected cost within capacity (this plan)",
}


def money(value: float | None, currency: str) -> str:
    return "" if value is None or not math.isfinite(value) else f"{value:,.0f} {currency}".strip()


def cost_summary(plan) -> list[tuple[str, str]]:
    """How the pumps were placed and, with costs, what the plan costs against the other policies."""
    rows = [("placed by", plan.placement + (f" ({plan.placement_note})" if plan.placement_note else ""))]
    if plan.costs is None:
        return rows
    for key, words in POLICY_WORDS.items():
        rows.append((f"expected cost: {words}", money(plan.costs.policies[key], plan.currency)))
    for month, spend in sorted(plan.spend_per_month().items()):
        rows.append((f"expected spend {month_label(month)}", money(spend, plan.currency)))
    return rows


def sensitivity_rows(plan) -> list[dict[str, str]]:
    """Pumps whose cost-optimal month moves when the failure-to-planned cost ratio is halved or doubled."""
    if plan.costs is None:
        return []
    label = {i: month_label(m) for i, m in enumerate(plan.settings.months)}
    return [{"serial": serial, "ratio": f"x{factor:g}", "month": label.get(base, "after the horizon") if base is not None
             else "after the horizon", "moves to": label.get(moved, "after the horizon") if moved is not None
             else "after the horizon"} for serial, factor, base, moved in plan.costs.sensitivity]


def economy_rows(report) -> list[dict[str, str]]:
    """Per model with costs: the costs used, its Weibull and the cost-optimal overhaul age."""
    cur = report.plan.currency
    out = []
    for eco in report.economies.values():
        opt = eco.optimum
        out.append({
            "model": eco.model,
            "planned cost": money(eco.planned, cur),
            "failure cost": money(eco.failure, cur),
            "shape": num(eco.shape, 3),
            "scale hours": num(eco.scale_hours, 0),
            "cost-optimal age hours": num(opt.age_hours, 0) if opt else "",
            "cost per hour at that age": num(opt.cost_per_hour, 3) if opt else "",
            "run to failure per hour": num(opt.run_to_failure_cost_per_hour, 3) if opt else "",
            "note": eco.note,
        })
    return out


def life_rows(report) -> list[dict[str, str]]:
    out = []
    for fig in report.life:
        conf = f"{fig.confidence:.0%}"
        b10 = f"{num(fig.b10_hours, 0)}" if fig.b10_hours is not None else ""
        b10_b = f"{num(fig.b10_bounds[0], 0)} - {num(fig.b10_bounds[1], 0)}" if fig.b10_bounds else ""
        med_b = f"{num(fig.median_bounds[0], 0)} - {num(fig.median_bounds[1], 0)}" if fig.median_bounds else ""
        expected = ""
        if fig.expected_overhauls is not None:
            expected = f"{fig.expected_overhauls:.1f} +/- {fig.expected_sd:.1f} of {fig.running}"
        out.append(
            {
                "model": fig.model,
                "service intervals": str(fig.intervals),
                "ended in overhaul": str(fig.failures),
                "still running": str(fig.censored),
                "Weibull shape": num(fig.fit.shape, 3) if fig.fit else "",
                "Weibull scale (h)": num(fig.fit.scale_hours, 0) if fig.fit else "",
                "B10 life (h)": b10,
                f"B10 {conf} bounds (h)": b10_b,
                "median life (h)": num(fig.median_hours, 0),
                f"median {conf} bounds (h)": med_b,
                "overhauls expected in the plan's months": expected,
                "note": fig.reason,
            }
        )
    return out


PUMP_HEADERS = ("serial", "model", "machine", "site", "status", "reading", "unit", "latest", "limit", "outcome",
                "P10 date", "P50 date", "flags")


def pump_rows(report) -> list[list[str]]:
    """One row per pump in service: its reading nearest the limit."""
    body = []
    u = report.units
    for pf in report.forecast.pumps:
        w = pf.worst
        body.append([
            pf.serial, pf.model, pf.machine or "", pf.site or "", pf.status,
            w.kind.label if w else "", _unit(w.kind, u) if w else "", num(_in(w.latest_value, w.kind, u)) if w else "",
            num(_in(w.limit.value, w.kind, u)) if w and w.limit else "", outcome_words(w) if w else "",
            day(w.p10_date) if w else "", day(w.p50_date) if w else "", flag_words(w.flags) if w else "",
        ])
    return body


RETEST_HEADERS = ("serial", "model", "site", "machine", "reading", "set-aside value", "taken on", "why")


def retest_rows(report) -> list[list[str]]:
    """One row per pump and reading kind to read again before the plan acts on it (``Plan.retests``)."""
    u = report.units
    return [[r.serial, r.model, r.site or "", r.machine or "", r.kind.label,
             f"{_in(r.reading, r.kind, u):.2f} {_unit(r.kind, u)}" if r.reading is not None else "",
             r.taken_on.isoformat() if r.taken_on else "", retest_reason(r, u)] for r in report.plan.retests]
