"""Readings as columns: what the store reads, handed to the engine without a record per reading.

``ReadingColumns`` holds a table of readings as numpy arrays (numbers, NaN for none;
day ordinals for dates) and lists (texts). The engine's timeline takes its arrays as
they are; anything else sees a sequence of ``model.Reading`` (``len``, index, iterate,
compare with a tuple of readings), each record made only when asked for. It never
changes: the arrays are read-only.

The store fills it with ``from_rows`` from rows selected in ``FIELDS`` order (dates as
ISO text, as SQLite keeps them). numpy only: no SQL here.
"""

from __future__ import annotations

from collections.abc import Iterator, Mapping, Sequence
from datetime import date, datetime
from itertools import chain
from operator import itemgetter
from typing import overload

import numpy as np

from logbook.model import Reading

#: Numbers of a reading, each a float column (NaN for none); ``oil_grade`` and the
#: ids become ints again in a record.
NUMBERS = (
    "machine_hours", "case_drain_lpm", "servo_pressure_bar", "neutral_drift_bar", "charge_pressure_bar", "oil_temp_c",
    "test_pressure_bar", "test_speed_rpm", "oil_grade", "oil_vi", "nu40_cst", "nu100_cst", "superseded_by",
)
#: Texts of a reading, each a list (None where the column is NULL).
TEXTS = ("serial", "machine", "iso4406", "technician", "note", "entered_by", "entered_at", "removed_reason")
#: The order ``from_rows`` reads a row in: id, the day as ISO text, the numbers, the texts.
FIELDS = ("id", "taken_on", *NUMBERS, *TEXTS)
_FIRST_NUMBER, _FIRST_TEXT = 2, 2 + len(NUMBERS)


def _shared(values: tuple) -> tuple:
    """The column with one object per distinct text: a serial, machine or technician repeats on
    reading after reading, and SQLite hands each row its own copy. Kept, those copies held 60 MiB
    of a 9,996-pump fleet's 101 MiB read, scattered among the freed rows so that the process kept
    their memory too (peak of a read and forecast 528 -> 430 MiB)."""
    seen: dict = {}
    return tuple(map(seen.setdefault, values, values))


def _none_for_nan(values: list[float]) -> list[float | None]:
    return [None if v != v else v for v in values]


