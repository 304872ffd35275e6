"""The backtest's figures as md, html (inline SVG, nothing fetched), json or csv (pure: bytes from a result).

Every format shows the same figures of ``analysis.backtest.BacktestResult``; the JSON is
described in docs/backtest.md.
"""

from __future__ import annotations

import csv
import io
import json
from datetime import date

from logbook.analysis.backtest import GROUPINGS, NOMINAL, PIT_BINS, TAIL, BacktestResult, Figures

GROUP_TITLES = {"model": "by pump model", "path": "by heaviest wear path at the origin",
                "readings": "by readings in the series at the origin", "horizon": "by how far ahead"}
COLUMNS = (  # (key, header) of the summary tables
    ("readings", "later readings"), ("below_p10", "below P10 (0.10)"), ("above_p90", "above P90 (0.10)"),
    ("p50_error", "median P50 error"), ("series", "series"), ("crossings", "crossed"),
    ("before_p10", "before P10"), ("inside", "P10-P90"), ("after_p90", "after P90"), ("open", "open"),
    ("km_before_p10", "KM before P10"), ("km_after_p90", "KM after P90"),
)
SHORT = {  # headers of the terminal tables (80 columns); the notes under them say what each is
    "readings": "readings", "below_p10": "<P10", "above_p90": ">P90", "p50_error": "P50 err", "series": "series",
    "crossings": "crossed", "before_p10": "early", "inside": "in", "after_p90": "late", "open": "open",
    "km_before_p10": "KM<P10", "km_after_p90": "KM>P90",
}
EXPLAIN = (
    "(at the terminal: <P10, >P90, P50 err, early = before P10, in = P10-P90, late = after P90, KM<P10, KM>P90)",
    f"below P10 / above P90: share of later readings below the forecast's {TAIL:.0%} quantile of a new reading "
    f"at that hour / above its {1 - TAIL:.0%} quantile; a calibrated forecast gives 0.10 each.",
    "median P50 error: median of |reading / predicted median - 1| over the later readings.",
    "crossed: series with a later reading past the limit; before P10, P10-P90, after P90: where that came in "
    "the forecast's crossing distribution (after P90 also counts series followed past P90 without a crossing); "
    "open: not crossed yet and not followed to P90 (right-censored).",
    "KM before P10 / KM after P90: Kaplan-Meier estimates with the censored series (nominal 0.10 each); "
    "blank where fewer than 10 series were still followed there.",
)


def cell(key: str, value) -> str:
    """A figure as the tables write it: shares and errors with two decimals, counts with separators, blank for none."""
    if value is None:
        return "-"
    if isinstance(value, float):
        return f"{value:.2f}"
    return f"{value:,}"


def rows_of(result: BacktestResult, grouping: str, keys=tuple(k for k, _ in COLUMNS)) -> list[list[str]]:
    return [[label, *(cell(k, getattr(f, k)) for k in keys)] for label, f in result.groups[grouping].items()]


def headline(result: BacktestResult) -> str:
    o = result.origins
    span = f"{o[0].isoformat()} to {o[-1].isoformat()}, {len(o)} origins" if o else "no origins"
    what = "calibrated bands" if result.calibration else "raw bands (--no-calibration)"
    only = "".join(f", {name} {value}" for name, value in (("site", result.site), ("model", result.model)) if value)
    return f"Backtest {span}{only}: {what}"


# ------------------------------------------------------------------------- json and csv


def figures_json(f: Figures) -> dict:
    return {
        "later_readings": f.readings, "below_p10": f.below_p10, "above_p90": f.above_p90, "p50_error": f.p50_error,
        "pit_histogram": list(f.pit), "observed_at_nominal": list(f.observed), "series": f.series,
        "crossings": f.crossings, "before_p10": f.before_p10, "inside_p10_p90": f.inside, "after_p90": f.after_p90,
        "open": f.open, "km_before_p10": f.km_before_p10, "km_after_p90": f.km_after_p90,
        "p50_error_hours": f.p50_error_hours,
    }


def _day(d: date | None) -> str | None:
    return None if d is None else d.isoformat()


def to_json(result: BacktestResult) -> bytes:
    data = {
        "kind": "logbook backtest",
        "origins": [d.isoformat() for d in result.origins],
        "calibration": result.calibration, "site": result.site, "model": result.model,
        "nominal": {"tail": TAIL, "quantiles": list(NOMINAL), "pit_bins": PIT_BINS},
        "overall": figures_json(result.overall),
        **{f"by_{g}": {label: figures_json(f) for label, f in result.groups[g].items()} for g in GROUPINGS},
        "pumps": {serial: figures_json(f) for serial, f in sorted(result.pumps.items())},
        "plan_misses": [{"origin": _day(o), "serial": s, "model": m, "planned_month": _day(p), "crossed_on": _day(c)}
                        for o, s, m, p, c in result.misses],
        "early_overhauls": [{"origin": _day(o), "serial": s, "model": m, "overhauled_on": _day(h), "p10_date": _day(p)}
                            for o, s, m, h, p in result.early],
    }
    return (json.dumps(data, indent=2, ensure_ascii=False) + "\n").encode()


