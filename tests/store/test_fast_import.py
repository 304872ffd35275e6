"""The column-wise fast lane (Store.add_reading_columns) writes exactly what the
row-by-row add_readings writes, or declines; it never accepts what add_readings rejects,
nor a row that add_readings finds already present (also one corrected or removed since)."""

from __future__ import annotations

import hashlib
import sqlite3
from datetime import date, datetime, timedelta, timezone

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from logbook.imports import _readings_from_columns, import_bytes, read_columns
from logbook.store import Store

from .conftest import MACHINES, MODELS, PUMPS, READINGS, TODAY, load

# (serial, machine) of the conftest fleet; S-300 is on the shelf, S-999 unknown.
PUMP_MACHINE = {"S-100": "M-1", "S-200": "M-2", "S-300": None, "S-999": None}
LAST = {"S-100": (date(2025, 5, 1), 1500.0), "S-200": (date(2025, 3, 1), 5300.0), "S-300": (date(2025, 6, 1), 0.0),
        "S-999": (date(2025, 6, 1), 0.0)}
ROW_COLUMNS = ("case_drain", "servo_pressure", "neutral_drift", "oil_temp", "test_pressure", "test_speed", "machine",
               "technician")
# Rows of READINGS whose stored reading is removed (S-100 in May) or corrected to another day
# (S-200 in March) in the base database: a file repeating them must add nothing.
REMOVED = {"serial": "S-100", "date": date(2025, 5, 1), "machine_hours": 1500.0, "case_drain": 3.6, "servo_pressure": 25.5,
           "neutral_drift": 1.5, "oil_temp": 55.0, "test_pressure": 390.0, "test_speed": 2000.0, "technician": "Ana"}
CORRECTED = {"serial": "S-200", "date": date(2025, 3, 1), "machine_hours": 5300.0, "case_drain": 4.0, "servo_pressure": 27.0,
             "neutral_drift": -2.0, "oil_temp": 48.0, "test_pressure": 400.0, "test_speed": 2000.0, "technician": "Ben"}


def _kept_originals(store: Store) -> None:
    """Remove and correct two readings of the conftest fleet (see REMOVED and CORRECTED)."""
    by_key = {(r.serial, r.taken_on): r.id for r in store.readings()}
    store.remove_reading(by_key["S-100", date(2025, 5, 1)], reason="gauge not bled")
    store.correct_reading(by_key["S-200", date(2025, 3, 1)], taken_on=date(2025, 2, 28), reason="wrong day", today=TODAY)


@st.composite
def batches(draw, kept_originals: bool = False):
    """Mostly clean batches (dates and hours rising per pump), with a chance of each
    kind of trouble: unknown pump, meter backwards, duplicates, limits, a wrong machine;
    with ``kept_originals``, one or both of REMOVED and CORRECTED among the rows."""
    def pick(good, *bad):  # the good value, now and then a bad one
        return draw(st.sampled_from(bad)) if bad and draw(st.integers(0, 24)) == 0 else good

    rows = []
    serials = draw(st.lists(st.sampled_from(["S-100", "S-200"]), min_size=1, max_size=2, unique=True))
    stranger = pick(None, "S-300", "S-999")  # a pump never fitted, or unknown
    for serial in serials + ([stranger] if stranger else []):
        day, hours = LAST[serial]
        for _ in range(draw(st.integers(1, 6))):
            days = draw(st.integers(0, 40))
            day += timedelta(days=days)
            # a clean meter gains at most 24 h a day (logbook check asks about more)
            hours += pick(draw(st.sampled_from([0.0, 10.0, 55.5 if days >= 2 else 10.0])), -30.0, -0.5)
            rows.append({
                "serial": serial, "date": day, "machine_hours": hours,
                "case_drain": draw(st.sampled_from([None, 3.5, 4.0])) if pick(True, False) else 181.0,
                "servo_pressure": pick(draw(st.sampled_from([25.0, 24.0])), None),
                "neutral_drift": draw(st.sampled_from([None, -1.5])),
                "oil_temp": pick(50.0, None), "test_pressure": pick(400.0, 501.0, None),
                "test_speed": pick(2000.0, 2600.0, None),
                "machine": pick(draw(st.sampled_from([None, PUMP_MACHINE[serial]])), "M-2", "M-1"),
            })
    if draw(st.integers(0, 9)) == 0:
        rows.append(dict(rows[0]))  # the same row twice
    if draw(st.integers(0, 9)) == 0:
        rows.append({**dict.fromkeys(ROW_COLUMNS), "serial": "S-100", "date": date(2025, 2, 1), "machine_hours": 1100.0,
                     "case_drain": 3.1, "servo_pressure": 26.0, "neutral_drift": 1.0, "oil_temp": 50.0,
                     "test_pressure": 400.0, "test_speed": 2000.0})  # already recorded (by another technician)
    if kept_originals:  # again, with its own technician or another
        for kept in draw(st.sampled_from([(REMOVED,), (CORRECTED,), (REMOVED, CORRECTED)])):
            rows.insert(draw(st.integers(0, len(rows))),
                        {**dict.fromkeys(ROW_COLUMNS), **kept, "technician": draw(st.sampled_from([kept["technician"], None]))})
    columns = {name: [r.get(name) for r in rows] for name in ("serial", "date", "machine_hours", *ROW_COLUMNS)}
    return columns, list(range(2, len(rows) + 2))


