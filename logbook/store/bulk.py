"""The fast lane for big, clean readings imports: checks done column by column.

``add_reading_columns`` applies the same rules as ``add_readings`` but over whole
columns (set operations, one sort per machine) and writes with one ``executemany``
fed straight from the columns. It only ever says yes: at the first row that might
need a message (unknown pump, outside a fitment, a reading recorded before, even
one corrected or removed since, an hour meter out of order, a model limit...) it
declines and returns None, and the caller runs ``add_readings``, which finds and
words every problem and every row already present.
"""

from __future__ import annotations

import json
from collections import defaultdict
from dataclasses import dataclass, field
from datetime import date
from itertools import repeat
from typing import Sequence

from logbook import meter
from logbook.columns import ReadingColumns
from logbook.model import ImportReport
from logbook.store.base import StorePart
from logbook.store.batches import Checked
from logbook.store.readings import READING_COLUMNS
from logbook.units import theoretical_flow_lpm

#: read_columns' column names, in READING_COLUMNS order up to ``note``.
_INPUT = (
    "serial date machine machine_hours case_drain servo_pressure neutral_drift charge_pressure oil_temp test_pressure "
    "test_speed oil_grade oil_vi nu40_cst nu100_cst iso4406 technician note"
).split()
_INSERT = f"INSERT INTO readings ({', '.join(READING_COLUMNS)}) VALUES ({', '.join('?' * len(READING_COLUMNS))})"
#: The stored meter records (machine, date, hours) of the machines in a JSON list (given four times).
_METER_POINTS_OF = """
    SELECT machine, taken_on, machine_hours FROM readings
     WHERE machine IN (SELECT value FROM json_each(?)) AND superseded_by IS NULL AND removed_reason IS NULL
    UNION ALL
    SELECT machine, happened_on, hours FROM events
     WHERE machine IN (SELECT value FROM json_each(?)) AND hours IS NOT NULL AND kind != 'meter_replaced'
       AND removed_reason IS NULL
    UNION ALL
    SELECT to_machine, happened_on, to_hours FROM events
     WHERE to_machine IN (SELECT value FROM json_each(?)) AND to_hours IS NOT NULL AND kind = 'move' AND removed_reason IS NULL
    UNION ALL
    SELECT machine, fitted_on, machine_hours_at_fit FROM fitments WHERE machine IN (SELECT value FROM json_each(?))
"""

def _rows_of(serials: Sequence[str], distinct: int) -> dict[str, Sequence[int]]:
    """Each serial's row positions, in order of first appearance: a range per serial when each
    pump's rows come one after the other (a sorted file; found from where the serial changes),
    else a list."""
    from operator import ne

    import numpy as np

    changed = np.fromiter(map(ne, serials[1:], serials[:-1]), dtype=bool, count=max(len(serials) - 1, 0))
    starts = [0, *(np.flatnonzero(changed) + 1).tolist()]
    if len(starts) == distinct:
        return {serials[a]: range(a, b) for a, b in zip(starts, [*starts[1:], len(serials)])}
    rows_of: dict[str, list[int]] = defaultdict(list)
    for i, s in enumerate(serials):
        rows_of[s].append(i)
    return dict(rows_of)


@dataclass
class _CheckedColumns(Checked):
    """A checked column batch, with the value columns the check made float arrays of (reused
    for the rows handed back)."""

    arrays: dict = field(default_factory=dict)


class _Declined(Exception):
    """The batch needs the row-by-row check."""