def to_csv(result: BacktestResult) -> bytes:
    out = io.StringIO()
    w = csv.writer(out, lineterminator="\r\n")
    keys = [k for k, _ in COLUMNS] + ["p50_error_hours"]
    w.writerow(["grouping", "group", *keys, *(f"pit_{i + 1}" for i in range(PIT_BINS))])
    groups = [("overall", "all", result.overall)]
    groups += [(g, label, f) for g in GROUPINGS for label, f in result.groups[g].items()]
    groups += [("pump", serial, f) for serial, f in sorted(result.pumps.items())]
    for grouping, label, f in groups:
        values = ["" if getattr(f, k) is None else (f"{getattr(f, k):.4f}" if isinstance(getattr(f, k), float)
                                                     else str(getattr(f, k))) for k in keys]
        w.writerow([grouping, label, *values, *f.pit])
    return out.getvalue().encode()


# ------------------------------------------------------------------------- markdown


def to_md(result: BacktestResult) -> bytes:
    from logbook.exports.md import esc, table

    headers = ["group", *(h for _, h in COLUMNS)]
    lines = [f"# {esc(headline(result))}", ""]
    lines += table(headers, [["all", *(cell(k, getattr(result.overall, k)) for k, _ in COLUMNS)]])
    for g in GROUPINGS:
        lines += ["", f"## {GROUP_TITLES[g]}", ""] + table(headers, rows_of(result, g))
    lines += ["", "## PIT histogram (all later readings)", "", pit_line(result.overall), ""]
    lines += ["## Plan misses", ""] + (table(["origin", "serial", "model", "planned month", "crossed on"],
                                             [[o.isoformat(), s, m, p.strftime("%Y-%m") if p else "none", c.isoformat()]
                                              for o, s, m, p, c in result.misses]) if result.misses else ["none"])
    lines += ["", "## Overhauled with much life left", ""] + (
        table(["origin", "serial", "model", "overhauled on", "P10 date"],
              [[o.isoformat(), s, m, h.isoformat(), p.isoformat() if p else "beyond horizon"]
               for o, s, m, h, p in result.early]) if result.early else ["none"])
    lines += ["", *(f"- {esc(t)}" for t in EXPLAIN), ""]
    return "\n".join(lines).encode()


BARS = " ▁▂▃▄▅▆▇█"


def pit_line(f: Figures) -> str:
    """The PIT histogram as one line of bars (flat for a calibrated forecast)."""
    top = max(f.pit, default=0)
    if not top:
        return "no later readings"
    return "0 " + "".join(BARS[round(8 * v / top)] for v in f.pit) + " 1"


# ------------------------------------------------------------------------- html with inline SVG


def calibration_svg(curves: dict[str, Figures], size: int = 260) -> str:
    """Observed share of PIT values at or below each nominal quantile against the nominal (the diagonal
    is calibration), one line per group."""
    from logbook.exports.html import escape

    pad = 32
    span = size - 2 * pad

    def px(v: float) -> float:
        return pad + v * span

    def py(v: float) -> float:
        return size - pad - v * span

    colours = ("#1f5fa8", "#b5481f", "#2f7d32", "#7a3fa0", "#8a6d00", "#00727a", "#a0305a", "#555555")
    parts = [f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {size + 120} {size}" role="img" '
             f'aria-label="calibration plot">',
             f'<rect x="{pad}" y="{pad}" width="{span}" height="{span}" fill="none" stroke="#999"/>',
             f'<line x1="{px(0)}" y1="{py(0)}" x2="{px(1)}" y2="{py(1)}" stroke="#bbb" stroke-dasharray="4 3"/>']
    for v in (0.0, 0.5, 1.0):
        parts.append(f'<text x="{px(v)}" y="{size - pad + 14}" font-size="10" text-anchor="middle">{v:g}</text>')
        parts.append(f'<text x="{pad - 4}" y="{py(v) + 3}" font-size="10" text-anchor="end">{v:g}</text>')
    parts.append(f'<text x="{size / 2}" y="{size - 4}" font-size="10" text-anchor="middle">nominal quantile</text>')
    parts.append(f'<text x="10" y="{size / 2}" font-size="10" text-anchor="middle" '
                 f'transform="rotate(-90 10 {size / 2})">observed share</text>')
    for i, (label, f) in enumerate((k, v) for k, v in curves.items() if v.observed):
        colour = colours[i % len(colours)]
        points = " ".join(f"{px(q):.1f},{py(o):.1f}" for q, o in zip(NOMINAL, f.observed))
        parts.append(f'<polyline points="{points}" fill="none" stroke="{colour}" stroke-width="1.6"/>')
        parts.append(f'<text x="{size + 4}" y="{pad + 12 + 14 * i}" font-size="11" fill="{colour}">{escape(label)}</text>')
    parts.append("</svg>")
    return "".join(parts)


