"""What a check reads about hour meters and fitments: every hour-meter record of a
machine (readings, events, fitments; one meter era at a time), a pump's fitments, the
meter replacements of every machine."""

from __future__ import annotations

import json
from collections import defaultdict
from datetime import date
from typing import Sequence

from logbook import meter
from logbook.model import Event, EventKind, Fitment, Pump
from logbook.store.base import StorePart
from logbook.store.reads import fitment_from_row

# Every hour-meter record of one machine (the same sources as MetersMixin._timeline),
# limited to one meter era; parameters: machine, json list of reading ids to leave out,
# machine x3, era start, era end, then the day for the caller's WHERE.
_METER_POINTS = """
    SELECT * FROM (
        SELECT taken_on AS on_day, machine_hours AS hours FROM readings
         WHERE machine = ? AND superseded_by IS NULL AND removed_reason IS NULL
           AND id NOT IN (SELECT value FROM json_each(?))
        UNION ALL
        SELECT happened_on, hours FROM events
         WHERE machine = ? AND hours IS NOT NULL AND kind != 'meter_replaced' AND removed_reason IS NULL
        UNION ALL
        SELECT happened_on, to_hours FROM events
         WHERE to_machine = ? AND to_hours IS NOT NULL AND kind = 'move' AND removed_reason IS NULL
        UNION ALL
        SELECT fitted_on, machine_hours_at_fit FROM fitments WHERE machine = ?
    ) WHERE on_day >= ? AND on_day < ? AND """


class MetersMixin(StorePart):
    """Hour-meter timelines and fitments, as the checks of readings, events and pumps need them."""

    def _timeline(self, machine: str, *, without_readings: Sequence[int] = ()) -> meter.MeterTimeline:
        """Every hour-meter record of a machine (current readings, events, fitments),
        leaving out the readings ``without_readings`` (one being corrected)."""
        reps = [
            date.fromisoformat(r[0])
            for r in self.conn.execute(
                "SELECT happened_on FROM events WHERE kind = 'meter_replaced' AND machine = ? AND removed_reason IS NULL",
                (machine,),
            )
        ]
        tl = meter.MeterTimeline(reps)
        skip = set(without_readings)
        for rid, on, hours in self.conn.execute(
            "SELECT id, taken_on, machine_hours FROM readings WHERE machine = ? AND superseded_by IS NULL "
            "AND removed_reason IS NULL",
            (machine,),
        ):
            if rid not in skip:
                tl.add(date.fromisoformat(on), hours)
        for on, hours in self.conn.execute(
            "SELECT happened_on, hours FROM events WHERE machine = ? AND hours IS NOT NULL AND kind != 'meter_replaced' "
            "AND removed_reason IS NULL",
            (machine,),
        ):
            tl.add(date.fromisoformat(on), hours)
        for on, hours in self.conn.execute(
            "SELECT happened_on, to_hours FROM events WHERE to_machine = ? AND to_hours IS NOT NULL AND kind = 'move' "
            "AND removed_reason IS NULL",
            (machine,),
        ):
            tl.add(date.fromisoformat(on), hours)
        for on, hours in self.conn.execute(
            "SELECT fitted_on, machine_hours_at_fit FROM fitments WHERE machine = ?", (machine,)
        ):
            tl.add(date.fromisoformat(on), hours)
        return tl

    def _meter_neighbours(
        self, machine: str, on: date, *, without_readings: Sequence[int] = ()
    ) -> tuple[tuple[date, float] | None, tuple[date, float] | None]:
        """``self._timeline(machine).neighbours(on)`` answered by SQL, for one new record:
        no need to load the machine's whole history."""
        reps = sorted(
            r[0] for r in self.conn.execute(
                "SELECT happened_on FROM events WHERE kind = 'meter_replaced' AND machine = ? AND removed_reason IS NULL",
                (machine,),
            )
        )
        day = on.isoformat()
        start = max((d for d in reps if d <= day), default="0000-00-00")
        end = min((d for d in reps if d > day), default="9999-99-99")
        params = (machine, json.dumps(list(without_readings)), machine, machine, machine, start, end, day)
        earlier = self.conn.execute(_METER_POINTS + "on_day < ? ORDER BY hours DESC, on_day LIMIT 1", params).fetchone()
        later = self.conn.execute(_METER_POINTS + "on_day > ? ORDER BY hours ASC, on_day LIMIT 1", params).fetchone()
        return (
            (date.fromisoformat(earlier[0]), earlier[1]) if earlier else None,
            (date.fromisoformat(later[0]), later[1]) if later else None,
        )

    def _fitments_of(self, serial: str) -> list[Fitment]:
        return [
            fitment_from_row(dict(zip([c[0] for c in cur.description], row)))
            for cur in [self.conn.execute("SELECT * FROM fitments WHERE serial = ? ORDER BY fitted_on, id", (serial,))]
            for row in cur.fetchall()
        ]

    def _all_fitments(self) -> dict[str, list[Fitment]]:
        by_serial: dict[str, list[Fitment]] = defaultdict(list)
        for f in self.fitments():
            by_serial[f.serial].append(f)
        return by_serial

    #: Up to this many records, a check reads only the pumps it is about (one save of a
    #: reading reads its pump and machine, not the fleet: issue 14, bench_record.py).
    FEW = 20

    def _pumps_and_fitments(self, serials) -> tuple[dict, dict[str, list[Fitment]]]:
        """The pumps and fitments a check needs: of ``serials`` only, for a few records."""
        wanted = sorted(set(serials))
        if len(wanted) > self.FEW:
            return self.pumps(), self._all_fitments()
        pumps, fits = {}, defaultdict(list)
        for serial in wanted:
            row = self.conn.execute("SELECT serial, model, note FROM pumps WHERE serial = ?", (serial,)).fetchone()
            if row is not None:
                pumps[row[0]] = Pump(row[0], row[1], row[2])
                fits[serial] = self._fitments_of(serial)
        return pumps, fits

    def _replacements(self) -> dict[str, list[Event]]:
        by_machine: dict[str, list[Event]] = defaultdict(list)
        for e in self.events():
            if e.kind is EventKind.METER_REPLACED and e.machine is not None:  # a replacement names its machine
                by_machine[e.machine].append(e)
        return by_machine
