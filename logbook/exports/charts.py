"""Charts of the HTML plan as inline SVG: one trend chart per planned pump and the shop load per month.

Written directly as SVG text (no plotting library, no figure per pump): the chart
writer ``chart_svg`` draws what it is given, precomputed arrays in a ``ChartData``
(days on a calendar axis, the P10/P50/P90 value bands along them, the readings, the
limit and the crossing dates), and ``charts_data`` is the one place that says what a
pump's forecast puts on its chart. ``shop_load_svg`` draws the plan's shop jobs per
month against the shop's capacity. The output is deterministic (the same data give the
same bytes); ids carry a prefix so several charts share one HTML page; text stays text.

Labels never overlap: the width of a label is estimated from its length (``text_width``,
a bound on the glyphs of the sans-serif faces a browser prints with), month ticks are
spaced so that their labels fit, the P10/P50/P90 labels are stacked when their dates lie
close, and the legend sits in its own row under the plot, clear of the limit line.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field
from datetime import date
from html import escape

import numpy as np

from logbook.analysis.results import KindForecast
from logbook.units import from_canonical

WIDTH, HEIGHT = 600, 236  # px (6.25 x 2.5 in at 96 px an inch: fits A4 and Letter between 10 mm margins)
TICK_FONT, LABEL_FONT, TITLE_FONT, LEGEND_FONT = 9, 9, 10, 8
BAND_COLOUR, PATH_COLOUR, READING_COLOUR, ASIDE_COLOUR, LIMIT_COLOUR, NOW_COLOUR = (
    "#9ecae1", "#08519c", "#252525", "#cb181d", "#cb181d", "#737373")
BAR_COLOUR, OVER_COLOUR = "#6baed6", "#cb181d"
#: Width of one character as a share of the font size: a bound on the digits, capitals and
#: lower-case letters of DejaVu Sans and Liberation Sans (the widest, "m" and "W", excepted),
#: measured from their advance widths (common practice, no published source).
CHAR_EM = 0.64
GAP = 4.0  # px kept free between two labels


def text_width(text: str, size: float) -> float:
    """Estimated width in px of ``text`` at font size ``size`` (``CHAR_EM`` per character)."""
    return len(text) * size * CHAR_EM


@dataclass(frozen=True)
class ChartData:
    """What one trend chart shows, as arrays; x values are day ordinals (``date.toordinal``)."""

    x: np.ndarray  # days along which the bands are drawn
    p10: np.ndarray  # value bands along ``x``: the lower edge ...
    p50: np.ndarray  # ... the middle line ...
    p90: np.ndarray  # ... and the upper edge
    readings_x: np.ndarray  # the day of each reading
    readings_y: np.ndarray
    used: np.ndarray  # bool per reading; False: set aside
    limit: float | None
    now: float  # today
    crossings: tuple[tuple[str, float], ...]  # ("P10", day), ... the dates the forecast gives for the limit
    y_label: str
    middle_label: str = "trend"
    band_label: str = "80 % band"
    notes: tuple[str, ...] = field(default_factory=tuple)  # said under the chart (figcaption)


def chart_data(kf: KindForecast, today: date, per_day: float | None = None, unit: str | None = None) -> ChartData | None:
    """What a pump's forecast of one kind puts on its chart; None when there is no fit or no date to draw."""
    return charts_data([kf], today, [per_day], units=[unit])[0]


def _rate(per_day: float | None) -> float | None:
    return per_day if per_day is not None and math.isfinite(per_day) and per_day > 0 else None


def ahead_rate(kf: KindForecast, today: date, per_day: float | None) -> float | None:
    """Hours a day the chart runs at after today: the forecast's own, from its P50 hours and P50
    date (the median then meets the limit on the P50 date of the tables, whatever season or
    parking the engine allowed for), else the machine's hours a day; None when neither is known."""
    if kf.p50_hours is not None and kf.p50_date is not None and math.isfinite(kf.p50_hours) and kf.p50_hours > 0:
        days = kf.p50_date.toordinal() - today.toordinal()
        if days > 0:
            return kf.p50_hours / days
    return _rate(per_day)


