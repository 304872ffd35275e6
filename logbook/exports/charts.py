"""One chart per planned pump: readings, fitted path, band, limit and P10/P50/P90 (inline SVG).

Written directly as SVG text (no plotting library, no figure per pump): the chart
writer ``chart_svg`` draws what it is given, precomputed arrays in a ``ChartData``
(hours, the P10/P50/P90 value bands along them, the readings, the limit and the
crossings), and ``chart_data`` is the one place that says what a pump's forecast
puts on its chart. The output is deterministic (the same data give the same bytes);
ids carry a prefix so several charts share one HTML page; text stays text.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from html import escape

import numpy as np

from logbook.analysis.results import KindForecast

WIDTH, HEIGHT = 461, 187  # px (6.4 x 2.6 in at 72 dpi)
_AX = (0.09, 0.17, 0.89, 0.72)  # left, bottom, width, height as fractions of the chart
BAND_COLOUR, PATH_COLOUR, READING_COLOUR, ASIDE_COLOUR, LIMIT_COLOUR, NOW_COLOUR = (
    "#9ecae1", "#08519c", "#252525", "#cb181d", "#cb181d", "#737373")


@dataclass(frozen=True)
class ChartData:
    """What one chart shows, as arrays (hours since the segment started on x)."""

    x: np.ndarray  # hours along which the bands are drawn
    p10: np.ndarray  # value bands along ``x``: the lower edge ...
    p50: np.ndarray  # ... the middle line ...
    p90: np.ndarray  # ... and the upper edge
    readings_x: np.ndarray
    readings_y: np.ndarray
    used: np.ndarray  # bool per reading; False: set aside
    limit: float | None
    now: float  # hours today
    crossings: tuple[tuple[str, float], ...]  # ("P10", hours), ... at the limit
    y_label: str
    middle_label: str = "trend"
    band_label: str = "80 % band"


def chart_data(kf: KindForecast) -> ChartData | None:
    """What a pump's forecast of one kind puts on its chart; None when there is no fit to draw."""
    return charts_data([kf])[0]


def _grid(kf: KindForecast):
    """(hours along the chart, hours today, the named crossings) of one forecast with a fit."""
    x = np.asarray(kf.fit.x_hours, float)
    now = kf.hours_in_segment if kf.hours_in_segment is not None else float(x.max())
    named = [(n, now + h) for n, h in (("P10", kf.p10_hours), ("P50", kf.p50_hours), ("P90", kf.p90_hours))
             if h is not None]
    x_end = max([float(x.max()), now] + [h for _, h in named]) * 1.05 or 1.0
    return np.linspace(0.0, x_end, 80), float(now), named


def charts_data(kfs: Sequence[KindForecast | None], coverage: float = 0.8) -> list[ChartData | None]:
    """``chart_data`` of many forecasts at once: the bands of the series that share one path
    mixture (one fleet's forecast) are computed in one batch, the same values as one by one."""
    drawn = [i for i, kf in enumerate(kfs) if kf is not None and kf.fit is not None and kf.fit.x_hours]
    grids = {i: _grid(kfs[i]) for i in drawn}
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
        grid, now, named = grids[i]
        if i not in bands:
            with np.errstate(all="ignore"):
                bands[i] = fit.band(grid, coverage)
        lower, middle, upper = bands[i]
        out[i] = ChartData(
            x=grid, p10=np.asarray(lower, float), p50=np.asarray(middle, float), p90=np.asarray(upper, float),
            readings_x=np.asarray(fit.x_hours, float), readings_y=np.asarray(fit.y_value, float),
            used=np.asarray(fit.used, bool), limit=kf.limit.value if kf.limit is not None else None, now=now,
            crossings=tuple(named) if kf.limit is not None else (), y_label=f"{kf.kind.label} [{kf.kind.unit}]",
            middle_label="median of the wear paths" if fit.mixture is not None else f"{fit.path} path")
    return out