def _content(store: Store) -> list[tuple]:
    return store.conn.execute(
        "SELECT serial, taken_on, machine, machine_hours, case_drain_lpm, servo_pressure_bar, neutral_drift_bar, oil_temp_c, "
        "test_pressure_bar, test_speed_rpm, technician, note, entered_by, import_id IS NOT NULL FROM readings ORDER BY id"
    ).fetchall()


def _both_lanes(tmp_path, strategy, examples: int) -> dict[str, int]:
    """Run generated batches through the fast lane and add_readings, each on its own copy
    of one database (the conftest fleet with a removed and a corrected reading): the fast
    lane declines, writing nothing, or writes what add_readings writes. Counts the cases."""
    base = Store(tmp_path / "base.db", user="tester")
    for table, data in (("models", MODELS), ("machines", MACHINES), ("pumps", PUMPS), ("readings", READINGS)):
        load(base, table, data)
    _kept_originals(base)
    stats = {"cases": 0, "fast": 0, "declined and rejected": 0, "declined but accepted": 0, "kept original present": 0}

    def copy() -> Store:
        s = Store(":memory:", user="tester")
        base.conn.backup(s.conn)
        return s

    @settings(max_examples=examples, deadline=None, suppress_health_check=[HealthCheck.too_slow])
    @given(strategy)
    def check(batch):
        columns, lines = batch
        stats["cases"] += 1
        fast, slow = copy(), copy()
        report = fast.add_reading_columns(columns, lines=lines, today=TODAY, source=("f.csv", "0" * 64))
        reference = slow.add_readings(_readings_from_columns(columns, len(lines)), lines=lines, today=TODAY,
                                      source=("f.csv", "0" * 64))
        stats["kept original present"] += any("not added again" in note for note in reference.flagged)
        if report is None:
            assert _content(fast) == _content(base)  # declining wrote nothing
            stats["declined and rejected" if reference.problems else "declined but accepted"] += 1
        else:
            stats["fast"] += 1
            assert reference.problems == [] and reference.already_present == 0 and reference.flagged == []
            assert report.added == reference.added == len(lines)
            assert _content(fast) == _content(slow)
            assert fast.check() == []
        fast.close()
        slow.close()

    check()
    base.close()
    return stats


def test_fast_lane_writes_what_the_row_by_row_check_writes(tmp_path):
    stats = _both_lanes(tmp_path, batches(), 150)
    print(f"fast-lane cases: {stats}")
    assert stats["fast"] >= 8 and stats["declined and rejected"] >= 8  # both sides exercised


def test_neither_lane_brings_back_a_removed_or_corrected_reading(tmp_path):
    stats = _both_lanes(tmp_path, batches(kept_originals=True), 60)
    print(f"fast-lane cases with kept originals: {stats}")
    # Every batch says its kept originals stay as they are (also one refused for another row).
    assert stats["kept original present"] == stats["cases"] >= 50
    assert stats["declined but accepted"] >= 1  # a batch that imports, less its kept originals