def _grid(kf: KindForecast, per_day: float | None) -> tuple[np.ndarray, float]:
    """(hours along the chart, hours today) of one forecast with a fit: from its first reading to past
    the last crossing it has a date for (to today when the machine's hours a day are not known)."""
    x = np.asarray(kf.fit.x_hours, float)
    now = kf.hours_in_segment if kf.hours_in_segment is not None else float(x.max())
    ahead = [h for h, d in ((kf.p10_hours, kf.p10_date), (kf.p50_hours, kf.p50_date), (kf.p90_hours, kf.p90_date))
             if h is not None and d is not None and math.isfinite(h)] if _rate(per_day) else []
    first, last = float(x.min()), max([float(x.max()), float(now)] + [now + h for h in ahead])
    span = (last - first) or 1.0
    return np.linspace(first, last + 0.05 * span, 80), float(now)


def hours_to_days(hours: np.ndarray, reading_hours: np.ndarray, reading_days: np.ndarray, now: float, today: int,
                  per_day: float | None) -> np.ndarray:
    """Day ordinals of pump hours on a segment: up to today between the readings' (hours, day)
    points and (now, today), made non-decreasing; after today at ``per_day`` hours a day, the
    rate of ``ahead_rate``; NaN after today without a rate."""
    hx = np.r_[np.asarray(reading_hours, float), now]
    dx = np.r_[np.asarray(reading_days, float), float(today)]
    order = np.lexsort((dx, hx))
    hx, dx = hx[order], np.maximum.accumulate(dx[order])
    h = np.asarray(hours, float)
    past = np.interp(h, hx, dx)
    rate = _rate(per_day)
    future = today + (h - now) / rate if rate else np.full(h.shape, np.nan)
    return np.where(h <= now, past, future)


def charts_data(kfs: Sequence[KindForecast | None], today: date, per_day: Sequence[float | None] | None = None,
                coverage: float = 0.8, units: Sequence[str | None] | None = None) -> list[ChartData | None]:
    """``chart_data`` of many forecasts at once: the bands of the series that share one path
    mixture (one fleet's forecast) are computed in one batch, the same values as one by one.
    ``per_day``: the hours a day of each pump's machine; ``units``: the unit each chart's values
    are shown in (None: the reading's own unit)."""
    given = list(per_day) if per_day is not None else [None] * len(kfs)
    shown = list(units) if units is not None else [None] * len(kfs)
    t = today.toordinal()
    drawn = [i for i, kf in enumerate(kfs) if kf is not None and kf.fit is not None and kf.fit.x_hours]
    rates = {i: ahead_rate(kfs[i], today, given[i]) for i in drawn}
    grids = {i: _grid(kfs[i], rates[i]) for i in drawn}
    bands: dict[int, tuple] = {}
    shared: dict[int, list[int]] = {}
    for i in drawn:
        fit = kfs[i].fit
        if fit.mixture is not None and fit.row >= 0:
            shared.setdefault(id(fit.mixture), []).append(i)
    q = (0.5 - coverage / 2, 0.5, 0.5 + coverage / 2)
    for members in shared.values():
        mixture = kfs[members[0]].fit.mixture
        xs = np.stack([grids[i][0] for i in members])
        rows = np.array([kfs[i].fit.row for i in members])
        with np.errstate(all="ignore"):
            got = mixture.value_bands(xs, rows, quantiles=q)
        for j, i in enumerate(members):
            bands[i] = (got[j, :, 0], got[j, :, 1], got[j, :, 2])
    out: list[ChartData | None] = [None] * len(kfs)
    for i in drawn:
        kf, fit = kfs[i], kfs[i].fit
        grid, now = grids[i]
        rx = np.asarray(fit.x_hours, float)
        known_days = getattr(fit, "x_days", ())
        rate = rates[i]
        if len(known_days) == len(rx):
            rd = np.asarray(known_days, float)
        elif rate:  # the readings' days back from today at the machine's hours a day
            rd = t - (now - rx) / rate
        else:
            continue
        if i not in bands:
            with np.errstate(all="ignore"):
                bands[i] = fit.band(grid, coverage)
        unit = shown[i] or kf.kind.unit
        scale = from_canonical(1.0, unit) if unit != kf.kind.unit else 1.0  # psi and gpm: factors, no offset
        lower, middle, upper = (np.asarray(b, float) * scale for b in bands[i])
        gx = hours_to_days(grid, rx, rd, now, t, rate)
        keep = np.isfinite(gx)
        crossings = tuple((name, float(d.toordinal())) for name, d in
                          (("P10", kf.p10_date), ("P50", kf.p50_date), ("P90", kf.p90_date)) if d is not None)
        notes = ("The band is the spread of the pump's condition; the P10 and P90 dates also allow for how the "
                 "machine's hours a day vary.",) if crossings and kf.limit is not None else ()
        out[i] = ChartData(
            x=gx[keep], p10=lower[keep], p50=middle[keep], p90=upper[keep], readings_x=rd,
            readings_y=np.asarray(fit.y_value, float) * scale, used=np.asarray(fit.used, bool),
            limit=kf.limit.value * scale if kf.limit is not None else None, now=float(t),
            crossings=crossings if kf.limit is not None else (), y_label=f"{kf.kind.label} [{unit}]",
            middle_label="median of the wear paths" if fit.mixture is not None else f"{fit.path} path", notes=notes)
    return out