def kind_chart_svg(kf: KindForecast, title: str, salt: str = "", id_prefix: str = "c") -> str | None:
    """SVG text of one reading's trend, or None when there is no fit to draw (``salt`` is unused)."""
    data = chart_data(kf)
    return None if data is None else chart_svg(data, title, id_prefix)


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
    pad = 0.05 * (hi - lo)
    return lo - pad, hi + pad


def chart_svg(d: ChartData, title: str, id_prefix: str = "c") -> str:
    """The chart as one ``<svg>`` element (text, no XML preamble)."""
    left, bottom, width, height = _AX
    px0, px1 = left * WIDTH, (left + width) * WIDTH
    py0, py1 = (1 - bottom) * HEIGHT, (1 - bottom - height) * HEIGHT  # y of the axis bottom and top
    x_hi = float(max(np.nanmax(d.x) if d.x.size else 0.0, d.now, 1e-9))
    y_lo, y_hi = _y_range(d)

    def sx(v):
        return px0 + (np.asarray(v, float) - 0.0) / x_hi * (px1 - px0)

    def sy(v):
        return py0 - (np.asarray(v, float) - y_lo) / (y_hi - y_lo) * (py0 - py1)

    clip = f"{id_prefix}-plot"
    out = [f'<svg xmlns="http://www.w3.org/2000/svg" width="{WIDTH}" height="{HEIGHT}" '
           f'viewBox="0 0 {WIDTH} {HEIGHT}" font-family="sans-serif" font-size="8" role="img">',
           f"<title>{escape(title)}</title>",
           f'<defs><clipPath id="{clip}"><rect x="{_f(px0)}" y="{_f(py1)}" width="{_f(px1 - px0)}" '
           f'height="{_f(py0 - py1)}"/></clipPath></defs>',
           f'<rect x="0" y="0" width="{WIDTH}" height="{HEIGHT}" fill="#ffffff"/>']
    plot = [f'<g clip-path="url(#{clip})">']
    ok = np.isfinite(d.p10) & np.isfinite(d.p90)
    if ok.any():
        gx, lo_y, hi_y = sx(d.x[ok]), sy(d.p10[ok]), sy(d.p90[ok])
        pts = [f"{_f(a)},{_f(b)}" for a, b in zip(gx, hi_y)] + [f"{_f(a)},{_f(b)}" for a, b in zip(gx[::-1], lo_y[::-1])]
        plot.append(f'<polygon class="band" points="{" ".join(pts)}" fill="{BAND_COLOUR}" fill-opacity="0.5"/>')
    mid = np.isfinite(d.p50)
    if mid.any():
        pts = " ".join(f"{_f(a)},{_f(b)}" for a, b in zip(sx(d.x[mid]), sy(d.p50[mid])))
        plot.append(f'<polyline class="middle" points="{pts}" fill="none" stroke="{PATH_COLOUR}" stroke-width="1.2"/>')
    if d.limit is not None:
        ly = _f(float(sy(d.limit)))
        plot.append(f'<line class="limit" x1="{_f(px0)}" y1="{ly}" x2="{_f(px1)}" y2="{ly}" stroke="{LIMIT_COLOUR}" '
                    'stroke-dasharray="4 2" stroke-width="1"/>')
    nx = _f(float(sx(d.now)))
    plot.append(f'<line class="now" x1="{nx}" y1="{_f(py0)}" x2="{nx}" y2="{_f(py1)}" stroke="{NOW_COLOUR}" '
                'stroke-dasharray="1 2" stroke-width="1"/>')
    used = d.used.astype(bool)
    for a, b in zip(sx(d.readings_x[used]), sy(d.readings_y[used])):
        plot.append(f'<circle class="reading" cx="{_f(a)}" cy="{_f(b)}" r="1.8" fill="{READING_COLOUR}"/>')
    for a, b in zip(sx(d.readings_x[~used]), sy(d.readings_y[~used])):
        plot.append(f'<path class="aside" d="M{_f(a - 2.5)},{_f(b - 2.5)}l5,5m0,-5l-5,5" stroke="{ASIDE_COLOUR}" '
                    'stroke-width="1" fill="none"/>')
    plot.append("</g>")
    out += plot
    if d.limit is not None:
        ly = float(sy(d.limit))
        for name, hours in d.crossings:
            cx = float(sx(hours))
            if px0 <= cx <= px1:
                out.append(f'<line class="crossing" x1="{_f(cx)}" y1="{_f(ly - 5)}" x2="{_f(cx)}" y2="{_f(ly + 5)}" '
                           f'stroke="{LIMIT_COLOUR}" stroke-width="1"/>')
                out.append(f'<text x="{_f(cx + 2)}" y="{_f(ly - 4)}" font-size="7">{name}</text>')
    # axes, ticks and labels
    out.append(f'<rect x="{_f(px0)}" y="{_f(py1)}" width="{_f(px1 - px0)}" height="{_f(py0 - py1)}" fill="none" '
               'stroke="#000000" stroke-width="0.8"/>')
    xt = nice_ticks(0.0, x_hi, 5)
    for v in xt:
        x = _f(float(sx(v)))
        out.append(f'<line x1="{x}" y1="{_f(py0)}" x2="{x}" y2="{_f(py0 + 3)}" stroke="#000000" stroke-width="0.8"/>')
        out.append(f'<text class="xtick" x="{x}" y="{_f(py0 + 11)}" text-anchor="middle">{_tick_text(v, xt)}</text>')
    yt = nice_ticks(y_lo, y_hi, 4)
    for v in yt:
        y = _f(float(sy(v)))
        out.append(f'<line x1="{_f(px0 - 3)}" y1="{y}" x2="{_f(px0)}" y2="{y}" stroke="#000000" stroke-width="0.8"/>')
        out.append(f'<text class="ytick" x="{_f(px0 - 5)}" y="{y}" dy="3" text-anchor="end">{_tick_text(v, yt)}</text>')
    out.append(f'<text x="{_f((px0 + px1) / 2)}" y="{HEIGHT - 4}" text-anchor="middle">'
               "operating hours since the segment started</text>")
    out.append(f'<text x="9" y="{_f((py0 + py1) / 2)}" text-anchor="middle" '
               f'transform="rotate(-90 9 {_f((py0 + py1) / 2)})">{escape(d.y_label)}</text>')
    out.append(f'<text class="title" x="{_f(px0)}" y="{_f(py1 - 5)}" font-size="9">{escape(title)}</text>')
    # legend, top left inside the plot
    entries = [("band", d.band_label), ("middle", d.middle_label), ("reading", "readings")]
    if (~used).any():
        entries.append(("aside", "set aside"))
    if d.limit is not None:
        entries.append(("limit", "limit"))
    for i, (what, words) in enumerate(entries):
        y = py1 + 8 + 8 * i
        x = px0 + 4
        if what == "band":
            out.append(f'<rect x="{_f(x)}" y="{_f(y - 3)}" width="10" height="5" fill="{BAND_COLOUR}" fill-opacity="0.5"/>')
        elif what == "middle":
            out.append(f'<line x1="{_f(x)}" y1="{_f(y)}" x2="{_f(x + 10)}" y2="{_f(y)}" stroke="{PATH_COLOUR}" stroke-width="1.2"/>')
        elif what == "reading":
            out.append(f'<circle cx="{_f(x + 5)}" cy="{_f(y)}" r="1.8" fill="{READING_COLOUR}"/>')
        elif what == "aside":
            out.append(f'<path d="M{_f(x + 2.5)},{_f(y - 2.5)}l5,5m0,-5l-5,5" stroke="{ASIDE_COLOUR}" fill="none"/>')
        else:
            out.append(f'<line x1="{_f(x)}" y1="{_f(y)}" x2="{_f(x + 10)}" y2="{_f(y)}" stroke="{LIMIT_COLOUR}" '
                       'stroke-dasharray="4 2"/>')
        out.append(f'<text class="legend" x="{_f(x + 14)}" y="{_f(y + 2.5)}" font-size="6">{escape(words)}</text>')
    out.append("</svg>")
    return "\n".join(out)