class BulkMixin(StorePart):
    """add_reading_columns: add_readings for column batches, or None to fall back."""

    def add_reading_columns(
        self, columns: dict[str, list], *, today: date, lines: Sequence[int], dry_run: bool = False,
        source: tuple[str, str] | None = None, written: list[Written] | None = None,
    ) -> ImportReport | None:
        """``written``: a list that gets the rows as written (``Written``), so that the caller
        need not read them back."""
        n = len(lines)
        try:
            self._check_then_write(
                lambda: self._check_columns(columns, n, today), lambda c: self._write_columns(c, n, source, written),
                dry_run=dry_run,
            )
        except _Declined:
            return None
        return ImportReport("readings", added=n, problems=[], dry_run=dry_run)

    def _check_columns(self, columns: dict[str, list], n: int, today: date) -> Checked:
        """Every rule of ``_check_readings`` over whole columns; raises _Declined at the first doubt."""
        none = [None] * n
        serials, dates, hours = columns["serial"], columns["date"], columns["machine_hours"]
        if n == 0 or max(dates) > today:
            raise _Declined
        pumps, models = self.pumps(), self.models()
        serial_set = set(serials)
        if not serial_set <= pumps.keys():
            raise _Declined
        fits = defaultdict(list)
        for f in self.fitments():
            if f.serial in serial_set:
                fits[f.serial].append(f)
        rows_of = _rows_of(serials, len(serial_set))
        machine_of: list[str | None] = [None] * n  # every row gets its machine, or the batch is declined
        for s, rows in rows_of.items():
            held = fits.get(s, [])
            if len(held) == 1:  # the common case: one fitment covers every row of the pump
                f = held[0]
                run = rows[-1] - rows[0] + 1 == len(rows)  # the pump's rows one after the other (a sorted file)
                days = dates[rows[0]:rows[-1] + 1] if run else [dates[i] for i in rows]
                if min(days) < f.fitted_on or (f.removed_on is not None and max(days) > f.removed_on):
                    raise _Declined
                if run:
                    machine_of[rows[0]:rows[-1] + 1] = [f.machine] * len(rows)
                else:
                    for i in rows:
                        machine_of[i] = f.machine
            else:
                for i in rows:
                    holder = meter.fitment_on(held, dates[i])
                    if holder is None:
                        raise _Declined
                    machine_of[i] = holder.machine
        given = columns.get("machine")
        if given is not None and given != machine_of and any(g is not None and g != m for g, m in zip(given, machine_of)):
            raise _Declined
        arrays = self._check_values(columns, serials, {s: models[pumps[s].model] for s in serial_set}, none)
        import numpy as np

        iso_of = {d: d.isoformat() for d in set(dates)}
        isos = list(map(iso_of.__getitem__, dates))
        ordinal = {d: d.toordinal() for d in iso_of}
        day_numbers = np.fromiter(map(ordinal.__getitem__, dates), dtype=np.int64, count=n)
        hours_at = np.array(hours, dtype=float)
        code = {s: k for k, s in enumerate(rows_of)}
        pump = np.fromiter(map(code.__getitem__, serials), dtype=np.int64, count=n)
        order = np.lexsort((hours_at, day_numbers, pump))  # a row twice in the file: equal neighbours
        ps, ds, hs = pump[order], day_numbers[order], hours_at[order]
        if ((ps[1:] == ps[:-1]) & (ds[1:] == ds[:-1]) & (hs[1:] == hs[:-1])).any():
            raise _Declined
        stored = set(self.conn.execute(
            "SELECT serial, taken_on, machine_hours FROM readings WHERE serial IN (SELECT value FROM json_each(?))",
            (json.dumps(sorted(serial_set)),),
        ))
        if any(map(stored.__contains__, zip(serials, isos, hours))):
            raise _Declined  # recorded before (current, corrected or removed; the same or other values or text)
        self._check_meters(machine_of, isos, day_numbers, hours_at)
        arrays["machine_hours"] = hours_at
        texts = [[t or "" for t in columns[name]] if columns.get(name) else [""] * n for name in ("technician", "note")]
        if any(len(t) > 500 or not t.isprintable() for name, column in zip(("technician", "note"), texts)
               if columns.get(name) for t in set(column) if t):
            raise _Declined  # long or unusual text: add_readings words the rule
        values = [serials, isos, machine_of, hours] + [columns.get(name) or none for name in _INPUT[4:16]] + texts
        return _CheckedColumns([], values, 0, arrays=arrays)

    @staticmethod
    def _check_values(columns, serials, model_of, none) -> dict:
        """check_reading_against_model, row by row but without building readings; the value
        columns it read as float arrays (NaN for none), by their input names."""
        if any(v is not None for k in ("nu40_cst", "nu100_cst") for v in columns.get(k) or ()):
            raise _Declined  # a measured viscosity: validate.check_viscosity words its rules row by row
        import numpy as np

        def column(name: str) -> np.ndarray:  # None: NaN
            values = columns.get(name)
            return np.full(len(serials), np.nan) if values is None else np.array(values, dtype=float)

        cd, sp, nd, ot, tp, ts = map(column, ("case_drain", "servo_pressure", "neutral_drift", "oil_temp",
                                               "test_pressure", "test_speed"))
        if (np.isnan(cd) & np.isnan(sp) & np.isnan(nd)).any():
            raise _Declined
        codes = {s: i for i, s in enumerate(model_of)}
        models = list(model_of.values())
        at = np.fromiter(map(codes.__getitem__, serials), dtype=np.int64, count=len(serials))
        displacement, max_speed, rated = (np.array([getattr(m, a) for m in models], dtype=float)[at]
                                          for a in ("displacement_cc", "max_speed_rpm", "rated_pressure_bar"))
        has_cd = ~np.isnan(cd)
        with np.errstate(invalid="ignore"):
            flow = theoretical_flow_lpm(displacement, ts)  # the same product, on arrays
            if (has_cd & (np.isnan(ot) | np.isnan(tp) | np.isnan(ts) | (cd > flow))).any():
                raise _Declined
            if (ts > max_speed * 1.15).any() or (tp > rated * 1.25).any():  # NaN (none) compares False
                raise _Declined
        return {"case_drain": cd, "servo_pressure": sp, "neutral_drift": nd, "oil_temp": ot, "test_pressure": tp,
                "test_speed": ts}

    def _check_meters(self, machine_of: Sequence[str | None], isos: list[str], new_days, new_hours) -> None:
        """Per machine and meter era, every record (stored and new) sorted by date reads
        no fewer hours than the one before: then no new record makes the meter run backwards.
        On arrays: the machines' stored records read in one query, one sort of them all.
        ``new_days``, ``new_hours``: the new rows' day ordinals and hours (arrays)."""
        import numpy as np

        machines = sorted(set(machine_of), key=str)
        code = {m: i for i, m in enumerate(machines)}
        wanted = (json.dumps(machines),) * 4
        stored = self.conn.execute(_METER_POINTS_OF, wanted).fetchall()
        reps = self.conn.execute(
            "SELECT machine, happened_on FROM events WHERE kind = 'meter_replaced' AND removed_reason IS NULL "
            "AND machine IN (SELECT value FROM json_each(?))", wanted[:1]).fetchall()
        texts = [*(r[1] for r in stored), *(r[1] for r in reps)]
        ordinal = {t: date.fromisoformat(t).toordinal() for t in set(texts)}
        days = np.concatenate([new_days, np.fromiter(map(ordinal.__getitem__, texts), dtype=np.int64, count=len(texts))])
        n_points = len(isos) + len(stored)
        m = np.concatenate([np.fromiter(map(code.__getitem__, machine_of), dtype=np.int64, count=len(machine_of)),
                            np.fromiter(map(code.__getitem__, [*(r[0] for r in stored), *(r[0] for r in reps)]),
                                        dtype=np.int64, count=len(texts))])
        h = np.concatenate([new_hours, np.array([np.nan if r[2] is None else r[2] for r in stored], dtype=float)])
        base = int(days.min())
        span = int(days.max()) - base + 2
        key = m * span + (days - base)
        era = np.searchsorted(np.sort(key[n_points:]), key[:n_points], side="right")  # replacements on or before
        order = np.lexsort((h, key[:n_points], era))  # by machine and era (the key leads with the machine), date, hours
        ms, es, hs = m[:n_points][order], era[order], h[order]
        same = (ms[1:] == ms[:-1]) & (es[1:] == es[:-1])
        if (same & ~(hs[:-1] <= hs[1:])).any():
            raise _Declined

    def _write_columns(self, checked: Checked, n: int, source: tuple[str, str] | None,
                       written: list[Written] | None = None) -> None:
        now = self._now_text()
        prior = self.change_count() if written is not None else 0
        import_id = self._record_import("readings", source, n, now) if source else None
        rows = zip(*checked.items, repeat(self.user, n), repeat(now, n), repeat(import_id, n))
        if source is not None:
            self.conn.executemany(_INSERT, rows)
            if written is not None:
                first, last = (self.conn.execute(  # the ends of the import's index entries, not a scan of them
                    f"SELECT id FROM readings WHERE import_id = ? ORDER BY id {way} LIMIT 1", (import_id,)).fetchone()[0]
                    for way in ("ASC", "DESC"))
                if last - first + 1 == n:  # its n rows hold n ids one after the other: given in order
                    written.append(Written(_written_columns(checked.items, first, self.user, now,
                                                            getattr(checked, "arrays", {})), prior,
                                           self.change_count()))
            return
        for row in rows:  # entered by hand (not from a file): one audit row each, as add_readings does
            cur = self.conn.execute(_INSERT, row)
            self._audit("insert", "readings", cur.lastrowid, row[0], None, dict(zip(READING_COLUMNS, row)))


