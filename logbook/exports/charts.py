"""One chart per planned pump: readings, fitted path, 80 % band, limit and P10/P50/P90 (inline SVG).

Matplotlib with the Agg/SVG backends only (no display). The SVG is deterministic:
a fixed hash salt per chart (so element ids are unique within one HTML page and
the same on every run), no date or creator metadata, text kept as text.
"""

from __future__ import annotations

import io
import re

import numpy as np

from logbook.analysis.results import KindForecast

_PREAMBLE = re.compile(r"^.*?(?=<svg)", re.S)
_COUNTED_ID = re.compile(r'id="([A-Za-z0-9.]+_\d+)"')


def _figure():
    from matplotlib.backends.backend_svg import FigureCanvasSVG
    from matplotlib.figure import Figure

    fig = Figure(figsize=(6.4, 2.6), dpi=72)
    FigureCanvasSVG(fig)
    return fig


def kind_chart_svg(kf: KindForecast, title: str, salt: str, id_prefix: str = "c") -> str | None:
    """SVG text (no XML preamble) of one reading's trend, or None when there is no fit to draw.

    ``salt`` seeds matplotlib's hashed ids; ``id_prefix`` (letters, digits) is put before
    its counted ids (axes_1, line2d_3, ...) so several charts can share one HTML page.
    """
    import matplotlib
    from matplotlib.ticker import MaxNLocator

    fit = kf.fit
    if fit is None or not fit.x_hours:
        return None
    x = np.asarray(fit.x_hours, float)
    y = np.asarray(fit.y_value, float)
    used = np.asarray(fit.used, bool)
    now = kf.hours_in_segment if kf.hours_in_segment is not None else float(x.max())
    crossings = [now + h for h in (kf.p10_hours, kf.p50_hours, kf.p90_hours) if h is not None]
    x_end = max([float(x.max()), now] + crossings) * 1.05 or 1.0
    grid = np.linspace(0.0, x_end, 80)
    with np.errstate(all="ignore"):
        lower, middle, upper = fit.band(grid, 0.8)
    rc = {"svg.hashsalt": salt, "svg.fonttype": "none", "font.size": 8, "axes.titlesize": 9}
    with matplotlib.rc_context(rc):
        fig = _figure()
        ax = fig.add_axes((0.09, 0.17, 0.89, 0.72))
        ax.fill_between(grid, lower, upper, color="#9ecae1", alpha=0.5, linewidth=0, label="80 % band")
        ax.plot(grid, middle, color="#08519c", linewidth=1.2, label=f"{fit.path} path")
        ax.plot(x[used], y[used], "o", color="#252525", markersize=3.5, label="readings")
        if (~used).any():
            ax.plot(x[~used], y[~used], "x", color="#cb181d", markersize=5, label="set aside")
        if kf.limit is not None:
            ax.axhline(kf.limit.value, color="#cb181d", linestyle="--", linewidth=1, label="limit")
            for h, name in zip((kf.p10_hours, kf.p50_hours, kf.p90_hours), ("P10", "P50", "P90")):
                if h is not None:
                    ax.plot([now + h], [kf.limit.value], "|", color="#cb181d", markersize=10)
                    ax.annotate(name, (now + h, kf.limit.value), textcoords="offset points", xytext=(2, 4), fontsize=7)
        ax.axvline(now, color="#737373", linestyle=":", linewidth=1)
        ax.set_xlim(0, x_end)
        ax.set_title(title, loc="left", parse_math=False)  # a serial with $ signs is text, not a formula
        ax.set_xlabel("operating hours since the segment started")
        ax.set_ylabel(f"{kf.kind.label} [{kf.kind.unit}]")
        ax.legend(loc="upper left", fontsize=6, frameon=False)
        ax.xaxis.set_major_locator(MaxNLocator(5))
        ax.yaxis.set_major_locator(MaxNLocator(4))
        out = io.StringIO()
        fig.savefig(out, format="svg", metadata={"Date": None, "Creator": None})
    svg = _PREAMBLE.sub("", out.getvalue(), count=1)
    return _COUNTED_ID.sub(lambda m: f'id="{id_prefix}-{m.group(1)}"', svg)
