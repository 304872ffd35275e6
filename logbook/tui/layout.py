"""Fleet table columns for a terminal width: keys, labels, widths (no cells).

Kept free of the data modules (model, analysis, fmt) so that the fleet view's first
frame can draw its column headers before they are imported; ``present.fleet_layout``
adds how each cell is worded.
"""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class ColumnSpec:
    """One column as laid out: key, header label (already clipped) and width in cells."""

    key: str
    label: str
    width: int


@dataclass(frozen=True)
class FleetLayout:
    """The columns that fit, and which of the wider wordings they have room for."""

    columns: tuple[ColumnSpec, ...]
    full_dates: bool = False
    long_kind: bool = False
    trend_words: bool = False


def clip(text: str, width: int) -> str:
    """Text cut to ``width`` cells with an ellipsis, so that columns never run together."""
    return text if len(text) <= width else text[: max(width - 1, 0)] + "…"


def fleet_columns(width: int, serial_width: int = 7) -> FleetLayout:
    """Columns that fit ``width`` cells (one space between columns).

    The narrow layout (80 columns) shows months for P50/P10, short kind names, the next
    reading in four cells ("due", "12d"), the expected cost of the planned month in five
    ("8.4k") and no model or trend; each step up adds detail while it still fits: the
    model, the trend arrow, full dates, full status, the site, longer machine/position,
    kind names, trend words.
    """
    w = {"serial": max(6, min(serial_width, 12)), "where": 15, "model": 0, "hours": 6, "kind": 5,
         "p50": 7, "p10": 7, "trend": 0, "status": 15, "next": 4, "site": 0, "cost": 5}
    full_dates = long_kind = trend_words = False

    def total() -> int:
        shown = [v for v in w.values() if v]
        return sum(shown) + len(shown) - 1

    for step in ("model", "arrow", "dates", "status", "site", "where", "kind", "trend"):
        before = dict(w)
        if step == "model":
            w["model"] = 6
        elif step == "arrow":
            w["trend"] = 1
        elif step == "dates":
            w["p50"] = w["p10"] = 10
        elif step == "status":
            w["status"] = 23
        elif step == "where":
            w["where"] = 19
        elif step == "kind":
            w["kind"] = 14
        elif step == "site":
            w["site"] = 14
        elif step == "trend":
            w["trend"] = 17
        if total() > width:
            w = before
            break
        full_dates |= step == "dates"
        long_kind |= step == "kind"
        trend_words |= step == "trend"
    for key, least in (("where", 9), ("status", 10), ("serial", 6)):  # narrower than 80 columns: squeeze
        if total() > width:
            w[key] = max(least, w[key] - (total() - width))
    if total() < width and w["where"] < 19:
        w["where"] = min(19, w["where"] + width - total())
    labels = {
        "serial": "Serial",
        "where": "Machine, position" if w["where"] >= 17 else "Machine",
        "site": "Site",
        "model": "Model",
        "hours": "Hours",
        "kind": "Closest to limit" if long_kind else "Worst",
        "p50": "P50 date" if full_dates else "P50",
        "p10": "P10 date" if full_dates else "P10",
        "trend": "Trend" if trend_words else "T",
        "status": "Status",
        "next": "Next",
        "cost": "Cost",
    }
    columns = tuple(ColumnSpec(key, clip(label, w[key]), w[key]) for key, label in labels.items() if w[key])
    return FleetLayout(columns, full_dates, long_kind, trend_words)