def test_both_lanes_leave_a_removed_or_corrected_reading_as_it_is(tmp_path):
    """A clean file (the fast lane's kind) repeating kept originals next to a new reading:
    the import and the row-by-row path give the same report and the same rows."""
    header = "serial,date,machine_hours,case_drain,servo_pressure,neutral_drift,oil_temp,test_pressure,test_speed,technician"
    cells = [header] + [",".join("" if r.get(c) is None else f"{r[c]:g}" if isinstance(r[c], float) else str(r[c])
                                 for c in header.split(",")) for r in (REMOVED, CORRECTED)]
    data = ("\n".join(cells) + "\nS-100,2025-08-01,1900,,25,,,,,Cy\n").encode()
    stores = []
    for name in ("import", "rows"):
        s = Store(tmp_path / f"{name}.db", user="tester", clock=lambda: datetime(2026, 11, 20, 8, tzinfo=timezone.utc))
        for table, part in (("models", MODELS), ("machines", MACHINES), ("pumps", PUMPS), ("readings", READINGS)):
            load(s, table, part)
        _kept_originals(s)
        stores.append(s)
    via_import = import_bytes(stores[0], "readings", data, name="f.csv", today=TODAY)
    columns, lines = read_columns("readings", data, TODAY)  # a clean file: the fast lane is tried first
    by_rows = stores[1].add_readings(_readings_from_columns(columns, len(lines)), lines=lines, today=TODAY,
                                     source=("f.csv", hashlib.sha256(data).hexdigest()))
    assert (via_import.added, via_import.already_present, via_import.problems) == (1, 2, [])
    assert via_import.flagged == by_rows.flagged == [
        "line 2: already present (removed on 2026-11-20) - not added again",
        "line 3: already present (corrected on 2026-11-20) - not added again",
    ]
    assert (by_rows.added, by_rows.already_present, by_rows.problems) == (1, 2, [])
    assert _content(stores[0]) == _content(stores[1])
    for s in stores:
        s.close()


def test_fast_lane_declines_when_it_would_need_a_message(store):
    day = date(2025, 8, 1)
    bad = {"serial": ["S-100"], "date": [day], "machine_hours": [1000.0], "servo_pressure": [25.0]}  # meter backwards
    before = store.counts()
    assert store.add_reading_columns(bad, lines=[2], today=TODAY) is None
    assert store.counts() == before
    good = {**bad, "machine_hours": [1900.0]}
    assert store.add_reading_columns(good, lines=[2], today=TODAY).added == 1
    # Entered without a source file: one audit row per reading, as add_readings does.
    assert store.audit_trail("S-100")[-1]["action"] == "insert"
    assert isinstance(store.conn, sqlite3.Connection)


def test_one_reading_meter_check_by_sql_matches_the_timeline(store):
    """Store._meter_neighbours (SQL, for one new reading) answers what
    MeterTimeline.neighbours answers over the machine's whole history."""
    count = 0
    days = st.integers(0, 90).map(lambda d: date(2025, 1, 1) + timedelta(days=d))

    @settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])
    @given(st.lists(st.tuples(days, st.integers(900, 1300).map(float)), max_size=12, unique=True), st.lists(days, max_size=2),
           st.lists(st.tuples(days, st.integers(900, 1300).map(float)), max_size=3), days)
    def check(readings, replacements, events, on):
        nonlocal count
        count += 1
        store.conn.execute("BEGIN")
        try:
            stored = {(r.taken_on, r.machine_hours) for r in store.readings("S-100")}
            for day, hours in readings:
                if (day, hours) in stored:
                    continue  # the fixture's own reading: already there (and unique)
                store.conn.execute(
                    "INSERT INTO readings (serial, taken_on, machine, machine_hours, servo_pressure_bar, entered_by, entered_at) "
                    "VALUES ('S-100', ?, 'M-1', ?, 25, 't', 't')", (day.isoformat(), hours))
            for day in replacements:
                store.conn.execute("INSERT INTO events (kind, happened_on, machine, hours, to_hours, entered_by, entered_at) "
                                   "VALUES ('meter_replaced', ?, 'M-1', 2000, 0, 't', 't')", (day.isoformat(),))
            for day, hours in events:
                store.conn.execute("INSERT INTO events (kind, happened_on, serial, machine, hours, entered_by, entered_at) "
                                   "VALUES ('oil_change', ?, 'S-100', 'M-1', ?, 't', 't')", (day.isoformat(), hours))
            assert store._meter_neighbours("M-1", on) == store._timeline("M-1").neighbours(on)
        finally:
            store.conn.execute("ROLLBACK")

    check()
    print(f"meter-by-SQL cases: {count}")
    assert count >= 100
