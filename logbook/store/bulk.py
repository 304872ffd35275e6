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

import bisect
import json
from collections import defaultdict
from datetime import date
from itertools import islice, repeat
from operator import itemgetter, le
from typing import Sequence

from logbook import meter
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
_ALL_METER_POINTS = """
    SELECT taken_on, machine_hours FROM readings WHERE machine = ? AND superseded_by IS NULL AND removed_reason IS NULL
    UNION ALL
    SELECT happened_on, hours FROM events
     WHERE machine = ? AND hours IS NOT NULL AND kind != 'meter_replaced' AND removed_reason IS NULL
    UNION ALL
    SELECT happened_on, to_hours FROM events WHERE to_machine = ? AND to_hours IS NOT NULL AND kind = 'move' AND removed_reason IS NULL
    UNION ALL
    SELECT fitted_on, machine_hours_at_fit FROM fitments WHERE machine = ?
"""


class _Declined(Exception):
    """The batch needs the row-by-row check."""


class BulkMixin(StorePart):
    """add_reading_columns: add_readings for column batches, or None to fall back."""

    def add_reading_columns(
        self, columns: dict[str, list], *, today: date, lines: Sequence[int], dry_run: bool = False,
        source: tuple[str, str] | None = None,
    ) -> ImportReport | None:
        n = len(lines)
        try:
            self._check_then_write(
                lambda: self._check_columns(columns, n, today), lambda c: self._write_columns(c, n, source), dry_run=dry_run
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
        rows_of = defaultdict(list)
        for i, s in enumerate(serials):
            rows_of[s].append(i)
        machine_of: list[str | None] = [None] * n  # every row gets its machine, or the batch is declined
        for s, rows in rows_of.items():
            held = fits.get(s, [])
            if len(held) == 1:  # the common case: one fitment covers every row of the pump
                f = held[0]
                days = [dates[i] for i in rows]
                if min(days) < f.fitted_on or (f.removed_on is not None and max(days) > f.removed_on):
                    raise _Declined
                for i in rows:
                    machine_of[i] = f.machine
            else:
                for i in rows:
                    holder = meter.fitment_on(held, dates[i])
                    if holder is None:
                        raise _Declined
                    machine_of[i] = holder.machine
        given = columns.get("machine")
        if given is not None and any(g is not None and g != m for g, m in zip(given, machine_of)):
            raise _Declined
        self._check_values(columns, serials, {s: models[pumps[s].model] for s in serial_set}, none)
        iso_of = {d: d.isoformat() for d in set(dates)}
        isos = list(map(iso_of.__getitem__, dates))
        keys = set(zip(serials, isos, hours))
        if len(keys) != n:
            raise _Declined  # a row twice in the file
        for row in self.conn.execute(
            "SELECT serial, taken_on, machine_hours FROM readings WHERE serial IN (SELECT value FROM json_each(?))",
            (json.dumps(sorted(serial_set)),),
        ):
            if row in keys:
                raise _Declined  # recorded before (current, corrected or removed; the same or other values or text)
        self._check_meters(machine_of, isos, hours)
        texts = [[t or "" for t in columns.get(name) or none] for name in ("technician", "note")]
        if any(len(t) > 500 or not t.isprintable() for t in texts[0] + texts[1] if t):
            raise _Declined  # long or unusual text: add_readings words the rule
        values = [serials, isos, machine_of, hours] + [columns.get(name) or none for name in _INPUT[4:16]] + texts
        return Checked([], values, 0)

    @staticmethod
    def _check_values(columns, serials, model_of, none) -> None:
        """check_reading_against_model, row by row but without building readings."""
        if any(v is not None for k in ("nu40_cst", "nu100_cst") for v in columns.get(k) or ()):
            raise _Declined  # a measured viscosity: validate.check_viscosity words its rules row by row
        cd, sp, nd = (columns.get(k) or none for k in ("case_drain", "servo_pressure", "neutral_drift"))
        ot, tp, ts = (columns.get(k) or none for k in ("oil_temp", "test_pressure", "test_speed"))
        for s, c, p, d, t, pressure, speed in zip(serials, cd, sp, nd, ot, tp, ts):
            m = model_of[s]
            if c is None and p is None and d is None:
                raise _Declined
            if c is not None and (t is None or pressure is None or speed is None
                                  or c > theoretical_flow_lpm(m.displacement_cc, speed)):
                raise _Declined
            if speed is not None and speed > m.max_speed_rpm * 1.15:
                raise _Declined
            if pressure is not None and pressure > m.rated_pressure_bar * 1.25:
                raise _Declined

    def _check_meters(self, machine_of: Sequence[str | None], isos: list[str], hours: list[float]) -> None:
        """Per machine and meter era, every record (stored and new) sorted by date reads
        no fewer hours than the one before: then no new record makes the meter run backwards."""
        new_points: defaultdict[str | None, list[tuple[str, float]]] = defaultdict(list)
        for m, day, h in zip(machine_of, isos, hours):
            new_points[m].append((day, h))
        for machine, points in new_points.items():
            points += self.conn.execute(_ALL_METER_POINTS, (machine, machine, machine, machine)).fetchall()
            reps = sorted(r[0] for r in self.conn.execute(
                "SELECT happened_on FROM events WHERE kind = 'meter_replaced' AND machine = ? AND removed_reason IS NULL",
                (machine,)))
            eras = defaultdict(list)
            if reps:
                for p in points:
                    eras[bisect.bisect_right(reps, p[0])].append(p)
            else:
                eras[0] = points
            for era in eras.values():
                era.sort()
                readings = list(map(itemgetter(1), era))
                if not all(map(le, readings, islice(readings, 1, None))):
                    raise _Declined

    def _write_columns(self, checked: Checked, n: int, source: tuple[str, str] | None) -> None:
        now = self._now_text()
        import_id = self._record_import("readings", source, n, now) if source else None
        rows = zip(*checked.items, repeat(self.user, n), repeat(now, n), repeat(import_id, n))
        if source is not None:
            self.conn.executemany(_INSERT, rows)
            return
        for row in rows:  # entered by hand (not from a file): one audit row each, as add_readings does
            cur = self.conn.execute(_INSERT, row)
            self._audit("insert", "readings", cur.lastrowid, row[0], None, dict(zip(READING_COLUMNS, row)))
