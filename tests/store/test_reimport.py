"""Re-imports never undo or silently drop what users did.

A row of a file whose identity (readings: serial, date, hour meter and measured
values; events: kind, date, pump or machine, hour meter and where a move went) matches
a stored record is "already present" and never written again, also when that record
was later corrected or removed; a difference in the free text (technician, note) is
reported line by line and nothing stored changes.
"""

from __future__ import annotations

import dataclasses
from datetime import datetime, timezone

import pytest

from logbook.cli import main
from logbook.model import InputRejected
from logbook.imports import import_bytes

from .conftest import MODELS, READINGS, TODAY

EVENTS = (
    b"date,kind,serial,hours,to_machine,to_position,to_hours,technician,note\n"
    b"2025-06-01,oil_change,S-100,1700,,,,Ana,VG 46 refill\n"
    b"2025-07-01,overhaul,S-200,5650,,,,Ben,rebuilt in place\n"
)


def _imp(store, table, data, **kw):
    return import_bytes(store, table, data, name=f"{table}.csv", today=TODAY, **kw)


def _on(store, day: str) -> None:
    """Let the store's clock stand at 08:00 UTC of ``day`` (the date in the messages)."""
    store.clock = lambda: datetime.fromisoformat(day).replace(hour=8, tzinfo=timezone.utc)


def _rows(store, table: str) -> list[tuple]:
    return store.conn.execute(f"SELECT * FROM {table} ORDER BY id").fetchall()


def test_a_removed_reading_stays_removed_when_its_file_is_imported_again(store):
    r = store.readings("S-100")[0]  # line 2 of READINGS
    _on(store, "2026-11-20")
    store.remove_reading(r.id, reason="gauge not bled")
    before = _rows(store, "readings")
    report = _imp(store, "readings", READINGS)
    assert (report.added, report.already_present, report.problems) == (0, 3, [])
    assert report.flagged == ["line 2: already present (removed on 2026-11-20) - not added again"]
    assert _rows(store, "readings") == before
    assert r.id not in {x.id for x in store.readings("S-100")}


def test_after_a_correction_the_original_file_imports_as_already_present(store):
    first, may = store.readings("S-100")
    _on(store, "2026-11-21")
    store.correct_reading(first.id, servo_pressure_bar=24.0, reason="gauge misread", today=TODAY)  # same key
    store.correct_reading(may.id, machine_hours=1510.0, reason="meter misread", today=TODAY)  # key changed
    before = _rows(store, "readings")
    report = _imp(store, "readings", READINGS)
    assert report.problems == [] and (report.added, report.already_present) == (0, 3)
    assert report.flagged == [
        "line 2: already present (corrected on 2026-11-21) - not added again",
        "line 3: already present (corrected on 2026-11-21) - not added again",
    ]
    assert _rows(store, "readings") == before
    assert [x.servo_pressure_bar for x in store.readings("S-100")] == [24.0, 25.5]


def test_a_reading_whose_text_differs_is_reported_and_left_as_stored(store):
    lines = READINGS.decode().splitlines()
    data = "\n".join([
        lines[0] + ",note",
        lines[1].replace("Ana", "A. Ana") + ",",  # the technician written otherwise
        lines[2] + ",hose re-routed",  # a note the stored reading has not
        lines[3] + ",",
    ]).encode()
    before = _rows(store, "readings")
    report = _imp(store, "readings", data)
    assert (report.added, report.already_present, report.problems) == (0, 3, [])
    assert report.flagged == [
        "line 2: already present; technician differs: stored 'Ana', file 'A. Ana' - not changed",
        "line 3: already present; note differs: stored '', file 'hose re-routed' - not changed",
    ]
    assert _rows(store, "readings") == before


def test_an_event_whose_text_differs_is_reported_and_left_as_stored(store):
    assert _imp(store, "events", EVENTS).added == 2
    before = _rows(store, "events")
    report = _imp(store, "events", EVENTS.replace(b"Ben,rebuilt", b"B. Ben,rebuilt"))
    assert (report.added, report.already_present, report.problems) == (0, 2, [])
    assert report.flagged == ["line 3: already present; technician differs: stored 'Ben', file 'B. Ben' - not changed"]
    assert _rows(store, "events") == before


