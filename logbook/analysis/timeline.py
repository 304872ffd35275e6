"""Step 1 of the engine, the timeline: fitments, hour meters and readings as numpy columns.

Rules (``logbook.meter`` words them for the record checks; the same-day meter rule is
its ``read_on_new_meter``): the fitment that held a pump on a day is the newest one
fitted by then and not yet removed; continuous machine hours add up the hours lost at
each meter replacement before the day (on the replacement day itself, the nearer meter
decides); pump hours are the pump's hours at fitting plus the continuous machine hours
run since; a reading outside every fitment counts the meter itself. Pump hours at an
event come from its meter reading when the pump sat in that machine, else by date
between the pump's known points (fittings, removals, readings), never running back.
"""

from __future__ import annotations

from collections.abc import Sequence
from datetime import date
from operator import attrgetter
from typing import TYPE_CHECKING, cast
import weakref

import numpy as np

from logbook.columns import ReadingColumns
from logbook.meter import read_on_new_meter
from logbook.model import Event, EventKind, Fitment, Reading

if TYPE_CHECKING:
    from logbook.model import Fleet

DAY_BITS = 21  # day ordinals (to year 5741) fit below 2**21: key = index * 2**21 + day
NEVER = (1 << DAY_BITS) - 1  # removed_on of a fitment still in place


def ordinals(days: Sequence[date]) -> np.ndarray:
    """Day ordinals of a sequence of dates."""
    return np.fromiter(map(date.toordinal, days), dtype=np.int64, count=len(days))


def floats(values: Sequence) -> np.ndarray:
    """Float column, NaN for None."""
    return np.array(values, dtype=float) if len(values) else np.zeros(0)


def codes(names: Sequence, index: dict) -> np.ndarray:
    """Integer code of each name, adding unseen names to ``index`` in order of first appearance; -1 for None."""
    seen = dict.fromkeys(names)
    for name in seen:
        if name is not None and name not in index:
            index[name] = len(index)
    lookup = {**index, None: -1} if None in seen else index
    return np.fromiter(map(lookup.__getitem__, names), dtype=np.int64, count=len(names))


class MeterTable:
    """Meter replacements per machine, to put hour-meter values on each machine's continuous scale."""

    def __init__(self, events: Sequence[Event], machine_index: dict[str, int]):
        reps = [
            (machine_index.setdefault(e.machine, len(machine_index)), e.happened_on.toordinal(), e.id or 0, i, e)
            for i, e in enumerate(events)
            if e.kind is EventKind.METER_REPLACED and e.machine is not None and e.hours is not None and e.to_hours is not None
        ]
        reps.sort(key=lambda t: t[:4])
        self.events = [t[4] for t in reps]
        self.machine = np.array([t[0] for t in reps], dtype=np.int64)
        self.day = np.array([t[1] for t in reps], dtype=np.int64)
        self.key = (self.machine << DAY_BITS) + self.day
        # offset after the first k replacements of a machine, summed as meter.continuous_hours sums it
        prefix: list[float] = []
        running: list[float] = []
        last: int | None = None
        for m, e in zip(self.machine.tolist(), self.events):
            assert e.hours is not None and e.to_hours is not None  # only such replacements are kept above
            running = [] if m != last else running
            running = [*running, e.hours - e.to_hours]
            prefix.append(sum(running))
            last = m
        self.prefix = np.array(prefix, dtype=float)
        # the replacements of the machine of each replacement: events[first[i]:last[i]]
        starts = np.flatnonzero(np.r_[True, self.machine[1:] != self.machine[:-1]][: len(reps)])
        ends = np.r_[starts[1:], len(reps)][: len(starts)].astype(np.int64)
        self.first = np.repeat(starts, ends - starts).tolist()
        self.last = np.repeat(ends, ends - starts).tolist()

    def continuous(self, machine: np.ndarray, day: np.ndarray, meter_hours: np.ndarray) -> np.ndarray:
        """Continuous hours of meter values read on machines ``machine`` (codes) on days ``day``."""
        hours = np.asarray(meter_hours, dtype=float)
        if not self.events:
            return hours + 0.0
        key = (machine << DAY_BITS) + day
        before = np.searchsorted(self.key, key, "left")  # replacements of earlier machines or days
        upto = np.searchsorted(self.key, key, "right")
        prev = before - 1
        same_machine = (prev >= 0) & (self.machine[np.maximum(prev, 0)] == machine)
        offset = np.where(same_machine, self.prefix[np.maximum(prev, 0)], 0.0)
        out = hours + offset
        for q in np.flatnonzero(upto > before).tolist():  # read on a replacement day: rare, done as meter does
            mine = self.events[self.first[before[q]] : self.last[before[q]]]
            on = date.fromordinal(int(day[q]))
            out[q] = float(meter_hours[q]) + sum(cast(float, e.hours) - cast(float, e.to_hours)
                                                 for e in mine if read_on_new_meter(e, on, meter_hours[q]))  # fmt: skip
        return out


