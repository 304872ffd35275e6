"""CSV import: units in headers, all-or-nothing, line numbers, dry run, re-import."""

from __future__ import annotations

import pytest

from logbook.imports import import_bytes

from .conftest import TODAY


def _imp(store, table, data, **kw):
    return import_bytes(store, table, data, name="f.csv", today=TODAY, **kw)


def test_units_in_headers_are_converted(store):
    data = (
        b"serial,date,machine_hours,case_drain [gpm],servo_pressure [psi],oil_temp [F],test_pressure [psi],test_speed\n"
        b"S-200,2025-06-01,5700,1.0,400,122,5800,2000\n"
    )
    report = _imp(store, "readings", data)
    assert report.problems == [] and report.added == 1
    r = store.readings("S-200")[-1]
    # 1 US gal = 3.785411784 L (NIST SP 811); 1 psi = 6894.757293168361 Pa; 122 F = 50 C.
    assert r.case_drain_lpm == pytest.approx(3.785411784)
    assert r.servo_pressure_bar == pytest.approx(400 * 6894.757293168361 / 1e5)
    assert r.oil_temp_c == pytest.approx(50.0)


def test_one_bad_row_rejects_the_file_and_names_line_and_field(store):
    before = store.counts()["readings"]
    data = (
        b"serial,date,machine_hours,servo_pressure\n"
        b"S-200,2025-06-01,5700,25\n"
        b"S-200,2025-07-01,5800,abc\n"
        b"S-200,2025-08-01,5900,24\n"
        b"S-999,2025-08-01,5900,24\n"
    )
    report = _imp(store, "readings", data)
    assert report.added == 0
    assert [(p.line, p.field) for p in report.problems] == [(3, "servo_pressure"), (5, "serial")]
    assert store.counts()["readings"] == before


def test_dry_run_writes_nothing(store):
    before = store.counts()["readings"]
    report = _imp(store, "readings", b"serial,date,machine_hours,servo_pressure\nS-200,2025-06-01,5700,25\n", dry_run=True)
    assert report.added == 1 and report.dry_run and report.problems == []
    assert store.counts()["readings"] == before


@pytest.mark.parametrize(
    "data,field",
    [
        (b"", "file"),
        (b"\xff\xfeS\x00", "file"),
        (b"serial,date\nS-200,2025-06-01\n", "header"),  # machine_hours missing
        (b"serial,date,machine_hours,colour\nS-200,2025-06-01,5700,red\n", "header"),
        (b"serial,date,machine_hours,servo_pressure [kPa]\nS-200,2025-06-01,5700,25\n", "header"),
        (b"serial,date,machine_hours,servo_pressure\nS-200,01/06/2025,5700,25\n", "date"),
        (b"serial,date,machine_hours,servo_pressure\nS-200,2025-06-01,5700\n", "row"),
    ],
)
def test_malformed_files_are_explained(store, data, field):
    before = store.counts()
    report = _imp(store, "readings", data)
    assert report.added == 0 and report.problems and report.problems[0].field == field
    assert store.counts() == before


def test_bom_is_accepted_and_blank_rows_are_counted(store):
    data = "\ufeffserial,date,machine_hours,servo_pressure,case_drain\nS-200,2025-06-01,5700,25,\nS-100,2025-06-01,1600,,\n"
    report = _imp(store, "readings", data.encode("utf-8"))
    assert (report.added, report.blank, report.problems) == (1, 1, [])


def test_events_file_with_a_move_and_an_overhaul(store):
    data = (
        b"date,kind,serial,hours,to_machine,to_position,to_hours,note\n"
        b"2025-06-01,move,S-100,1700,M-2,swing,5600,\n"
        b"2025-07-01,overhaul,S-200,5650,,,,rebuilt in place\n"
    )
    report = _imp(store, "events", data)
    assert report.problems == [] and report.added == 2
    assert _imp(store, "events", data).added == 0  # re-import adds nothing
    assert [e.kind.value for e in store.events()] == ["move", "overhaul"]
