"""Trend chart: normalized readings against hours in the segment, with the fitted
path, its P10-P90 band, the limit and today, drawn with characters.

Every layer has its own glyph (legend below the plot), so the chart reads the same
in 16 colours, in a light or a dark theme, or with no colour at all.
"""

from __future__ import annotations

import math

from rich.text import Text
from textual.widget import Widget

from logbook import fmt, units
from logbook.analysis.results import OUTCOME_WORDS, KindForecast
from logbook.tui.widgets.canvas import Canvas

LEGEND = (
    ("●", "point", "reading", "reading"),
    ("×", "outlier", "set aside", "set aside"),
    ("⠒", "fit", "median of the wear paths", "median"),
    ("░", "band", "P10-P90 band", "P10-P90"),
    ("─", "limit", "limit", "limit"),
    ("┊", "today", "today", "today"),
    ("◆", "cross", "P50 crossing", "P50 cross"),
)
Y_LABEL_WIDTH = 9


def _nice(value: float) -> str:
    a = abs(value)
    if a >= 1000:
        return f"{value:,.0f}"
    if a >= 100:
        return f"{value:.0f}"
    if a >= 10:
        return f"{value:.1f}"
    return f"{value:.2f}"


def draw_trend(kf: KindForecast, width: int, height: int, unit: str) -> list[list[tuple[str, str]]]:
    """Rows of (character, layer) for the plot area plus axes; layer '' is plain text."""
    fit = kf.fit
    conv = (lambda v: units.from_canonical(v, unit)) if unit else (lambda v: v)
    plot_w = max(width - Y_LABEL_WIDTH - 1, 10)
    plot_h = max(height - 2, 3)  # x axis line and its labels below
    now = kf.hours_in_segment if kf.hours_in_segment is not None else max(fit.x_hours, default=0.0)
    x_max = max([now, *fit.x_hours, 1.0])
    cross50 = None
    if kf.p50_hours is not None and math.isfinite(kf.p50_hours):
        cross50 = now + kf.p50_hours
    far = now + kf.p90_hours if kf.p90_hours is not None and math.isfinite(kf.p90_hours) else cross50
    if far is not None:
        x_max = max(x_max, min(far, 3.0 * max(now, 1.0)))
    x_max *= 1.04
    probe = Canvas(plot_w, plot_h, (0.0, x_max), (0.0, 1.0))
    xs = probe.dot_xs()
    lo, mid, hi = (list(map(conv, arr)) for arr in fit.band(xs))
    ys = [conv(v) for v in fit.y_value]
    limit = conv(kf.limit.value) if kf.limit is not None else None
    finite = [v for v in [*ys, *lo, *hi, *([limit] if limit is not None else [])] if math.isfinite(v)]
    y_lo, y_hi = min(finite), max(finite)
    pad = 0.06 * (y_hi - y_lo or abs(y_hi) or 1.0)
    y_lo, y_hi = y_lo - pad, y_hi + pad
    if min(ys, default=0.0) >= 0 and y_lo < 0:
        y_lo = 0.0
    canvas = Canvas(plot_w, plot_h, (0.0, x_max), (y_lo, y_hi))
    canvas.fill_between(xs, lo, hi, "░", "band", 1)
    canvas.vline(now, "┊", "today", 2)
    limit_row = canvas.hline(limit, "─", "limit", 3) if limit is not None else None
    canvas.path(xs, mid, "fit", 4)
    if cross50 is not None and limit is not None:
        canvas.glyph(cross50, limit, "◆", "cross", 5)
    for x, y, used in zip(fit.x_hours, ys, fit.used):
        canvas.glyph(x, y, "●" if used else "×", "point" if used else "outlier", 6)
    rows = []
    labelled = {0: y_hi, plot_h - 1: y_lo, plot_h // 2: (y_hi + y_lo) / 2}
    for r, cells in enumerate(canvas.rows()):
        if limit_row is not None and r == limit_row:
            label = _nice(limit)
        elif r in labelled:
            label = _nice(labelled[r])
        else:
            label = ""
        head = [(ch, "limit" if limit_row == r else "axis") for ch in label.rjust(Y_LABEL_WIDTH - 1)[: Y_LABEL_WIDTH - 1]]
        rows.append(head + [("│", "axis")] + cells)
    rows.append([(" ", "")] * (Y_LABEL_WIDTH - 1) + [("└", "axis")] + [("─", "axis")] * plot_w)
    ticks = [" "] * plot_w
    for x in (0.0, x_max / 2, x_max * 0.96):
        text = f"{x:,.0f} h"
        col = canvas.col_of(x) or 0
        col = min(col, plot_w - len(text))
        if all(c == " " for c in ticks[max(col - 1, 0): col + len(text) + 1]):
            ticks[col: col + len(text)] = list(text)
    unit_label = (unit or "")[: Y_LABEL_WIDTH - 1].rjust(Y_LABEL_WIDTH - 1) + " "
    rows.append([(c, "axis") for c in unit_label] + [(c, "axis") for c in ticks])
    return rows


def legend_cells(width: int) -> list[tuple[str, str]]:
    """The legend line: long words when they fit, short ones otherwise."""
    long = sum(len(words) + 4 for _, _, words, _ in LEGEND) <= width
    out: list[tuple[str, str]] = []
    for glyph, layer, words, short in LEGEND:
        piece = [(glyph, layer)] + [(c, "") for c in f" {words if long else short}  "]
        if len(out) + len(piece) > width:
            break
        out += piece
    return out


class TrendChart(Widget):
    """Chart of one KindForecast (its FitDetail), in the user's units."""

    COMPONENT_CLASSES = {
        "trend-chart--point", "trend-chart--outlier", "trend-chart--fit", "trend-chart--band",
        "trend-chart--limit", "trend-chart--today", "trend-chart--cross", "trend-chart--axis",
    }
    DEFAULT_CSS = """
    TrendChart { height: 1fr; min-height: 7; }
    TrendChart > .trend-chart--point { color: $text; text-style: bold; }
    TrendChart > .trend-chart--outlier { color: $error; text-style: bold; }
    TrendChart > .trend-chart--fit { color: $primary; }
    TrendChart > .trend-chart--band { color: $secondary; }
    TrendChart > .trend-chart--limit { color: $error; }
    TrendChart > .trend-chart--today { color: $warning; }
    TrendChart > .trend-chart--cross { color: $warning; text-style: bold; }
    TrendChart > .trend-chart--axis { color: $text-muted; }
    """

    def __init__(self, prefs, **kwargs) -> None:
        super().__init__(**kwargs)
        self.prefs = prefs
        self.kf: KindForecast | None = None

    def show(self, kf: KindForecast | None) -> None:
        self.kf = kf
        self.refresh()

    def render(self) -> Text:
        kf, width, height = self.kf, self.size.width, self.size.height
        if kf is None:
            return Text("no reading kind chosen")
        if kf.fit is None:
            latest = fmt.value(kf.kind, kf.latest_value, self.prefs)
            return Text(f"{kf.kind.label}: no fitted trend ({OUTCOME_WORDS[kf.outcome]}); latest {latest}, "
                        f"{kf.n_readings} reading(s) since {fmt.day(kf.segment_start)}")
        unit = fmt.unit_for(kf.kind, self.prefs)
        rows = draw_trend(kf, width, max(height - 1, 5), unit)
        rows.append(legend_cells(width))
        styles = {layer: self.get_component_rich_style(f"trend-chart--{layer}") for _, layer, _, _ in LEGEND}
        styles["axis"] = self.get_component_rich_style("trend-chart--axis")
        text = Text(no_wrap=True, overflow="crop")
        for i, row in enumerate(rows):
            if i:
                text.append("\n")
            for ch, layer in row:
                text.append(ch, styles.get(layer) if layer else None)
        return text
