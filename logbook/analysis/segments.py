"""Step of the engine: the current wear segment of every (pump, reading kind), and which readings are in it.

A segment starts at the pump's last event that resets the kind (``model.SEGMENT_RESETS``:
overhaul or exchange for every kind, neutral re-adjustment for drift, control repair
for servo pressure and drift), in (date, id, record) order. A reading belongs to the
segment when it was taken after the start: a later day; on the same day, at or above
the event's pump hours when the event has a meter reading, else when it was entered
after the event (no way to tell: taken as the check after the work). x counts pump
hours from the start's pump hours, but never from after the segment's first reading;
without a start, from zero.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from logbook.analysis.batch import in_order
from logbook.analysis.timeline import Timeline, ordinals
from logbook.model import ALL_KINDS, SEGMENT_RESETS, Event

#: RESETS[k][e]: does an event of the e-th kind in SEGMENT_RESETS restart the k-th kind of ALL_KINDS?
RESETS = [np.array([kind in SEGMENT_RESETS.get(ev, ()) for ev in SEGMENT_RESETS]) for kind in ALL_KINDS]
KINDS = len(ALL_KINDS)


@dataclass(slots=True)
class PumpReadings:
    """The readings of the pumps being forecast, pump after pump, each pump's in (date, meter) order."""

    codes: list[int]  # serial code of each pump
    position: np.ndarray  # position of each serial code among the pumps, -1 for other pumps
    reading: np.ndarray  # per entry: index of the reading in the timeline
    pump: np.ndarray  # per entry: position of its pump
    day: np.ndarray
    hours: np.ndarray  # pump hours
    first: np.ndarray  # per pump: its first entry
    count: np.ndarray  # per pump: how many entries

    @classmethod
    def of(cls, timeline: Timeline, serials: Sequence[str], use: np.ndarray | None) -> "PumpReadings":
        codes = timeline.pump_codes(serials)
        position = np.full(len(timeline.serial_index), -1, dtype=np.int64)
        position[codes] = np.arange(len(serials))
        pump_of = position[timeline.serial]
        reading = np.flatnonzero(pump_of >= 0 if use is None else (pump_of >= 0) & use)
        reading = reading[in_order(pump_of[reading], timeline.day[reading], timeline.meter[reading])]
        count = np.bincount(pump_of[reading], minlength=len(serials))
        first = np.r_[0, np.cumsum(count)[:-1]]
        return cls(codes, position, reading, pump_of[reading], timeline.day[reading], timeline.hours[reading],
                   first, count)  # fmt: skip

    @property
    def pumps(self) -> int:
        return len(self.codes)

    def last_hours_and_day(self) -> tuple[np.ndarray, np.ndarray]:
        """Per pump: the most pump hours of its readings (NaN for none) and the day of its newest (-1)."""
        has = self.count > 0
        hours, day = np.full(self.pumps, np.nan), np.full(self.pumps, -1, dtype=np.int64)
        if len(self.reading):
            hours[has] = np.maximum.reduceat(self.hours, self.first[has])
            day[has] = self.day[self.first[has] + self.count[has] - 1]
        return hours, day


@dataclass(slots=True)
class SegmentStarts:
    """The event that starts each pump's current segment of each kind, and its pump hours."""

    events: list[Event]  # the pumps' events that reset some kind
    day: np.ndarray  # per event
    with_meter: np.ndarray  # per event: it has a meter reading
    hours: np.ndarray  # per event: pump hours (NaN where unknown or not a start)
    start: np.ndarray  # (pumps, kinds): index into ``events``, -1 for no start

    @classmethod
    def of(cls, timeline: Timeline, pumps: PumpReadings, use: np.ndarray | None) -> "SegmentStarts":
        order = [i for i, e in enumerate(timeline.events) if e.serial is not None and e.kind in SEGMENT_RESETS]
        events = [timeline.events[i] for i in order]
        index = timeline.serial_index
        pump = np.array([pumps.position[index[e.serial]] if e.serial in index else -1 for e in events], dtype=np.int64)
        day = ordinals([e.happened_on for e in events])
        ids = np.array([e.id or 0 for e in events], dtype=np.int64)
        kind = np.array([list(SEGMENT_RESETS).index(e.kind) for e in events], dtype=np.int64)
        start = np.full((pumps.pumps, KINDS), -1, dtype=np.int64)
        for k in range(KINDS):
            mine = np.flatnonzero((pump >= 0) & RESETS[k][kind]) if events else np.zeros(0, dtype=np.int64)
            last = mine[last_of_each(pump[mine], np.array(order, dtype=np.int64)[mine], ids[mine], day[mine])]
            start[pump[last], k] = last
        hours = np.full(len(events), np.nan)
        wanted = np.unique(start[start >= 0])
        hours[wanted] = timeline.event_pump_hours([events[j] for j in wanted.tolist()], use)
        return cls(events, day, np.array([e.hours is not None for e in events], dtype=bool), hours, start)

    def after_start(self, timeline: Timeline, pumps: PumpReadings, entries: np.ndarray, k: int) -> np.ndarray:
        """Which of the readings ``entries`` (positions in ``pumps``) were taken after their segment's start
        of kind ``k`` (True where the pump has no start)."""
        after = np.ones(len(entries), dtype=bool)
        with_start = np.flatnonzero(self.start[pumps.pump[entries], k] >= 0)
        event = self.start[pumps.pump[entries[with_start]], k]
        read_day, event_day, event_hours = pumps.day[entries[with_start]], self.day[event], self.hours[event]
        later, same_day = read_day > event_day, read_day == event_day
        if same_day.any():
            by_meter = same_day & self.with_meter[event] & ~np.isnan(event_hours)
            later = np.where(by_meter, pumps.hours[entries[with_start]] >= event_hours, later)
            for q in np.flatnonzero(same_day & ~by_meter).tolist():  # no meter reading: who was entered first
                r, ev = timeline.readings[pumps.reading[entries[with_start[q]]]], self.events[event[q]]
                later[q] = r.entered_at >= ev.entered_at if r.entered_at is not None and ev.entered_at is not None else True
        after[with_start] = later
        return after

    def origins(self, row_lowest: np.ndarray, row_has: np.ndarray) -> np.ndarray:
        """Per row (pump x kind): pump hours that x counts from, given each row's lowest pump hours."""
        row_start = self.start.reshape(-1)
        start_hours = np.where(row_start >= 0, self.hours[np.maximum(row_start, 0)] if self.events else np.nan, np.nan)
        origin = np.where(np.isnan(start_hours), np.where(row_has, row_lowest, 0.0), start_hours)
        origin = np.where(row_start < 0, 0.0, origin)
        return np.where((row_start >= 0) & row_has, np.minimum(origin, row_lowest), origin)


def last_of_each(group: np.ndarray, *keys: np.ndarray) -> np.ndarray:
    """Index of the last element of each group in the order of ``keys`` (most significant last)."""
    order = np.lexsort(keys + (group,))
    return order[np.r_[group[order][1:] != group[order][:-1], True]] if len(order) else order