def nice_ticks(lo: float, hi: float, most: int) -> list[float]:
    """Round tick values inside [lo, hi]: steps of 1, 2, 2.5 or 5 times a power of ten.

    The "nice number" rule of P. S. Heckbert, "Nice numbers for graph labels",
    Graphics Gems (1990), with the 2.5 step added, the ticks kept inside the range, at
    most ``most + 1`` of them, and a smaller step while fewer than two fall inside.
    """
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        return [lo] if math.isfinite(lo) else []
    raw = (hi - lo) / max(most, 1)
    power = 10.0 ** math.floor(math.log10(raw))
    steps = [m * power for m in (0.5, 1, 2, 2.5, 5, 10)]
    at = next(i for i, s in enumerate(steps) if s >= raw * (1 - 1e-9))
    for step in steps[at::-1]:  # the first step that fits, smaller while fewer than two ticks fall inside
        first, last = math.ceil(lo / step - 1e-9), math.floor(hi / step + 1e-9)
        if last - first >= 1:
            break
    ticks = [round(k * step, 12) + 0.0 for k in range(first, last + 1)]
    return ticks


#: Month steps of a calendar axis: ticks on the first day of every 1st, 2nd, 3rd (quarters),
#: 6th month, or of every 1, 2, 5, 10, 20, 50 years.
MONTH_STEPS = (1, 2, 3, 6, 12, 24, 60, 120, 240, 600)
DAY_STEPS = (1, 2, 7, 14)


