"""Corrections and removals keep the original; every change is in the pump's trail."""

from __future__ import annotations

import sqlite3
from datetime import date

import pytest

from logbook.cli import main
from logbook.model import Event, EventKind, InputRejected, Kind, Reading
from logbook.store import Store
from logbook.store.schema import MIGRATIONS, SCHEMA_VERSION

from .conftest import MACHINES, MODELS, PUMPS, READINGS, TODAY, load


def _state(store):
    return store.counts(), len(store.audit_trail())


def test_a_correction_keeps_the_original_and_both_appear_in_history(store):
    first = store.readings("S-100")[0]
    new = store.correct_reading(first.id, servo_pressure_bar=24.0, reason="gauge misread", today=TODAY)
    # The original row is untouched except for the pointer to its correction.
    old = store.reading(first.id)
    assert old.servo_pressure_bar == 26.0 and old.superseded_by == new.id
    assert new.servo_pressure_bar == 24.0 and new.taken_on == first.taken_on and new.entered_by == "tester"
    # Trends and the fleet see only the correction; the pump view with all readings sees both.
    assert [r.id for r in store.readings("S-100")] == [new.id, store.readings("S-100")[1].id]
    assert first.id not in {r.id for r in store.fleet().history("S-100").readings}
    assert {first.id, new.id} <= {r.id for r in store.readings("S-100", include_superseded=True)}
    trail = store.pump_trail("S-100")
    fix = [e for e in trail if e.action == "correct"]
    assert len(fix) == 1 and fix[0].who == "tester" and fix[0].reason == "gauge misread"
    assert fix[0].before["id"] == first.id and fix[0].before["servo_pressure_bar"] == 26.0
    assert fix[0].after["id"] == new.id and fix[0].after["servo_pressure_bar"] == 24.0
    # The imported original shows through its import (file name and sha256).
    imports = [e for e in trail if e.action == "import"]
    assert imports and imports[0].after["file"] == "readings.csv" and len(imports[0].after["sha256"]) == 64


def test_correction_is_checked_like_a_new_reading_without_the_old_one(store):
    may = store.readings("S-100")[1]  # 1500 h on 2025-05-01, after 1100 h on 2025-02-01
    # Moving it to June with 1450 h is fine once the old 1500 h reading is left out.
    new = store.correct_reading(may.id, taken_on=date(2025, 6, 1), machine_hours=1450.0, reason="wrong date", today=TODAY)
    assert (new.taken_on, new.machine_hours) == (date(2025, 6, 1), 1450.0)
    before = _state(store)
    with pytest.raises(InputRejected, match="runs backwards"):
        store.correct_reading(new.id, machine_hours=1000.0, reason="x", today=TODAY)  # below 1100 h in February
    with pytest.raises(InputRejected, match="already corrected"):
        store.correct_reading(may.id, servo_pressure_bar=20.0, reason="x", today=TODAY)
    with pytest.raises(InputRejected, match="reason"):
        store.correct_reading(new.id, servo_pressure_bar=20.0, reason="  ", today=TODAY)
    with pytest.raises(InputRejected, match="cannot be corrected"):
        store.correct_reading(new.id, serial="S-200", reason="x", today=TODAY)
    with pytest.raises(InputRejected, match="change nothing"):
        store.correct_reading(new.id, machine_hours=1450.0, reason="x", today=TODAY)
    with pytest.raises(InputRejected, match="not a known reading"):
        store.correct_reading(9999, machine_hours=1450.0, reason="x", today=TODAY)
    assert _state(store) == before


def test_removed_reading_leaves_trends_and_can_be_entered_again(store):
    r = store.readings("S-200")[0]
    removed = store.remove_reading(r.id, reason="belongs to another pump")
    assert removed.removed_reason == "belongs to another pump" and store.readings("S-200") == []
    assert store.fleet().history("S-200").readings == ()
    shown = store.readings("S-200", include_superseded=True)
    assert [x.id for x in shown] == [r.id] and shown[0].removed_reason
    with pytest.raises(InputRejected, match="was removed"):
        store.correct_reading(r.id, servo_pressure_bar=20.0, reason="x", today=TODAY)
    # The same natural key may be recorded again: the removed row no longer counts.
    again = store.add_reading(Reading(id=None, serial="S-200", taken_on=r.taken_on, machine_hours=r.machine_hours,
                                      servo_pressure_bar=25.0), today=TODAY)
    assert again.id != r.id
    entry = [e for e in store.pump_trail("S-200") if e.action == "remove"][0]
    assert entry.before["removed_reason"] is None and entry.after["removed_reason"] == "belongs to another pump"


def _move(store, day=date(2025, 6, 1)):
    return store.add_event(Event(id=None, kind=EventKind.MOVE, happened_on=day, serial="S-100", hours=1700,
                                 to_machine="M-2", to_position="swing", to_hours=5600), today=TODAY)


