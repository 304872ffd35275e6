"""Reference: the current wear segment of each reading kind and the series to fit in it.

A segment starts at the pump's last event that resets that kind (model.SEGMENT_RESETS):
overhaul or exchange for every kind, neutral re-adjustment for drift, control repair for
servo pressure and drift. x = pump operating hours since the segment start.
Reference for ``logbook.analysis.segments`` and ``series``, one pump and kind at a time.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import date

from logbook import oil
from logbook.model import SEGMENT_RESETS, Event, Kind, PumpHistory, PumpModel, Reading
from tests.reference.hours import continuous_hours, fitment_on, pump_hours, pump_hours_by_date


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
    not_used: tuple[str, ...] = ()  # "date: why" of readings in the segment kept but not trended


def normalized_value(reading: Reading, kind: Kind, model: PumpModel) -> float | None:
    """Case drain at the model's reference pressure and oil viscosity, Q_ref = Q * (dp_ref / dp) *
    (nu / nu_ref) (laminar leakage: Rabie, Fluid Power Engineering, 2009, eq. 2.19; viscosity by the
    Walther line of ASTM D341); servo pressure as read; neutral drift as a magnitude."""
    raw = reading.value(kind)
    if raw is None:
        return None
    if kind is Kind.NEUTRAL_DRIFT:
        return abs(raw)
    if kind is Kind.SERVO_PRESSURE:
        return float(raw)
    dp = reading.test_pressure_bar  # none given (or NaN): the reference condition
    dp = model.ref_pressure_bar if dp is None or math.isnan(dp) else dp
    if dp <= 0:
        raise ValueError(f"test_pressure_bar = {reading.test_pressure_bar!r}: must be above 0 bar")
    nu, nu_ref = _viscosities(reading, model)
    return float(raw * (model.ref_pressure_bar / dp) * (nu / nu_ref))


def _viscosities(reading: Reading, model: PumpModel) -> tuple[float, float]:
    """(oil viscosity at the test temperature, reference oil at the reference temperature), cSt: through the
    reading's measured 40 C (and 100 C) viscosity when it has one, else its grade's midpoint (ASTM D341, D2270)."""
    temp = reading.oil_temp_c
    temp = model.ref_temp_c if temp is None or math.isnan(temp) else temp
    grade = model.oil_grade if reading.oil_grade is None else reading.oil_grade
    vi = model.oil_vi if reading.oil_vi is None else reading.oil_vi
    if reading.nu40_cst is not None:
        nu100 = reading.nu100_cst if reading.nu100_cst is not None else oil.nu100_from_vi(reading.nu40_cst, vi)
        nu = float(oil.viscosity_from_points(temp, 40.0, reading.nu40_cst, 100.0, nu100))
    else:
        nu = float(oil.viscosity_cst(temp, grade, vi))
    return nu, float(oil.viscosity_cst(model.ref_temp_c, model.oil_grade, model.oil_vi))


def not_trusted(reading: Reading, model: PumpModel) -> str | None:
    """Why a case drain reading is kept but not trended: its oil thinner than 2 cSt (ASTM D341's plain
    form), nu / nu_ref outside 1/3 to 3, dp_ref / dp outside 1/2 to 2 (common practice, no published
    source); None when it is trended. The words are the engine's (normalize._reason)."""
    from logbook.analysis.normalize import PRESSURE_FACTOR, THIN_OIL, VISCOSITY_FACTOR, _reason

    if reading.case_drain_lpm is None:
        return None
    dp = reading.test_pressure_bar
    dp = model.ref_pressure_bar if dp is None or math.isnan(dp) else dp
    nu, nu_ref = _viscosities(reading, model)
    code = None
    if nu < 2.0:
        code = THIN_OIL
    elif not 1 / 3 <= nu / nu_ref <= 3:
        code = VISCOSITY_FACTOR
    elif not 0.5 <= model.ref_pressure_bar / dp <= 2:
        code = PRESSURE_FACTOR
    return None if code is None else _reason(code, nu, dp, nu_ref, model.ref_pressure_bar, model)


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
    xs, ys, raws, dates, phs, left = [], [], [], [], [], []
    before = 0
    for i, r in enumerate(history.readings):
        raw = r.value(kind)
        if raw is None:
            continue
        h = hours_of[i]
        if start is not None and not _reading_after(r, h, start, start_hours):
            before += 1
            continue
        y = normalized_value(r, kind, history.model)  # raises on a test pressure it cannot use
        why = not_trusted(r, history.model) if kind is Kind.CASE_DRAIN else None
        if why is not None:
            left.append(f"{r.taken_on.isoformat()}: {why}")
            continue
        xs.append(h)
        ys.append(y)
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
        not_used=tuple(left),
    )


__all__ = ["Series", "build_series", "continuous_hours", "event_pump_hours", "reading_pump_hours", "segment_start"]
