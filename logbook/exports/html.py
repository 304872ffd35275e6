"""HTML export: one self-contained page (inline CSS and SVG, no scripts, nothing fetched)."""

from __future__ import annotations

from html import escape as _escape_html

from logbook.exports import PROBABILITY_NOTE, safety, unit_of
from logbook.exports.charts import chart_svg, charts_data, shop_load_svg
from logbook.exports.common import (
    RETEST_HEADERS,
    SHOP_LOAD_HEADERS,
    retest_rows,
    shop_load_rows,
    COST_NOTE,
    PLAN_COLUMNS,
    PUMP_HEADERS,
    economy_rows,
    keep_whole,
    kind_of,
    life_rows,
    plan_brief_keys,
    plan_row,
    reason,
    pump_rows,
    pumps_by_serial,
    sensitivity_rows,
    summary,
)
from logbook.fmt import visible

_HEADERS = dict(PLAN_COLUMNS)


def escape(text: str) -> str:
    """Text as HTML shows it, as typed: ``<``, ``&`` and quotes escaped; control characters
    (not allowed in an HTML document) written as their escapes (``fmt.visible``)."""
    return _escape_html(visible(text))

_CSS = """
body { font: 14px/1.4 system-ui, sans-serif; margin: 1.5em auto; max-width: 1200px; color: #1a1a1a; padding: 0 1em; }
h1 { font-size: 1.5em; } h2 { font-size: 1.2em; margin-top: 1.6em; border-bottom: 1px solid #ccc; }
table { border-collapse: collapse; margin: .5em 0; font-size: 12px; }
th, td { border: 1px solid #d0d0d0; padding: 2px 6px; text-align: left; vertical-align: top; }
th { background: #f0f0f0; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
.provenance li { margin: 0; }
figure { margin: 1em 0; break-inside: avoid; } figcaption { font-size: 12px; color: #444; }
svg { max-width: 100%; height: auto; }
th, td { overflow-wrap: break-word; hyphens: manual; }
.k { white-space: nowrap; }
table.plan tr.why td { border-top: none; color: #333; padding-bottom: 4px; }
table.plan tr.why .label { font-weight: 600; }
table.plan tbody.line { break-inside: avoid; }
/* Printing (A4 or Letter, as the printer is set up): nothing wider than the page, a serial,
   date or number never broken (.k), rows whole, headings kept with what follows, table
   headers repeated on every page. */
@page { size: auto; margin: 12mm 10mm; }
@media print {
  body { max-width: none; margin: 0; padding: 0; font-size: 9pt; }
  table { font-size: 7pt; width: 100%; }
  th, td { padding: 1px 3px; }
  thead { display: table-header-group; }
  tr, figure, li { break-inside: avoid; }
  h1, h2, h3 { break-after: avoid; }
  h2 + table, h2 + p, h2 + figure { break-before: avoid; }
  figure svg { width: 100%; max-height: 80mm; }
  #shop-load table { width: auto; }
}
"""

_NUMERIC = {"latest", "limit", "p10_hours", "p50_hours", "p90_hours", "chance_by_month_start", "chance_by_month_end",
            "months_early"}


def _cell(text: str, numeric: bool) -> str:
    """One cell; a single word (a serial, a date, a number) is kept whole on one line."""
    classes = (["num"] if numeric else []) + (["k"] if text and len(text) <= 24 and not any(c.isspace() for c in text)
                                              else [])
    if classes:
        return f'<td class="{" ".join(classes)}">{escape(text)}</td>'
    return f"<td>{keep_whole(escape(text))}</td>"


def _table(headers: list[str], rows: list[list[str]], numeric: set[int] = frozenset()) -> list[str]:
    out = ["<table>", "<thead><tr>" + "".join(f"<th>{escape(h)}</th>" for h in headers) + "</tr></thead>", "<tbody>"]
    for row in rows:
        cells = "".join(_cell(c, i in numeric) for i, c in enumerate(row))
        out.append(f"<tr>{cells}</tr>")
    out += ["</tbody>", "</table>"]
    return out


def _plan_table(lines, pumps, keys, units) -> list[str]:
    """The plan's lines, each with its reason on a row of its own under it, across the table (the
    sentence gets the page's width instead of a column a word wide); a line and its reason are
    one ``tbody``, never split across pages."""
    rows = [plan_row(line, pumps.get(line.serial), units) for line in lines]
    shown = [k for k in keys if k != "reason"]
    numeric = {i for i, k in enumerate(shown) if k in _NUMERIC}
    out = ['<table class="plan">',
           "<thead><tr>" + "".join(f"<th>{escape(_HEADERS[k])}</th>" for k in shown) + "</tr></thead>"]
    for r in rows:
        cells = "".join(_cell(r[k], i in numeric) for i, k in enumerate(shown))
        out += ['<tbody class="line">', f"<tr>{cells}</tr>"]
        if "reason" in keys:
            out.append(f'<tr class="why"><td colspan="{len(shown)}"><span class="label">{escape(_HEADERS["reason"])}:'
                       f"</span> {keep_whole(escape(r['reason']))}</td></tr>")
        out.append("</tbody>")
    out.append("</table>")
    return out


