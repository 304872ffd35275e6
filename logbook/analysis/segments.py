"""The current wear segment of each reading kind and the series to fit in it.

A segment starts at the pump's last event that resets that kind (model.SEGMENT_RESETS):
overhaul or exchange for every kind, neutral re-adjustment for drift, control repair for
servo pressure and drift. x = pump operating hours since the segment start.
This is the one-pump definition (rounds, fleet life, single-pump views); the fleet
forecast packs all pumps at once in ``packing`` by the same rules.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date

from logbook.analysis.hours import continuous_hours, fitment_on, pump_hours, pump_hours_by_date
from logbook.analysis.normalize import normalized_value
from logbook.model import SEGMENT_RESETS, Event, Kind, PumpHistory, Reading


@dataclass(frozen=True)
class Series:
    """Readings of one kind in the current segment, ready for the batch."""

    kind: Kind
    start: Event | None
    start_on: date | None
    start_hours: float  # pump hours at the segment start
    x_hours: tuple[float, ...]  # hours since segment start
    y_value: tuple[float, ...]  # normalized
    raw: tuple[float, ...]
    dates: tuple[date, ...]
    pump_hours: tuple[float, ...]
    readings_before: int  # readings of this kind before the segment (0 with none at all)


def segment_start(kind: Kind, history: PumpHistory) -> Event | None:
    """The pump's last event that starts a new segment for ``kind``."""
    last = None
    for ev in history.events:  # date order
        if ev.serial == history.pump.serial and kind in SEGMENT_RESETS.get(ev.kind, ()):
            last = ev
    return last


def reading_pump_hours(reading: Reading, history: PumpHistory) -> float:
    """Pump hours at a reading; the machine meter itself when no fitment covers the day."""
    hrs = pump_hours(reading.machine_hours, reading.taken_on, history.fitments, history.events)
    return float(reading.machine_hours) if hrs is None else hrs


def _known_points(history: PumpHistory, hours_of: dict[int, float]) -> list[tuple[date, float]]:
    pts = [(f.fitted_on, f.pump_hours_at_fit) for f in history.fitments]
    for f in history.fitments:
        if f.removed_on is not None and f.machine_hours_at_removal is not None:
            h = pump_hours(f.machine_hours_at_removal, f.removed_on, [f], history.events)
            if h is not None:
                pts.append((f.removed_on, h))
    pts += [(r.taken_on, hours_of[i]) for i, r in enumerate(history.readings)]
    return pts


def event_pump_hours(event: Event, history: PumpHistory, hours_of: dict[int, float]) -> float | None:
    """Pump hours at an event: from its meter reading when the pump was fitted, else interpolated by date."""
    if event.hours is not None:
        fit = fitment_on(history.fitments, event.happened_on)
        if fit is not None and (event.machine is None or event.machine == fit.machine):
            return pump_hours(event.hours, event.happened_on, history.fitments, history.events)
    return pump_hours_by_date(event.happened_on, _known_points(history, hours_of))


def _reading_after(reading: Reading, hours: float, event: Event, event_hours: float | None) -> bool:
    if reading.taken_on != event.happened_on:
        return reading.taken_on > event.happened_on
    if event.hours is not None and event_hours is not None:
        return hours >= event_hours
    if reading.entered_at is not None and event.entered_at is not None:
        return reading.entered_at >= event.entered_at
    return True  # same day, no way to tell: taken as the check after the work


def build_series(history: PumpHistory, kind: Kind, hours_of: dict[int, float] | None = None) -> Series:
    """Current-segment series of ``kind`` for one pump (x from the segment start, y normalized)."""
    if hours_of is None:
        hours_of = {i: reading_pump_hours(r, history) for i, r in enumerate(history.readings)}
    start = segment_start(kind, history)
    start_hours = event_pump_hours(start, history, hours_of) if start is not None else None
    xs, ys, raws, dates, phs = [], [], [], [], []
    before = 0
    for i, r in enumerate(history.readings):
        raw = r.value(kind)
        if raw is None:
            continue
        h = hours_of[i]
        if start is not None and not _reading_after(r, h, start, start_hours):
            before += 1
            continue
        xs.append(h)
        ys.append(normalized_value(r, kind, history.model))
        raws.append(float(raw))
        dates.append(r.taken_on)
        phs.append(h)
    origin = 0.0 if start is None else (start_hours if start_hours is not None else (min(xs) if xs else 0.0))
    if start is not None and xs:
        origin = min(origin, min(xs))
    return Series(
        kind=kind,
        start=start,
        start_on=start.happened_on if start is not None else (dates[0] if dates else None),
        start_hours=origin,
        x_hours=tuple(h - origin for h in xs),
        y_value=tuple(ys),
        raw=tuple(raws),
        dates=tuple(dates),
        pump_hours=tuple(phs),
        readings_before=before,
    )


__all__ = ["Series", "build_series", "continuous_hours", "event_pump_hours", "reading_pump_hours", "segment_start"]