@dataclass(frozen=True)
class Written:
    """Readings an import wrote, as the store holds them (``ReadingColumns``, in the order written),
    and the store's ``change_count`` just before and just after, inside the writing transaction:
    a snapshot read with ``changes_before`` plus these rows is the store after the import."""

    readings: ReadingColumns
    changes_before: int
    changes_after: int


def _written_columns(items: Sequence[list], first_id: int, user: str, now: str,
                     arrays: dict | None = None) -> ReadingColumns:
    """The checked rows (``READING_COLUMNS`` order up to ``note``) as the columns the store reads back;
    ``arrays``: value columns already made float arrays (``_check_values``), by input name."""
    import numpy as np

    n = len(items[0])
    serials, isos, machines, hours = items[:4]
    values = dict(zip(_VALUE_COLUMNS, items[4:16]))
    ordinal = {text: date.fromisoformat(text).toordinal() for text in set(isos)}
    arrays = arrays or {}
    made = {name: arrays[given] for name, given in zip(_VALUE_COLUMNS, _INPUT[4:16]) if given in arrays}
    numbers = {name: made[name] if name in made else np.full(n, np.nan) if values[name].count(None) == n
               else np.array(values[name], dtype=float)
               for name in _VALUE_COLUMNS if name != "iso4406"}  # a column left out of the file: all None
    numbers["machine_hours"] = arrays["machine_hours"] if "machine_hours" in arrays else np.array(hours, dtype=float)
    numbers["superseded_by"] = np.full(n, np.nan)
    texts = {"serial": serials, "machine": machines, "iso4406": values["iso4406"], "technician": items[16],
             "note": items[17], "entered_by": [user] * n, "entered_at": [now] * n, "removed_reason": [None] * n}
    days = np.fromiter(map(ordinal.__getitem__, isos), dtype=np.int64, count=n)
    return ReadingColumns(np.arange(first_id, first_id + n, dtype=np.int64), days, numbers, texts)


#: The value columns of READING_COLUMNS (after machine_hours, up to iso4406), as ReadingColumns names them.
_VALUE_COLUMNS = READING_COLUMNS[4:16]