def test_removing_a_move_restores_the_fitment_unless_later_records_depend_on_it(store):
    move = _move(store)
    r = store.add_reading(Reading(id=None, serial="S-100", taken_on=date(2025, 7, 1), machine_hours=5700,
                                  servo_pressure_bar=25.0), today=TODAY)
    before = _state(store)
    with pytest.raises(InputRejected, match=rf"later records depend on: reading\(s\) {r.id}"):
        store.remove_event(move.id, reason="entered by mistake")
    assert _state(store) == before
    store.remove_reading(r.id, reason="taken on the wrong pump")
    store.remove_event(move.id, reason="entered by mistake")
    fits = store.fitments(serial="S-100")
    assert [(f.machine, f.removed_on, f.machine_hours_at_removal) for f in fits] == [("M-1", None, None)]
    assert store.events() == [] and store.events(include_removed=True)[0].removed_reason == "entered by mistake"
    actions = [(e.action, e.table) for e in store.pump_trail("S-100")][-3:]
    assert actions == [("remove", "fitments"), ("update", "fitments"), ("remove", "events")]
    assert store.check() == []
    # The pump can be moved again the same way.
    assert _move(store).id != move.id


def test_removing_a_meter_replacement_is_refused_while_new_meter_readings_exist(store):
    rep = store.add_event(Event(id=None, kind=EventKind.METER_REPLACED, happened_on=date(2025, 6, 1), machine="M-1",
                                hours=1600, to_hours=0), today=TODAY)
    r = store.add_reading(Reading(id=None, serial="S-100", taken_on=date(2025, 7, 1), machine_hours=200,
                                  servo_pressure_bar=25.0), today=TODAY)
    with pytest.raises(InputRejected, match="new hour meter"):
        store.remove_event(rep.id, reason="x")
    store.remove_reading(r.id, reason="x")
    assert store.remove_event(rep.id, reason="wrong machine").removed_reason == "wrong machine"


def test_limit_changes_are_audited_with_before_and_after(store):
    store.set_limit("TX-90", Kind.CASE_DRAIN, 9.0)
    entry = [e for e in store.pump_trail("S-100") if e.table == "limits"][-1]
    assert entry.before["case_drain"]["value"] == 10.0 and entry.after["case_drain"]["value"] == 9.0


def test_a_version_1_database_is_migrated_forward_with_its_data(tmp_path):
    path = tmp_path / "v1.db"
    conn = sqlite3.connect(path)
    conn.executescript(";\n".join(MIGRATIONS[0]) + "; PRAGMA user_version = 1;")
    conn.execute("INSERT INTO models VALUES ('M1','',90,400,2200,50,400,46,100,2000,40,60,NULL,NULL)")
    conn.commit()
    conn.close()
    with Store(path) as s:
        assert s.schema_version() == SCHEMA_VERSION >= 3
        assert list(s.models()) == ["M1"]
        cols = {r[1] for r in s.conn.execute("PRAGMA table_info(readings)")}
        assert "removed_reason" in cols
        assert s.costs().models == {}  # migration 3: the costs and settings tables


def test_cli_correct_remove_history_and_who(tmp_path, capsys):
    db = tmp_path / "c.db"
    s = Store(db, user="ana")
    for table, data in (("models", MODELS), ("machines", MACHINES), ("pumps", PUMPS), ("readings", READINGS)):
        load(s, table, data)
    rid = s.readings("S-100")[0].id
    s.close()
    base = ["--db", str(db), "--today", TODAY.isoformat()]
    assert main([*base, "--as", "Ben Okafor", "correct", str(rid), "--servo-pressure", "350psi", "--reason", "unit slip"]) == 0
    assert main([*base, "correct", str(rid), "--servo-pressure", "abc", "--reason", "x"]) == 2
    err = capsys.readouterr().err
    assert "servo_pressure = 'abc'" in err and "Traceback" not in err
    assert main([*base, "remove", "reading", "9999", "--reason", "x"]) == 2
    assert main([*base, "history", "S-100"]) == 0
    out = capsys.readouterr().out
    assert "Ben Okafor" in out and "unit slip" in out and "readings.csv" in out
    with Store(db) as s:
        fixed = s.readings("S-100")[0]
        # 350 psi = 24.13 bar (1 psi = 6894.757 Pa, NIST SP 811)
        assert fixed.servo_pressure_bar == pytest.approx(350 * 6894.757293168361 / 1e5)
        assert s.pump_trail("S-100")[-1].who == "Ben Okafor"


def test_an_imported_event_file_is_one_audit_row_and_one_history_line(store):
    from logbook.imports import import_bytes

    data = b"date,kind,serial,hours,note\n2025-06-01,neutral_reset,S-100,1700,re-set\n2025-07-01,oil_change,S-100,1800,\n"
    assert import_bytes(store, "events", data, name="events.csv", today=TODAY).added == 2
    rows = [a for a in store.audit_trail() if a["table_name"] == "events"]
    assert [a["action"] for a in rows] == ["import"]
    lines = [e for e in store.pump_trail("S-100") if e.table == "events"]
    assert [(e.action, e.after["file"], e.after["events of this pump"]) for e in lines] == [("import", "events.csv", 2)]