def pit_svg(f: Figures, width: int = 300, height: int = 120) -> str:
    """The PIT histogram as bars with the flat line of a calibrated forecast."""
    pad = 18
    top = max(max(f.pit, default=0), 1)
    even = sum(f.pit) / PIT_BINS
    scale = (height - 2 * pad) / max(top, even, 1)
    bar = (width - 2 * pad) / PIT_BINS
    parts = [f'<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {width} {height}" role="img" aria-label="PIT histogram">']
    for i, v in enumerate(f.pit):
        h = v * scale
        parts.append(f'<rect x="{pad + i * bar + 1:.1f}" y="{height - pad - h:.1f}" width="{bar - 2:.1f}" '
                     f'height="{h:.1f}" fill="#6f93c4"/>')
    y_even = height - pad - even * scale
    parts.append(f'<line x1="{pad}" y1="{y_even:.1f}" x2="{width - pad}" y2="{y_even:.1f}" stroke="#b5481f" '
                 f'stroke-dasharray="4 3"/>')
    parts.append(f'<text x="{pad}" y="{height - 4}" font-size="10">0</text>'
                 f'<text x="{width - pad}" y="{height - 4}" font-size="10" text-anchor="end">1</text></svg>')
    return "".join(parts)


def to_html(result: BacktestResult) -> bytes:
    from logbook.exports.html import _CSS, escape

    def html_table(headers, rows) -> str:
        head = "".join(f"<th>{escape(h)}</th>" for h in headers)
        body = "".join("<tr>" + "".join(f'<td{" class=num" if j else ""}>{escape(v)}</td>' for j, v in enumerate(r))
                       + "</tr>" for r in rows)
        return f"<table><thead><tr>{head}</tr></thead><tbody>{body}</tbody></table>"

    headers = ["group", *(h for _, h in COLUMNS)]
    out = ["<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
           f"<title>{escape(headline(result))}</title><style>{_CSS}</style></head><body>",
           f"<h1>{escape(headline(result))}</h1>",
           html_table(headers, [["all", *(cell(k, getattr(result.overall, k)) for k, _ in COLUMNS)]]),
           "<h2>Calibration</h2><figure>", calibration_svg({"all": result.overall, **result.groups["model"]}),
           "<figcaption>Observed share of later readings at or below each quantile of their forecast, against the "
           "quantile (on the dashed diagonal: calibrated; below it at the low end and above it at the high end: "
           "bands too narrow).</figcaption></figure>",
           "<figure>", pit_svg(result.overall), "<figcaption>PIT histogram of all later readings (dashed: the flat "
           "histogram of a calibrated forecast; U-shaped: bands too narrow; a hump: too wide).</figcaption></figure>"]
    for g in GROUPINGS:
        out += [f"<h2>{escape(GROUP_TITLES[g].capitalize())}</h2>", html_table(headers, rows_of(result, g))]
    out.append("<h2>Plan misses</h2>")
    out.append(html_table(["origin", "serial", "model", "planned month", "crossed on"],
                          [[o.isoformat(), s, m, p.strftime("%Y-%m") if p else "none", c.isoformat()]
                           for o, s, m, p, c in result.misses]) if result.misses else "<p>none</p>")
    out.append("<h2>Overhauled with much life left</h2>")
    out.append(html_table(["origin", "serial", "model", "overhauled on", "P10 date"],
                          [[o.isoformat(), s, m, h.isoformat(), p.isoformat() if p else "beyond horizon"]
                           for o, s, m, h, p in result.early]) if result.early else "<p>none</p>")
    out.append("<ul>" + "".join(f"<li>{escape(t)}</li>" for t in EXPLAIN) + "</ul></body></html>\n")
    return "\n".join(out).encode()


def render(result: BacktestResult, fmt: str) -> bytes:
    return {"md": to_md, "html": to_html, "json": to_json, "csv": to_csv}[fmt](result)


__all__ = ["COLUMNS", "SHORT", "calibration_svg", "headline", "pit_line", "pit_svg", "render", "rows_of", "to_csv",
           "to_html", "to_json", "to_md"]