def calendar_ticks(lo: float, hi: float, most: int) -> list[tuple[float, str]]:
    """(day ordinal, label) ticks inside [lo, hi] (day ordinals), at most ``most`` of them: the first
    days of months at the smallest of ``MONTH_STEPS`` that gives one to ``most`` ticks (else the
    largest that gives one), labels ``YYYY-MM``, or ``YYYY`` from yearly steps on; spans holding
    fewer than two month starts get days (``YYYY-MM-DD``, every 1, 2, 7 or 14 days)."""
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi < lo or most < 1:
        return []
    first_day, last_day = date.fromordinal(max(1, math.ceil(lo))), date.fromordinal(max(1, math.floor(hi)))
    m0, m1 = first_day.year * 12 + first_day.month - 1, last_day.year * 12 + last_day.month - 1
    if first_day.day > 1:
        m0 += 1  # the first month start inside the range

    def every(step: int) -> range:
        return range(-(-m0 // step) * step, m1 + 1, step)

    fitting = [s for s in MONTH_STEPS if 1 <= len(every(s)) <= most]
    some = [s for s in MONTH_STEPS if len(every(s)) >= 1]
    step = fitting[0] if fitting else some[-1] if some else 1
    months = every(step)
    if len(every(1)) >= 2:
        return [(float(date(m // 12, m % 12 + 1, 1).toordinal()), f"{m // 12:04d}" if step >= 12
                 else f"{m // 12:04d}-{m % 12 + 1:02d}") for m in months]
    a, b = first_day.toordinal(), last_day.toordinal()
    for days in DAY_STEPS:
        picks = range(-(-a // days) * days, b + 1, days)
        if len(picks) <= most:
            break
    return [(float(d), date.fromordinal(d).isoformat()) for d in picks]


def _tick_text(value: float, ticks: list[float]) -> str:
    """A tick's value with as many decimals as the step needs (0.25 -> 2, 20 -> 0)."""
    step = abs(ticks[1] - ticks[0]) if len(ticks) > 1 else 1.0
    decimals = next(d for d in range(0, 12) if abs(step * 10**d - round(step * 10**d)) < 1e-6 * max(1.0, step * 10**d))
    return f"{value:.{decimals}f}"


def _f(v: float) -> str:
    return f"{v:.1f}"


def _y_range(d: ChartData) -> tuple[float, float]:
    core = [d.readings_y, d.p50] + ([np.array([d.limit])] if d.limit is not None else [])
    values = np.concatenate([np.asarray(c, float).ravel() for c in core])
    values = values[np.isfinite(values)]
    if values.size == 0:
        return 0.0, 1.0
    lo, hi = float(values.min()), float(values.max())
    span = (hi - lo) or abs(hi) or 1.0
    band = np.concatenate([d.p10, d.p90])
    band = band[np.isfinite(band)]
    if band.size:  # the band widens the range, but never squeezes the readings below a third of it
        lo, hi = min(lo, max(float(band.min()), lo - span)), max(hi, min(float(band.max()), hi + span))
    if hi <= lo:
        lo, hi = lo - 0.5 * span, hi + 0.5 * span
    pad = 0.05 * (hi - lo)
    return lo - pad, hi + pad


def _x_range(d: ChartData) -> tuple[float, float]:
    values = np.concatenate([np.asarray(d.x, float), np.asarray(d.readings_x, float), [d.now],
                             [day for _, day in d.crossings]])
    values = values[np.isfinite(values)]
    lo, hi = float(values.min()), float(values.max())
    if hi - lo < 1.0:
        lo, hi = lo - 1.0, hi + 1.0
    pad = 0.015 * (hi - lo)  # the first and last marks whole inside the frame
    return lo - pad, hi + pad


def _stack(labels: list[tuple[float, str]], size: float, rows: int) -> list[int]:
    """Row of each (x, text) label, left to right: the first row where it clears the labels already
    placed there by ``GAP`` px; labels that clear no row share the least crowded one."""
    ends = [-math.inf] * rows
    out = []
    for x, text in labels:
        w = text_width(text, size)
        row = next((r for r in range(rows) if x - GAP >= ends[r]), min(range(rows), key=lambda r: ends[r]))
        ends[row] = x + w
        out.append(row)
    return out


def chart_svg(d: ChartData, title: str, id_prefix: str = "c") -> str:
    """The chart as one ``<svg>`` element (text, no XML preamble)."""
    x_lo, x_hi = _x_range(d)
    y_lo, y_hi = _y_range(d)
    yt = nice_ticks(y_lo, y_hi, 4)
    y_texts = [_tick_text(v, yt) for v in yt]
    px0 = 6 + LABEL_FONT + 6 + max((text_width(t, TICK_FONT) for t in y_texts), default=10.0) + 6
    px1 = WIDTH - 22.0  # room for half a month label right of the last tick
    legend_rows = _legend_rows(d, px0, px1)
    py1 = 8 + TITLE_FONT + 8.0  # top of the plot
    py0 = HEIGHT - (BELOW_PLOT + ROW * len(legend_rows))  # bottom of the plot

    def sx(v):
        return px0 + (np.asarray(v, float) - x_lo) / (x_hi - x_lo) * (px1 - px0)

    def sy(v):
        return py0 - (np.asarray(v, float) - y_lo) / (y_hi - y_lo) * (py0 - py1)

    clip = f"{id_prefix}-plot"
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" width="{WIDTH}" height="{HEIGHT}" '
           f'viewBox="0 0 {WIDTH} {HEIGHT}" font-family="sans-serif" font-size="{TICK_FONT}" role="img">',
           f"<title>{escape(title)}</title>",
           f'<defs><clipPath id="{clip}"><rect x="{_f(px0)}" y="{_f(py1)}" width="{_f(px1 - px0)}" '
           f'height="{_f(py0 - py1)}"/></clipPath></defs>',
           f'<rect x="0" y="0" width="{WIDTH}" height="{HEIGHT}" fill="#ffffff"/>']
    xt = calendar_ticks(x_lo, x_hi, _most_ticks(x_lo, x_hi, px1 - px0))
    plot = [f'<g clip-path="url(#{clip})">']
    for v, _ in xt:  # light grid at the month ticks
        x = _f(float(sx(v)))
        plot.append(f'<line class="grid" x1="{x}" y1="{_f(py0)}" x2="{x}" y2="{_f(py1)}" stroke="#e5e5e5" stroke-width="0.6"/>')
    ok = np.isfinite(d.p10) & np.isfinite(d.p90)
    if ok.any():
        gx, lo_y, hi_y = sx(d.x[ok]), sy(d.p10[ok]), sy(d.p90[ok])
        pts = [f"{_f(a)},{_f(b)}" for a, b in zip(gx, hi_y)] + [f"{_f(a)},{_f(b)}" for a, b in zip(gx[::-1], lo_y[::-1])]
        plot.append(f'<polygon class="band" points="{" ".join(pts)}" fill="{BAND_COLOUR}" fill-opacity="0.5"/>')
    mid = np.isfinite(d.p50)
    if mid.any():
        pts = " ".join(f"{_f(a)},{_f(b)}" for a, b in zip(sx(d.x[mid]), sy(d.p50[mid])))
        plot.append(f'<polyline class="middle" points="{pts}" fill="none" stroke="{PATH_COLOUR}" stroke-width="1.4"/>')
    if d.limit is not None:
        ly = _f(float(sy(d.limit)))
        plot.append(f'<line class="limit" x1="{_f(px0)}" y1="{ly}" x2="{_f(px1)}" y2="{ly}" stroke="{LIMIT_COLOUR}" '
                    'stroke-dasharray="5 3" stroke-width="1.2"/>')
    nx = _f(float(sx(d.now)))
    plot.append(f'<line class="now" x1="{nx}" y1="{_f(py0)}" x2="{nx}" y2="{_f(py1)}" stroke="{NOW_COLOUR}" '
                'stroke-dasharray="1.5 2" stroke-width="1.2"/>')
    used = d.used.astype(bool)
    for a, b in zip(sx(d.readings_x[used]), sy(d.readings_y[used])):
        plot.append(f'<circle class="reading" cx="{_f(a)}" cy="{_f(b)}" r="2.2" fill="{READING_COLOUR}"/>')
    for a, b in zip(sx(d.readings_x[~used]), sy(d.readings_y[~used])):
        plot.append(f'<path class="aside" d="M{_f(a - 3)},{_f(b - 3)}l6,6m0,-6l-6,6" stroke="{ASIDE_COLOUR}" '
                    'stroke-width="1.2" fill="none"/>')
    plot.append("</g>")
    out += plot
    if d.limit is not None:
        out += _crossing_marks(d, sx, float(sy(d.limit)), px0, px1, py0, py1)
    # axes, ticks and labels
    out.append(f'<rect class="frame" x="{_f(px0)}" y="{_f(py1)}" width="{_f(px1 - px0)}" height="{_f(py0 - py1)}" '
               'fill="none" stroke="#000000" stroke-width="0.8"/>')
    for v, words in xt:
        x = float(sx(v))
        out.append(f'<line x1="{_f(x)}" y1="{_f(py0)}" x2="{_f(x)}" y2="{_f(py0 + 3)}" stroke="#000000" stroke-width="0.8"/>')
        out.append(f'<text class="xtick" x="{_f(x)}" y="{_f(py0 + 4 + TICK_FONT)}" text-anchor="middle" '
                   f'data-day="{int(v)}">{words}</text>')
    for v, words in zip(yt, y_texts):
        y = _f(float(sy(v)))
        out.append(f'<line x1="{_f(px0 - 3)}" y1="{y}" x2="{_f(px0)}" y2="{y}" stroke="#000000" stroke-width="0.8"/>')
        out.append(f'<text class="ytick" x="{_f(px0 - 5)}" y="{y}" dy="3" text-anchor="end">{words}</text>')
    cy = _f((py0 + py1) / 2)
    out.append(f'<text class="ylabel" x="{6 + LABEL_FONT - 1}" y="{cy}" text-anchor="middle" font-size="{LABEL_FONT}" '
               f'transform="rotate(-90 {6 + LABEL_FONT - 1} {cy})">{escape(d.y_label)}</text>')
    size = _fitting(title, TITLE_FONT, WIDTH - 4 - px0)
    out.append(f'<text class="title" x="{_f(px0)}" y="{_f(8 + TITLE_FONT)}" font-size="{size:g}" '
               f'font-weight="bold">{escape(title)}</text>')
    for r, row in enumerate(legend_rows):
        out += _legend_row(row, py0 + FIRST_LEGEND + r * ROW)
    out.append("</svg>")
    return "\n".join(out)


#: Below the plot: the month labels, then the legend's rows (``ROW`` px each, the first baseline
#: ``FIRST_LEGEND`` px under the plot, the last 6 px above the chart's bottom edge).
ROW = LEGEND_FONT + 6
FIRST_LEGEND = 4 + TICK_FONT + 8 + LEGEND_FONT
BELOW_PLOT = FIRST_LEGEND - ROW + 6


def _fitting(text: str, size: float, room: float) -> float:
    """The font size, at most ``size`` and at least 6, at which ``text`` fits ``room`` px."""
    return max(6.0, min(float(size), round(room / max(len(text) * CHAR_EM, 1e-9), 1)))


def _most_ticks(lo: float, hi: float, plot_width: float) -> int:
    """How many month labels fit the plot's width side by side (the widest label, ``YYYY-MM``)."""
    return max(2, int(plot_width // (text_width("2026-04", TICK_FONT) + 4 * GAP)))


def _crossing_marks(d: ChartData, sx, ly: float, px0: float, px1: float, py0: float, py1: float) -> list[str]:
    """A tick on the limit line at each crossing date and its name, the names stacked (above the
    line, below it, higher above) where dates lie too close for them side by side."""
    out = []
    inside = [(name, float(sx(day))) for name, day in d.crossings if px0 <= float(sx(day)) <= px1]
    size = LABEL_FONT
    placed = []
    for name, cx in inside:
        w = text_width(name, size)
        left = cx + 2 if cx + 2 + w <= px1 else cx - 2 - w  # at the right edge: left of the tick
        placed.append((left, name, cx))
    placed.sort(key=lambda p: p[0])
    baselines = [b for b in (ly - 4, ly + 4 + size, ly - 6 - size, ly + 6 + 2 * size) if py1 + size <= b <= py0 - 2]
    baselines = baselines[:3] or [min(max(ly - 4, py1 + size), py0 - 2)]
    rows = _stack([(left, name) for left, name, _ in placed], size, len(baselines))
    for (left, name, cx), row in zip(placed, rows):
        y = baselines[row]
        out.append(f'<line class="crossing" x1="{_f(cx)}" y1="{_f(ly - 5)}" x2="{_f(cx)}" y2="{_f(ly + 5)}" '
                   f'stroke="{LIMIT_COLOUR}" stroke-width="1.2"/>')
        out.append(f'<text class="crossing" x="{_f(left)}" y="{_f(y)}" font-size="{size}" fill="#000000" '
                   f'stroke="#ffffff" stroke-width="2.5" paint-order="stroke">{name}</text>')
    return out


def _legend_entries(d: ChartData) -> list[tuple[str, str]]:
    entries = [("band", d.band_label), ("middle", d.middle_label), ("reading", "readings")]
    if (~d.used.astype(bool)).any():
        entries.append(("aside", "set aside"))
    if d.limit is not None:
        entries.append(("limit", "limit"))
    entries.append(("now", "today"))
    return entries


def _legend_rows(d: ChartData, left: float, right: float) -> list[list[tuple[float, str, str]]]:
    """The legend's entries as rows of (x, what, words) that fit between ``left`` and ``right``."""
    rows: list[list[tuple[float, str, str]]] = [[]]
    x = left
    for what, words in _legend_entries(d):
        w = 14 + text_width(words, LEGEND_FONT)
        if rows[-1] and x + w > right:
            rows.append([])
            x = left
        rows[-1].append((x, what, words))
        x += w + 3 * GAP
    return rows


def _legend_row(row: list[tuple[float, str, str]], y: float) -> list[str]:
    out = []
    for x, what, words in row:
        m = y - LEGEND_FONT / 3
        if what == "band":
            out.append(f'<rect x="{_f(x)}" y="{_f(m - 3)}" width="10" height="6" fill="{BAND_COLOUR}" fill-opacity="0.5"/>')
        elif what == "middle":
            out.append(f'<line x1="{_f(x)}" y1="{_f(m)}" x2="{_f(x + 10)}" y2="{_f(m)}" stroke="{PATH_COLOUR}" stroke-width="1.4"/>')
        elif what == "reading":
            out.append(f'<circle cx="{_f(x + 5)}" cy="{_f(m)}" r="2.2" fill="{READING_COLOUR}"/>')
        elif what == "aside":
            out.append(f'<path d="M{_f(x + 2)},{_f(m - 3)}l6,6m0,-6l-6,6" stroke="{ASIDE_COLOUR}" fill="none"/>')
        elif what == "limit":
            out.append(f'<line x1="{_f(x)}" y1="{_f(m)}" x2="{_f(x + 10)}" y2="{_f(m)}" stroke="{LIMIT_COLOUR}" '
                       'stroke-dasharray="5 3" stroke-width="1.2"/>')
        else:
            out.append(f'<line x1="{_f(x + 5)}" y1="{_f(m - 4)}" x2="{_f(x + 5)}" y2="{_f(m + 4)}" stroke="{NOW_COLOUR}" '
                       'stroke-dasharray="1.5 2" stroke-width="1.2"/>')
        out.append(f'<text class="legend" x="{_f(x + 14)}" y="{_f(y)}" font-size="{LEGEND_FONT}">{escape(words)}</text>')
    return out


# ---------------------------------------------------------------------------- shop load per month
LOAD_HEIGHT = 200


def shop_load_svg(months: Sequence[str], jobs: Sequence[int], capacity: int | None, id_prefix: str = "load") -> str:
    """Shop jobs planned per month as bars, the count on each bar, against the shop's capacity (a
    dashed line; none when the shop has no limit). Month labels are thinned to every 2nd, 3rd, ...
    month when they would not fit side by side."""
    n = len(months)
    top_value = max([*jobs, capacity or 0, 1])
    yt = [v for v in nice_ticks(0.0, top_value * 1.15, 4) if float(v).is_integer()] or [0.0, float(top_value)]
    y_texts = [f"{v:.0f}" for v in yt]
    px0 = 6 + LABEL_FONT + 6 + max(text_width(t, TICK_FONT) for t in y_texts) + 6
    px1 = WIDTH - 22.0
    py1, py0 = 8 + TITLE_FONT + 8.0, LOAD_HEIGHT - (BELOW_PLOT + ROW)
    y_hi = max(yt[-1], top_value * 1.15)
    slot = (px1 - px0) / max(n, 1)

    def sy(v: float) -> float:
        return py0 - v / y_hi * (py0 - py1)

    out = [f'<svg xmlns="http://www.w3.org/2000/svg" width="{WIDTH}" height="{LOAD_HEIGHT}" '
           f'viewBox="0 0 {WIDTH} {LOAD_HEIGHT}" font-family="sans-serif" font-size="{TICK_FONT}" role="img">',
           "<title>Shop jobs planned per month against capacity</title>",
           f'<rect x="0" y="0" width="{WIDTH}" height="{LOAD_HEIGHT}" fill="#ffffff"/>']
    for v in yt:
        out.append(f'<line class="grid" x1="{_f(px0)}" y1="{_f(sy(v))}" x2="{_f(px1)}" y2="{_f(sy(v))}" '
                   'stroke="#e5e5e5" stroke-width="0.6"/>')
    count_size = TICK_FONT if slot >= text_width("888", TICK_FONT) + GAP else 7
    for i, (month, count) in enumerate(zip(months, jobs)):
        over = capacity is not None and count > capacity
        x, w = px0 + i * slot + 0.15 * slot, 0.7 * slot
        out.append(f'<rect class="bar" x="{_f(x)}" y="{_f(sy(count))}" width="{_f(w)}" height="{_f(py0 - sy(count))}" '
                   f'fill="{OVER_COLOUR if over else BAR_COLOUR}" data-month="{escape(month)}" data-jobs="{count}"/>')
        if slot >= text_width(str(count), count_size) + 2:
            out.append(f'<text class="count" x="{_f(x + w / 2)}" y="{_f(sy(count) - 2)}" text-anchor="middle" '
                       f'font-size="{count_size}">{count}</text>')
    if capacity is not None:
        cy = _f(sy(capacity))
        out.append(f'<line class="capacity" x1="{_f(px0)}" y1="{cy}" x2="{_f(px1)}" y2="{cy}" stroke="{LIMIT_COLOUR}" '
                   'stroke-dasharray="5 3" stroke-width="1.2"/>')
    out.append(f'<rect x="{_f(px0)}" y="{_f(py1)}" width="{_f(px1 - px0)}" height="{_f(py0 - py1)}" fill="none" '
               'stroke="#000000" stroke-width="0.8"/>')
    every = 1
    while every < n and slot * every < text_width("2026-04", TICK_FONT) + GAP:
        every += 1
    for i, month in enumerate(months):
        if i % every:
            continue
        x = _f(px0 + (i + 0.5) * slot)
        out.append(f'<text class="xtick" x="{x}" y="{_f(py0 + 4 + TICK_FONT)}" text-anchor="middle">{escape(month)}</text>')
    for v, words in zip(yt, y_texts):
        y = _f(sy(v))
        out.append(f'<text class="ytick" x="{_f(px0 - 5)}" y="{y}" dy="3" text-anchor="end">{words}</text>')
    cy = _f((py0 + py1) / 2)
    out.append(f'<text class="ylabel" x="{6 + LABEL_FONT - 1}" y="{cy}" text-anchor="middle" font-size="{LABEL_FONT}" '
               f'transform="rotate(-90 {6 + LABEL_FONT - 1} {cy})">shop jobs</text>')
    out.append(f'<text class="title" x="{_f(px0)}" y="{_f(8 + TITLE_FONT)}" font-size="{TITLE_FONT}" font-weight="bold">'
               "Shop jobs planned per month</text>")
    y = py0 + FIRST_LEGEND
    m = y - LEGEND_FONT / 3
    out.append(f'<rect x="{_f(px0)}" y="{_f(m - 3)}" width="10" height="6" fill="{BAR_COLOUR}"/>')
    out.append(f'<text class="legend" x="{_f(px0 + 14)}" y="{_f(y)}" font-size="{LEGEND_FONT}">shop jobs planned</text>')
    x = px0 + 14 + text_width("shop jobs planned", LEGEND_FONT) + 3 * GAP
    words = f"capacity {capacity} a month" if capacity is not None else "no capacity limit set"
    if capacity is not None:
        out.append(f'<line x1="{_f(x)}" y1="{_f(m)}" x2="{_f(x + 10)}" y2="{_f(m)}" stroke="{LIMIT_COLOUR}" '
                   'stroke-dasharray="5 3" stroke-width="1.2"/>')
    out.append(f'<text class="legend" x="{_f(x + 14)}" y="{_f(y)}" font-size="{LEGEND_FONT}">{escape(words)}</text>')
    out.append("</svg>")
    return "\n".join(out)