class ReadingColumns(Sequence[Reading]):
    """A table of readings as columns; a read-only sequence of ``Reading`` records besides."""

    __slots__ = ("id", "day", "numbers", "texts", "_records")

    def __init__(self, ids: np.ndarray, days: np.ndarray, numbers: Mapping[str, np.ndarray], texts: Mapping[str, Sequence]):
        n = len(ids)
        if len(days) != n or any(len(c) != n for c in (*numbers.values(), *texts.values())):
            raise ValueError("every column of a ReadingColumns must have one value per reading")
        if set(numbers) != set(NUMBERS) or set(texts) != set(TEXTS):
            raise ValueError(f"ReadingColumns needs the numbers {NUMBERS} and the texts {TEXTS}")
        self.id = np.asarray(ids, dtype=np.int64)
        self.day = np.asarray(days, dtype=np.int64)
        self.numbers = {name: np.asarray(numbers[name], dtype=float) for name in NUMBERS}
        for array in (self.id, self.day, *self.numbers.values()):
            array.flags.writeable = False  # shared with every timeline and record made from it
        self.texts = {name: texts[name] if type(texts[name]) is tuple else tuple(texts[name]) for name in TEXTS}
        self._records: list[Reading] | None = None

    @classmethod
    def from_rows(cls, rows: Sequence[tuple]) -> ReadingColumns:
        """Columns of rows in ``FIELDS`` order (a database's rows as they come)."""
        if not rows:
            empty = np.zeros(0)
            return cls(np.zeros(0, dtype=np.int64), np.zeros(0, dtype=np.int64), dict.fromkeys(NUMBERS, empty),
                       dict.fromkeys(TEXTS, ()))  # fmt: skip
        columns = list(zip(*rows))  # one pass over the rows; each column a tuple
        n = len(rows)
        iso = columns[1]
        ordinal = {text: date.fromisoformat(text).toordinal() for text in set(iso)}  # a few hundred distinct days
        days = np.fromiter(map(ordinal.__getitem__, iso), dtype=np.int64, count=n)
        numbers = {name: np.array(columns[_FIRST_NUMBER + k], dtype=float) for k, name in enumerate(NUMBERS)}  # None -> NaN
        texts = {name: _shared(columns[_FIRST_TEXT + k]) for k, name in enumerate(TEXTS)}
        return cls(np.array(columns[0], dtype=np.int64), days, numbers, texts)

    def take(self, index: Sequence[int] | np.ndarray) -> ReadingColumns:
        """The readings at the positions ``index`` (in that order) as columns of their own."""
        at = np.asarray(index, dtype=np.int64)
        picks = at.tolist()
        pick = itemgetter(*picks) if len(picks) > 1 else (lambda t: tuple(t[i] for i in picks))
        taken = ReadingColumns(self.id[at], self.day[at], {name: self.numbers[name][at] for name in NUMBERS},
                               {name: pick(self.texts[name]) for name in TEXTS})
        if self._records is not None:
            taken._records = list(map(self._records.__getitem__, picks))
        return taken

    @classmethod
    def joined(cls, parts: Sequence[ReadingColumns]) -> ReadingColumns:
        """The readings of ``parts`` one after the other, as one table."""
        return cls(np.concatenate([p.id for p in parts]), np.concatenate([p.day for p in parts]),
                   {name: np.concatenate([p.numbers[name] for p in parts]) for name in NUMBERS},
                   {name: tuple(chain.from_iterable(p.texts[name] for p in parts)) for name in TEXTS})

    # -- the columns the engine takes --------------------------------------------------
    def number(self, name: str) -> np.ndarray:
        """A number column (read-only), NaN where the reading has none."""
        return self.numbers[name]

    def text(self, name: str) -> Sequence:
        return self.texts[name]

    # -- a sequence of records -------------------------------------------------------------
    def __len__(self) -> int:
        return len(self.id)

    @overload
    def __getitem__(self, index: int) -> Reading: ...

    @overload
    def __getitem__(self, index: slice) -> tuple[Reading, ...]: ...

    def __getitem__(self, index: int | slice) -> Reading | tuple[Reading, ...]:
        if isinstance(index, slice):
            return tuple(self.records()[index])
        if self._records is not None:
            return self._records[index]
        i = range(len(self))[index]  # IndexError and negative indexes as a tuple has them
        return self._record(i)

    def __iter__(self) -> Iterator[Reading]:
        return iter(self.records())

    def __eq__(self, other: object) -> bool:
        if isinstance(other, ReadingColumns) and other is self:
            return True
        if not isinstance(other, Sequence) or isinstance(other, (str, bytes)):
            return NotImplemented
        return len(self) == len(other) and all(a == b for a, b in zip(self, other))

    __hash__ = None  # type: ignore[assignment]  # compared by value, like the tuple it stands for

    def __repr__(self) -> str:
        return f"ReadingColumns({len(self)} readings)"

    def records(self) -> list[Reading]:
        """Every reading as a ``Reading`` (made once, then kept)."""
        if self._records is None:
            made: dict[int, date] = {}
            days = [made[d] if d in made else made.setdefault(d, date.fromordinal(d)) for d in self.day.tolist()]
            numbers = zip(*(_none_for_nan(self.numbers[name].tolist()) for name in NUMBERS))
            texts = zip(*(self.texts[name] for name in TEXTS))
            self._records = list(map(_reading, self.id.tolist(), days, numbers, texts))
        return self._records

    def _record(self, i: int) -> Reading:
        numbers = _none_for_nan([float(self.numbers[name][i]) for name in NUMBERS])
        return _reading(int(self.id[i]), date.fromordinal(int(self.day[i])), numbers, [self.texts[name][i] for name in TEXTS])


def _reading(rid: int, day: date, numbers: Sequence[float | None], texts: Sequence) -> Reading:
    """One record from its id, day, numbers (``NUMBERS`` order) and texts (``TEXTS`` order)."""
    (hours, case_drain, servo, drift, charge, temp, pressure, speed, grade, vi, nu40, nu100, later) = numbers
    serial, machine, iso4406, technician, note, entered_by, entered_at, removed = texts
    assert hours is not None  # NOT NULL in the store
    return Reading(
        id=rid, serial=serial, taken_on=day, machine_hours=hours, case_drain_lpm=case_drain, servo_pressure_bar=servo,
        neutral_drift_bar=drift, charge_pressure_bar=charge, oil_temp_c=temp, test_pressure_bar=pressure,
        test_speed_rpm=speed, oil_grade=None if grade is None else int(grade), oil_vi=vi, iso4406=iso4406,
        technician=technician, note=note, entered_by=entered_by,
        entered_at=None if entered_at is None else datetime.fromisoformat(entered_at),
        superseded_by=None if later is None else int(later), machine=machine, removed_reason=removed,
        nu40_cst=nu40, nu100_cst=nu100,
    )  # fmt: skip