class FitmentTable:
    """Fitments sorted by (pump, fitted_on, id), with the continuous machine hours at each fitting."""

    def __init__(self, fitments: Sequence[Fitment], serial_index: dict[str, int], machine_index: dict[str, int],
                 meters: MeterTable):  # fmt: skip
        serial = codes([f.serial for f in fitments], serial_index)
        fitted = ordinals([f.fitted_on for f in fitments])
        ids = np.array([f.id or 0 for f in fitments], dtype=np.int64)
        order = np.lexsort((np.arange(len(fitments)), ids, fitted, serial))
        self.items = [fitments[i] for i in order.tolist()]
        self.serial, self.fitted = serial[order], fitted[order]
        self.machine = codes([f.machine for f in self.items], machine_index)
        self.removed = np.array([NEVER if f.removed_on is None else f.removed_on.toordinal() for f in self.items],
                                dtype=np.int64)  # fmt: skip
        self.pump_at_fit = floats([f.pump_hours_at_fit for f in self.items])
        self.meter_at_fit = floats([f.machine_hours_at_fit for f in self.items])
        self.meter_at_removal = floats([f.machine_hours_at_removal for f in self.items])
        self.key = (self.serial << DAY_BITS) + self.fitted
        self.depth = int(np.bincount(self.serial).max()) if len(self.items) else 0
        self.cont_at_fit = meters.continuous(self.machine, self.fitted, self.meter_at_fit)
        self.meters = meters

    def on(self, serial: np.ndarray, day: np.ndarray) -> np.ndarray:
        """Index of the fitment that held pump ``serial`` (codes) on ``day``: the newest one fitted by
        then and not yet removed; -1 where none did."""
        found = np.full(len(serial), -1, dtype=np.int64)
        if not self.items:
            return found
        key = (serial << DAY_BITS) + day
        first = np.searchsorted(self.key, serial << DAY_BITS, "left")
        pos = np.searchsorted(self.key, key, "right")
        for back in range(1, self.depth + 1):
            idx = pos - back
            safe = np.maximum(idx, 0)
            hit = (found < 0) & (idx >= first) & (self.removed[safe] >= day) & (serial >= 0)
            found = np.where(hit, idx, found)
        return found

    def current(self, serial: Sequence[int]) -> list[int]:
        """Index of each pump's first fitment (in fitting order) not yet removed; -1 for none."""
        open_ = np.flatnonzero(self.removed == NEVER)
        got, firsts = np.unique(self.serial[open_], return_index=True)
        first_open = dict(zip(got.tolist(), open_[firsts].tolist()))
        return [first_open.get(s, -1) for s in serial]

    def machine_of(self, fit: np.ndarray) -> np.ndarray:
        """Machine code of each fitment index, -1 where ``fit`` is -1."""
        if not self.items:
            return np.full(len(fit), -1, dtype=np.int64)
        return np.where(fit >= 0, self.machine[np.maximum(fit, 0)], -1)

    def pump_hours(self, fit: np.ndarray, day: np.ndarray, meter_hours: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """(pump hours, continuous machine hours) of meter values read while fitments ``fit`` held (fit >= 0)."""
        if not self.items:
            return np.full(len(fit), np.nan), np.full(len(fit), np.nan)
        f = np.maximum(fit, 0)
        now = self.meters.continuous(self.machine[f], day, meter_hours)
        return self.pump_at_fit[f] + (now - self.cont_at_fit[f]), now

    def removal_pump_hours(self) -> np.ndarray:
        """Pump hours at each removal that has a meter reading (NaN otherwise), as segments' known points."""
        ok = (self.removed != NEVER) & np.isfinite(self.meter_at_removal) & (self.fitted <= self.removed)
        hours, _ = self.pump_hours(np.arange(len(self.items)), np.where(ok, self.removed, self.fitted), self.meter_at_removal)
        return np.where(ok, hours, np.nan)


VALUE_FIELDS = ("case_drain_lpm", "servo_pressure_bar", "neutral_drift_bar")  # in ALL_KINDS order
_NUMBERS = ("machine_hours", *VALUE_FIELDS, "oil_temp_c", "test_pressure_bar", "oil_grade", "oil_vi", "superseded_by",
            "nu40_cst", "nu100_cst")


_SHARED: dict[int, tuple[weakref.ref, "Timeline"]] = {}  # id(fleet) -> (the fleet, its timeline)


class Timeline:
    """Fitments, meter replacements and readings of a fleet as columns, and the pump hours of every reading."""

    @classmethod
    def of(cls, fleet: Fleet) -> "Timeline":
        """The timeline of a ``Fleet`` snapshot's records, built once per snapshot and shared by the
        engine, the rounds and fleet life (its arrays are read, never changed); dropped with the snapshot."""
        key = id(fleet)
        held = _SHARED.get(key)
        if held is not None and held[0]() is fleet:
            return held[1]
        timeline = cls(fleet.fitments, fleet.readings, fleet.events)

        def forget(_: object, key: int = key) -> None:
            _SHARED.pop(key, None)

        _SHARED[key] = (weakref.ref(fleet, forget), timeline)
        return timeline

    def __init__(self, fitments: Sequence[Fitment], readings: Sequence[Reading], events: Sequence[Event]):
        self.serial_index: dict[str, int] = {}
        self.machine_index: dict[str, int] = {}
        self.events = events
        self.meters = MeterTable(events, self.machine_index)
        self.fits = FitmentTable(fitments, self.serial_index, self.machine_index, self.meters)
        self.readings = readings
        self._read_columns(readings)
        self.fit = self.fits.on(self.serial, self.day)
        hours, self.cont = self.fits.pump_hours(self.fit, self.day, self.meter)
        self.hours = np.where(self.fit >= 0, hours, self.meter)  # the meter itself where no fitment held
        self._by_pump: tuple[np.ndarray, np.ndarray] | None = None
        self._removal: np.ndarray | None = None

    def _read_columns(self, readings: Sequence[Reading]) -> None:
        if isinstance(readings, ReadingColumns):  # the store's columns: taken as they are
            self._take_columns(readings)
            return
        n = len(readings)
        serials = list(map(attrgetter("serial"), readings))
        for s in set(serials).difference(self.serial_index):
            self.serial_index[s] = len(self.serial_index)
        self.serial = np.fromiter(map(self.serial_index.__getitem__, serials), dtype=np.int64, count=n)
        self.day = np.fromiter(map(date.toordinal, map(attrgetter("taken_on"), readings)), dtype=np.int64, count=n)
        rows = list(map(attrgetter(*_NUMBERS), readings))  # one pass over the records for all the numbers
        table = np.array(rows, dtype=float).reshape(n, len(_NUMBERS))
        self.meter, self.temp, self.dp, self.grade, self.vi = (table[:, i].copy() for i in (0, 4, 5, 6, 7))
        self.values = [table[:, 1 + k].copy() for k in range(3)]
        self.nu40, self.nu100 = table[:, 9].copy(), table[:, 10].copy()  # measured oil viscosity, NaN for none
        self.latest = np.isnan(table[:, 8])  # not superseded by a correction (ids are never NaN)
        self.given = [~np.isnan(v) for v in self.values]
        row, col = np.nonzero(np.isnan(table[:, 1:4]))
        if len(row):  # a value given as NaN (not None) is a reading all the same
            given = np.fromiter((rows[i][1 + k] is not None for i, k in zip(row.tolist(), col.tolist())), bool,
                                count=len(row))  # fmt: skip
            for i, k in zip(row[given].tolist(), col[given].tolist()):
                self.given[k][i] = True

    def _take_columns(self, columns: ReadingColumns) -> None:
        serials = columns.text("serial")
        for s in set(serials).difference(self.serial_index):
            self.serial_index[s] = len(self.serial_index)
        self.serial = np.fromiter(map(self.serial_index.__getitem__, serials), dtype=np.int64, count=len(serials))
        self.day = columns.day
        number = columns.number
        self.meter, self.temp, self.dp = number("machine_hours"), number("oil_temp_c"), number("test_pressure_bar")
        self.grade, self.vi, self.nu40, self.nu100 = number("oil_grade"), number("oil_vi"), number("nu40_cst"), number("nu100_cst")
        self.values = [number(field) for field in VALUE_FIELDS]
        self.latest = np.isnan(number("superseded_by"))
        self.given = [~np.isnan(v) for v in self.values]  # a database holds no NaN: NaN is none

    def pump_codes(self, serials: Sequence[str]) -> list[int]:
        """Code of each serial (new codes for serials without records)."""
        return [self.serial_index.setdefault(serial, len(self.serial_index)) for serial in serials]

    def event_pump_hours(self, events: Sequence[Event], use: np.ndarray | None = None) -> np.ndarray:
        """Pump hours at each event (NaN where unknown): from its meter reading when the pump sat in the
        event's machine that day, else by date between the pump's known points (readings where ``use``)."""
        if not events:
            return np.zeros(0)
        fits = self.fits
        serial = np.array([-1 if e.serial is None else self.serial_index.get(e.serial, -1) for e in events], dtype=np.int64)
        day = ordinals([e.happened_on for e in events])
        meter = floats([e.hours for e in events])
        fit = fits.on(serial, day)
        machine = codes([e.machine for e in events], self.machine_index)
        direct = ~np.isnan(meter) & (fit >= 0) & ((machine < 0) | (machine == fits.machine_of(fit)))
        hours, _ = fits.pump_hours(fit, day, np.nan_to_num(meter))
        out = np.where(direct, hours, np.nan)
        for j in np.flatnonzero(~direct & (serial >= 0)).tolist():  # rare: interpolate by date
            out[j] = self._hours_by_date(int(serial[j]), int(day[j]), use)
        return out

    def highest_pump_hours(self, use: np.ndarray | None = None) -> np.ndarray:
        """Per serial code: the most pump hours known (readings where ``use``, fittings, removals with a
        meter reading); NaN for none."""
        out = np.full(len(self.serial_index), -np.inf)
        reads = np.ones(len(self.serial), dtype=bool) if use is None else use
        np.maximum.at(out, self.serial[reads], self.hours[reads])
        np.maximum.at(out, self.fits.serial, self.fits.pump_at_fit)
        removal = self._removal_hours()
        known = ~np.isnan(removal)
        np.maximum.at(out, self.fits.serial[known], removal[known])
        return np.where(np.isneginf(out), np.nan, out)

    def _removal_hours(self) -> np.ndarray:
        if self._removal is None:
            self._removal = self.fits.removal_pump_hours()
        return self._removal

    def _hours_by_date(self, serial: int, day: int, use: np.ndarray | None) -> float:
        """Pump hours of pump ``serial`` on ``day`` by straight-line interpolation between its known points
        (fittings, removals with a meter reading, readings), their hours made non-decreasing in date order."""
        fits = self.fits
        mine = np.flatnonzero(fits.serial == serial)
        removal = self._removal_hours()[mine]
        reads = self._readings_of(serial)
        if use is not None:
            reads = reads[use[reads]]
        days = np.concatenate([fits.fitted[mine], fits.removed[mine][~np.isnan(removal)], self.day[reads]])
        hours = np.concatenate([fits.pump_at_fit[mine], removal[~np.isnan(removal)], self.hours[reads]])
        if not len(days):
            return np.nan
        order = np.lexsort((hours, days))
        return float(np.interp(day, days[order].astype(float), np.maximum.accumulate(hours[order])))

    def _readings_of(self, serial: int) -> np.ndarray:
        if self._by_pump is None:
            order = np.argsort(self.serial, kind="stable")
            self._by_pump = order, self.serial[order]
        order, sorted_serial = self._by_pump
        lo, hi = np.searchsorted(sorted_serial, [serial, serial + 1])
        return order[lo:hi]
