"""CSV export: provenance rows, then one row per pump in the plan (UTF-8 with BOM).

Decisions: a UTF-8 byte-order mark so spreadsheet programs pick the right encoding;
ISO dates; a period as the decimal mark; CRLF line ends (RFC 4180). Provenance and
the safety list come first as rows whose first cell starts with "#" (skip them with
``comment="#"`` in most CSV readers).

Formula injection (OWASP "CSV Injection"): every cell goes through
``csvread.quote_formula``, the one guard all CSV writers share: a cell that starts
with = + - @, a tab or a carriage return gets a leading single quote so a
spreadsheet shows it as text. Plain numbers (e.g. "-3.20") are left alone.
"""

from __future__ import annotations

import csv
import io

from logbook.csvread import quote_formula
from logbook.exports import PROBABILITY_NOTE
from logbook.exports.common import PLAN_COLUMNS, plan_rows, retest_reason

BOM = "\ufeff"


def render_csv(report) -> bytes:
    p = report.provenance
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\r\n")
    meta = [
        ("# database", p.database),
        ("# made on", p.made_on.isoformat()),
        ("# program", p.program),
        ("# forecast date", report.forecast.today.isoformat()),
    ]
    u = report.units
    meta += [("# units", f"flow {u.flow}, pressure {u.pressure} (each row names its reading's unit)")]
    meta += [(f"# limits {model}", words) for model, words in p.limit_lines(report.units)]
    meta += [("# safety", line) for line in (p.safety.title, *p.safety.lines())]
    meta += [("# note", PROBABILITY_NOTE)]
    meta += [("# note", text) for text in report.notes]
    meta += [("# test again first", f"{r.serial}: {retest_reason(r, report.units)}") for r in report.plan.retests]
    for key, value in meta:
        writer.writerow([quote_formula(key), quote_formula(value)])
    writer.writerow([quote_formula(header) for _, header in PLAN_COLUMNS])
    for row in plan_rows(report):
        writer.writerow([quote_formula(row[key]) for key, _ in PLAN_COLUMNS])
    return (BOM + buffer.getvalue()).encode("utf-8")
