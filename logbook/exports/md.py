"""Markdown export: provenance, safety, summary, plan, what does not fit, fleet life, all pumps."""

from __future__ import annotations

import re

from logbook.exports import PROBABILITY_NOTE, safety
from logbook.exports.common import (
    RETEST_HEADERS,
    SHOP_LOAD_HEADERS,
    retest_rows,
    shop_load_rows,
    COST_NOTE,
    PLAN_COLUMNS,
    PUMP_HEADERS,
    economy_rows,
    life_rows,
    plan_brief_keys,
    plan_row,
    pump_rows,
    pumps_by_serial,
    sensitivity_rows,
    summary,
)
from logbook.fmt import visible

_SPECIAL = re.compile(r"([\\`*_\[\]<>|#])")
_HEADERS = dict(PLAN_COLUMNS)


def esc(text: str) -> str:
    """Text safe inside a Markdown table cell, as typed: markup characters (``|`` among
    them) escaped, line breaks and other control characters written as their escapes
    (``fmt.visible``: ``\\n``, ``\\x1b``), so that a cell stays one cell and one line."""
    return _SPECIAL.sub(r"\\\1", visible(text))


def table(headers: list[str], rows: list[list[str]]) -> list[str]:
    out = ["| " + " | ".join(esc(h) for h in headers) + " |", "|" + "---|" * len(headers)]
    out += ["| " + " | ".join(esc(c) for c in row) + " |" for row in rows]
    return out


def _money_lines(report) -> list[str]:
    """Costs: per model the cost-optimal age; pumps whose best month moves with the cost ratio."""
    out = []
    rows = economy_rows(report)
    if rows:
        out += ["", f"## What jobs cost ({esc(report.plan.currency or 'no currency set')})", ""]
        out += table(list(rows[0].keys()), [list(r.values()) for r in rows])
        out += ["", esc(COST_NOTE)]
    moved = sensitivity_rows(report.plan)
    if report.plan.costs is not None:
        out += ["", "## If failures cost half or twice as much", ""]
        if moved:
            out += table(list(moved[0].keys()), [list(r.values()) for r in moved])
        else:
            out.append("No pump's month moves when the failure-to-planned cost ratio is halved or doubled.")
    return out


def render_md(report) -> str:
    p = report.provenance
    pumps = pumps_by_serial(report)
    lines = [f"# Overhaul forecast, made {p.made_on.isoformat()}", ""]
    lines += [f"- Database: {esc(p.database)}", f"- Made on: {p.made_on.isoformat()}",
              f"- Program: {esc(p.program)}"]
    lines += [f"- Limits used, {esc(model)}: {esc(words)}" for model, words in p.limit_lines(report.units)]
    lines += [f"- {esc(note)}" for note in (PROBABILITY_NOTE, *report.forecast.notes, *report.notes)]
    lines += safety.md_lines(esc, p.safety)
    lines += ["", "## Summary", ""] + table(["figure", "value"], [list(row) for row in summary(report)])

    lines += ["", "## Plan", ""]
    if report.plan.lines:
        keys = plan_brief_keys(report.plan)
        lines += table([_HEADERS[k] for k in keys],
                       [[row[k] for k in keys] for row in
                        (plan_row(line, pumps.get(line.serial), report.units) for line in report.plan.lines)])
    else:
        lines.append("Nothing is due in the plan's months.")
    lines += ["", "## Shop load per month", ""]
    lines += table(list(SHOP_LOAD_HEADERS), [list(r) for r in shop_load_rows(report)])
    lines += ["", "## Does not fit", ""]
    if report.plan.unplaced:
        keys = ("target_month", "serial", "model", "site", "reading", "p10_date", "note", "reason")
        lines += table([_HEADERS[k] for k in keys],
                       [[row[k] for k in keys] for row in
                        (plan_row(line, pumps.get(line.serial), report.units) for line in report.plan.unplaced)])
    else:
        lines.append("Every pump that is due fits in the plan.")
    if report.plan.retests:
        lines += ["", "## Test again first", "",
                  "Each newest reading below lies far off its pump's trend and was set aside: read it again "
                  "before acting on it.", ""]
        lines += table(list(RETEST_HEADERS), retest_rows(report))

    lines += _money_lines(report)

    lines += ["", "## Fleet life per pump model", ""]
    rows = life_rows(report)
    if rows:
        lines += table(list(rows[0].keys()), [list(r.values()) for r in rows])
        lines += ["", esc(report.life[0].method)]
    else:
        lines.append("No overhaul history to fit.")

    lines += ["", "## All pumps (reading nearest its limit)", ""]
    lines += table(list(PUMP_HEADERS), pump_rows(report))
    return "\n".join(lines) + "\n"