def _charts(report, pumps) -> list[str]:
    out = []
    lines = report.plan.lines
    if len(lines) > report.max_charts:
        out.append(f"<p>Charts of the first {report.max_charts} of {len(lines)} planned pumps, in plan order.</p>")
    shown = lines[: report.max_charts]
    kinds = [kind_of(pumps.get(line.serial), line) for line in shown]
    rates = [pumps[line.serial].hours_per_day if line.serial in pumps else None for line in shown]
    units = [unit_of(line.kind, report.units) for line in shown]
    drawn = charts_data(kinds, report.forecast.today, rates, units=units)  # the bands in one batch
    for index, (line, data) in enumerate(zip(shown, drawn), start=1):
        title = visible(f"{line.serial} ({line.model}, {line.machine or 'no machine'}): {line.kind.label}")
        svg = chart_svg(data, title, id_prefix=f"c{index}") if data is not None else None
        month = line.month.isoformat()[:7] if line.month else ""
        out.append(f'<figure id="chart-{index}">')
        out.append(svg if svg is not None else f"<p>{escape(title)}: no fitted trend to draw.</p>")
        said = " ".join(data.notes) if data is not None else ""
        why = reason(line, report.units)
        why = why if not said or why.endswith(".") else why + "."
        out.append(f"<figcaption>{escape(month)} - {escape(why)}{' ' + escape(said) if said else ''}</figcaption>")
        out.append("</figure>")
    return out


def _shop_load(report) -> list[str]:
    """The shop jobs planned per month against capacity: a chart and the same figures as a table."""
    rows = shop_load_rows(report)
    s = report.plan.settings
    out = ['<section id="shop-load">', "<h2>Shop load per month</h2>"]
    if report.charts:
        out += ['<figure class="load">', shop_load_svg([r[0] for r in rows], [int(r[1]) for r in rows],
                                                       s.capacity_per_month), "</figure>"]
    out += _table(list(SHOP_LOAD_HEADERS), [list(r) for r in rows], {1, 2, 3})
    out.append("</section>")
    return out


def _money(report) -> list[str]:
    """Costs: per model the cost-optimal age; pumps whose best month moves with the cost ratio."""
    out = []
    rows = economy_rows(report)
    if rows:
        out += ['<section id="costs">', f"<h2>What jobs cost ({escape(report.plan.currency or 'no currency set')})</h2>"]
        out += _table(list(rows[0].keys()), [list(r.values()) for r in rows])
        out += [f"<p>{escape(COST_NOTE)}</p>", "</section>"]
    if report.plan.costs is not None:
        moved = sensitivity_rows(report.plan)
        out += ['<section id="sensitivity">', "<h2>If failures cost half or twice as much</h2>"]
        out += _table(list(moved[0].keys()), [list(r.values()) for r in moved]) if moved else [
            "<p>No pump's month moves when the failure-to-planned cost ratio is halved or doubled.</p>"]
        out.append("</section>")
    return out


def render_html(report) -> str:
    p = report.provenance
    pumps = pumps_by_serial(report)
    made = p.made_on.isoformat()
    out = [
        "<!DOCTYPE html>",
        '<html lang="en">',
        "<head>",
        '<meta charset="utf-8">',
        "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; style-src 'unsafe-inline'\">",
        f"<title>Overhaul forecast {escape(made)}</title>",
        f"<style>{_CSS}{safety.CSS}\n</style>",
        "</head>",
        "<body>",
        f"<h1>Overhaul forecast, made {escape(made)}</h1>",
        '<ul class="provenance">',
        f"<li>Database: <code>{escape(p.database)}</code></li>",
        f"<li>Made on: {escape(made)}</li>",
        f"<li>Program: {escape(p.program)}</li>",
    ]
    out += [f"<li>Limits used, {escape(model)}: {escape(words)}</li>" for model, words in p.limit_lines(report.units)]
    out += [f"<li>{escape(n)}</li>" for n in (PROBABILITY_NOTE, *report.forecast.notes, *report.notes)]
    out += ["</ul>", *safety.html_lines(p.safety), "<section>", "<h2>Summary</h2>"]
    out += _table(["figure", "value"], [list(r) for r in summary(report)])
    out += ["</section>", '<section id="plan">', "<h2>Plan</h2>"]
    if report.plan.lines:
        out += _plan_table(report.plan.lines, pumps, plan_brief_keys(report.plan), report.units)
    else:
        out.append("<p>Nothing is due in the plan's months.</p>")
    out += ["</section>", *_shop_load(report), '<section id="does-not-fit">', "<h2>Does not fit</h2>"]
    if report.plan.unplaced:
        keys = ("target_month", "serial", "model", "site", "reading", "p10_date", "note", "reason")
        out += _plan_table(report.plan.unplaced, pumps, keys, report.units)
    else:
        out.append("<p>Every pump that is due fits in the plan.</p>")
    if report.plan.retests:
        out += ["</section>", '<section id="test-again">', "<h2>Test again first</h2>",
                "<p>Each newest reading below lies far off its pump's trend and was set aside: read it again "
                "before acting on it.</p>"]
        out += _table(list(RETEST_HEADERS), retest_rows(report))
    out += ["</section>", *_money(report), '<section id="life">', "<h2>Fleet life per pump model</h2>"]
    rows = life_rows(report)
    if rows:
        out += _table(list(rows[0].keys()), [list(r.values()) for r in rows])
        out.append(f"<p>{escape(report.life[0].method)}.</p>")
    else:
        out.append("<p>No overhaul history to fit.</p>")
    out.append("</section>")
    if report.charts and report.plan.lines and report.max_charts > 0:
        out += ['<section id="charts">', "<h2>Trends of the planned pumps</h2>"]
        out += _charts(report, pumps)
        out.append("</section>")
    out += ['<section id="pumps">', "<h2>All pumps (reading nearest its limit)</h2>"]
    out += _table(list(PUMP_HEADERS), pump_rows(report), {7, 8})
    out += ["</section>", "</body>", "</html>"]
    return "\n".join(out) + "\n"
