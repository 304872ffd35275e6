"""The fleet as the logbook knew it on a past day (stdlib only).

A reading or event belongs to day D when it was taken (happened) on or before D.
Corrections and removals are later knowledge: each has the day it was entered, and
on days before that the original stands. The first entry of a reading is taken to
describe what was measured on its own date, whenever it was typed in (readings are
often keyed in days after a round, or imported in bulk when a fleet is onboarded).

So ``fleet_as_of(fleet, known, D)`` gives the same records as a copy of the
database from which everything dated after D, and every correction and removal
entered after D, had been taken out. Fitments are dated by ``fitted_on`` and
``removed_on``; models, limits, machines and pumps are taken as they are now.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from datetime import date

from logbook.model import Event, Fitment, Fleet, Reading


@dataclass(frozen=True)
class Known:
    """Per reading and event id: (known from, known until). Until is the day a correction
    of it or its removal was entered (exclusive), None while it stands."""

    readings: dict[int, tuple[date, date | None]] = field(default_factory=dict)
    events: dict[int, tuple[date, date | None]] = field(default_factory=dict)


def _stands(span: tuple[date, date | None] | None, day: date) -> bool:
    if span is None:
        return True
    known_from, until = span
    return known_from <= day and (until is None or until > day)


def _reading_on(r: Reading, known: Known, day: date) -> Reading | None:
    if r.taken_on > day or r.id is None or not _stands(known.readings.get(r.id), day):
        return None
    if r.superseded_by is None and r.removed_reason is None:
        return r
    return dataclasses.replace(r, superseded_by=None, removed_reason=None)


def _event_on(e: Event, known: Known, day: date) -> Event | None:
    if e.happened_on > day or e.id is None or not _stands(known.events.get(e.id), day):
        return None
    return e if e.removed_reason is None else dataclasses.replace(e, removed_reason=None)


def _fitment_on(f: Fitment, day: date) -> Fitment | None:
    if f.fitted_on > day:
        return None
    if f.removed_on is not None and f.removed_on > day:
        return dataclasses.replace(f, removed_on=None, machine_hours_at_removal=None)
    return f


def readings_known_on(readings, known: Known, day: date) -> list[Reading]:
    """Every reading of ``readings`` (superseded and removed ones too) as the logbook listed it on ``day``:
    taken by then and entered by then; corrected or removed only where that was entered by then."""
    out = []
    for r in readings:
        span = known.readings.get(r.id) if r.id is not None else None
        if r.taken_on > day or (span is not None and span[0] > day):
            continue
        if _stands(span, day):
            r = dataclasses.replace(r, superseded_by=None, removed_reason=None)
        out.append(r)
    return out


def fleet_as_of(fleet: Fleet, known: Known, day: date) -> Fleet:
    """The records of ``fleet`` (read with every superseded and removed row) that stood on ``day``."""
    readings = tuple(r2 for r in fleet.readings if (r2 := _reading_on(r, known, day)) is not None)
    events = tuple(e2 for e in fleet.events if (e2 := _event_on(e, known, day)) is not None)
    fitments = tuple(f2 for f in fleet.fitments if (f2 := _fitment_on(f, day)) is not None)
    return dataclasses.replace(fleet, readings=readings, events=events, fitments=fitments)