def test_a_removed_event_stays_removed_when_its_file_is_imported_again(store):
    assert _imp(store, "events", EVENTS).added == 2
    oil = store.events("S-100")[0]
    _on(store, "2026-11-22")
    store.remove_event(oil.id, reason="entered on the wrong pump")
    before = _rows(store, "events")
    report = _imp(store, "events", EVENTS)
    assert (report.added, report.already_present, report.problems) == (0, 2, [])
    assert report.flagged == ["line 2: already present (removed on 2026-11-22) - not added again"]
    assert _rows(store, "events") == before
    assert store.events("S-100") == []


def test_a_removed_move_stays_removed(store):
    move = b"date,kind,serial,hours,to_machine,to_position,to_hours\n2025-06-01,move,S-100,1700,M-2,swing,5600\n"
    assert _imp(store, "events", move).added == 1
    _on(store, "2026-11-23")
    store.remove_event(store.events("S-100")[0].id, reason="never moved")
    before = _rows(store, "events"), _rows(store, "fitments")
    report = _imp(store, "events", move)
    assert (report.added, report.already_present, report.problems) == (0, 1, [])
    assert report.flagged == ["line 2: already present (removed on 2026-11-23) - not added again"]
    assert (_rows(store, "events"), _rows(store, "fitments")) == before


def test_a_move_recorded_with_another_destination_is_refused_not_dropped(store):
    move = b"date,kind,serial,hours,to_machine,to_position,to_hours\n2025-06-01,move,S-100,1700,M-2,swing,5600\n"
    assert _imp(store, "events", move).added == 1
    before = _rows(store, "events")
    report = _imp(store, "events", move.replace(b"5600", b"5650"))
    assert report.added == 0 and [(p.line, p.field) for p in report.problems] == [(2, "to_hours")]
    assert "5600" in report.problems[0].allowed and "logbook remove event" in report.problems[0].allowed
    assert _rows(store, "events") == before


def test_a_changed_model_points_to_the_commands_that_exist(store):
    changed = MODELS.replace(b",10,18,10\n", b",9.5,18,10\n")  # the case drain limit
    report = _imp(store, "models", changed)
    assert report.added == 0 and len(report.problems) == 1
    text = report.problems[0].allowed
    assert "logbook model TX-90 --limit case_drain=9.5lpm" in text and "model set" not in text
    assert "case_drain_limit: stored 10, file 9.5" in text
    # The command it names is a real one and does what the message says.
    assert main(["--db", store.path, "model", "TX-90", "--limit", "case_drain=9.5lpm"]) == 0
    assert _imp(store, "models", changed).already_present == 1


def test_an_events_file_with_a_move_imports_again_as_already_present(store):
    data = (
        b"date,kind,serial,hours,to_machine,to_position,to_hours,note\n"
        b"2025-06-01,move,S-100,1700,M-2,swing,5600,\n"
        b"2025-07-01,overhaul,S-200,5650,,,,rebuilt in place\n"
    )
    assert _imp(store, "events", data).added == 2
    before = _rows(store, "events"), _rows(store, "fitments")
    report = _imp(store, "events", data)
    assert (report.added, report.already_present, report.problems, report.flagged) == (0, 2, [], [])
    assert (_rows(store, "events"), _rows(store, "fitments")) == before


def test_a_reading_typed_again_with_other_text_says_what_differs(store):
    r = store.readings("S-200")[0]
    again = dataclasses.replace(r, id=None, machine=None, entered_by="", entered_at=None, technician="B. Ben")
    with pytest.raises(InputRejected, match=rf"technician differs: stored 'Ben', given 'B. Ben'.*`logbook correct {r.id}`"):
        store.add_reading(again, today=TODAY)
    assert store.readings("S-200") == [r]


def test_a_removed_record_may_be_typed_in_again_on_purpose(store):
    """Only a file is kept from undoing a removal: a person entering the record again means it."""
    r = store.readings("S-200")[0]
    store.remove_reading(r.id, reason="removed by mistake")
    again = store.add_reading(dataclasses.replace(r, id=None, machine=None, entered_by="", entered_at=None), today=TODAY)
    assert again.id != r.id and [x.id for x in store.readings("S-200")] == [again.id]
    assert _imp(store, "events", EVENTS).added == 2
    oil = store.events("S-100")[0]
    store.remove_event(oil.id, reason="removed by mistake")
    back = store.add_event(dataclasses.replace(oil, id=None, removed_reason=None, entered_by="", entered_at=None), today=TODAY)
    assert back.id != oil.id and [e.id for e in store.events("S-100")] == [back.id]
