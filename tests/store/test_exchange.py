"""An exchange that names the pump that went in (``--serial-in``): that pump is fitted in the same
machine and position from the exchange's date and its hours count on from there; the pump that
came out is removed. Refusals name the field and write nothing; removing the exchange gives the
fitments back; show, history and the JSON listing name the pump that went in."""

from __future__ import annotations

import json
from datetime import date

import pytest

from logbook.cli import main
from logbook.model import Event, EventKind, InputRejected, Reading

from .conftest import TODAY

DAY = date(2025, 6, 1)


def _state(store):
    return store.counts(), len(store.audit_trail()), store.fitments()


def _exchange(store, serial_in="S-300", day=DAY, hours=1700.0, serial="S-100"):
    return store.add_event(Event(id=None, kind=EventKind.EXCHANGE, happened_on=day, serial=serial, hours=hours,
                                 serial_in=serial_in), today=TODAY)


def test_the_pump_that_went_in_takes_the_place_from_that_day(store):
    saved = _exchange(store)
    assert saved.serial_in == "S-300" and saved.machine == "M-1"
    out = store.fitments(serial="S-100")
    assert [(f.machine, f.position, f.removed_on, f.machine_hours_at_removal) for f in out] == [
        ("M-1", "main", DAY, 1700.0)]
    went_in = store.fitments(serial="S-300")
    assert [(f.machine, f.position, f.fitted_on, f.removed_on, f.machine_hours_at_fit, f.pump_hours_at_fit)
            for f in went_in] == [("M-1", "main", DAY, None, 1700.0, 0.0)]  # never fitted before: its hours start at 0
    trail = [(e.action, e.table) for e in store.pump_trail("S-300")]
    assert ("insert", "fitments") in trail
    assert store.check() == []
    # readings of the pump that went in are taken in its place; the one that came out is no longer fitted
    r = store.add_reading(Reading(id=None, serial="S-300", taken_on=date(2025, 7, 1), machine_hours=1900,
                                  servo_pressure_bar=27.0), today=TODAY)
    assert r.machine == "M-1"
    with pytest.raises(InputRejected, match="not fitted to a machine that day"):
        store.add_reading(Reading(id=None, serial="S-100", taken_on=date(2025, 7, 2), machine_hours=1910,
                                  servo_pressure_bar=25.0), today=TODAY)


def test_the_engine_counts_the_new_pumps_hours_from_the_exchange(store):
    # Pump hours = hours at fitting + machine hours run since (the rule of logbook.meter, worked by hand:
    # 0 h at fitting at 1700 h on the meter, read at 2300 h -> 600 pump hours)
    from logbook.analysis.fleet import forecast_fleet
    from logbook.analysis.timeline import Timeline

    _exchange(store)
    for k, (day, meter) in enumerate(((date(2025, 8, 1), 2000), (date(2025, 10, 1), 2300))):
        store.add_reading(Reading(id=None, serial="S-300", taken_on=day, machine_hours=meter, case_drain_lpm=2.0 + k,
                                  servo_pressure_bar=27.0, oil_temp_c=50, test_pressure_bar=400,
                                  test_speed_rpm=2000), today=TODAY)
    fleet = store.fleet()
    tl = Timeline(fleet.fitments, fleet.readings, fleet.events)
    mine = [i for i, r in enumerate(fleet.readings) if r.serial == "S-300"]
    assert [float(tl.hours[i]) for i in mine] == [300.0, 600.0]
    forecast = forecast_fleet(fleet, TODAY)
    went_in, came_out = forecast.pump("S-300"), forecast.pump("S-100")
    assert (went_in.machine, went_in.position, went_in.site) == ("M-1", "main", "North Yard")
    assert came_out.machine is None
    assert fleet.history("S-100").events[-1].serial_in == "S-300"


@pytest.mark.parametrize("serial_in, words", [
    ("S-999", "serial_in = 'S-999': must be a known pump serial"),
    ("S-100", "serial_in = 'S-100': must be another pump than the one that came out"),
    ("S-200", "serial_in = 'S-200': sat in M-2 on 2025-06-01"),
])
def test_a_bad_serial_in_is_named_and_nothing_is_written(store, serial_in, words):
    before = _state(store)
    with pytest.raises(InputRejected) as caught:
        _exchange(store, serial_in=serial_in)
    assert any(words in str(p) for p in caught.value.problems), [str(p) for p in caught.value.problems]
    assert _state(store) == before


def test_serial_in_belongs_to_an_exchange_only_and_later_readings_of_the_pump_out_refuse_it(store):
    before = _state(store)
    with pytest.raises(InputRejected, match="serial_in = 'S-300': is only taken by an exchange, not by overhaul"):
        store.add_event(Event(id=None, kind=EventKind.OVERHAUL, happened_on=DAY, serial="S-100", hours=1700,
                              serial_in="S-300"), today=TODAY)
    # S-100 was read in M-1 on 2025-05-01: an exchange on 2025-04-01 would leave that reading nowhere
    with pytest.raises(InputRejected, match=r"1 reading\(s\) of S-100 from 2025-05-01 on"):
        _exchange(store, day=date(2025, 4, 1), hours=1300.0)
    assert _state(store) == before


def test_a_second_exchange_with_another_pump_in_is_not_taken_for_a_repeat(store):
    first = _exchange(store)
    with pytest.raises(InputRejected, match="serial_in"):
        _exchange(store, serial_in="S-200")  # same pump, day and hours, another pump in: not the same event
    report = store.add_events([Event(id=None, kind=EventKind.EXCHANGE, happened_on=DAY, serial="S-100", hours=1700.0,
                                     serial_in="S-300")], today=TODAY)
    assert report.already_present == 1 and report.added == 0 and first.id in [e.id for e in store.events()]


def test_removing_the_exchange_gives_the_fitments_back_unless_later_records_rest_on_it(store):
    ex = _exchange(store)
    r = store.add_reading(Reading(id=None, serial="S-300", taken_on=date(2025, 7, 1), machine_hours=1900,
                                  servo_pressure_bar=27.0), today=TODAY)
    before = _state(store)
    with pytest.raises(InputRejected, match=r"later records depend on: 1 reading\(s\) of S-300"):
        store.remove_event(ex.id, reason="wrong pump")
    assert _state(store) == before
    store.remove_reading(r.id, reason="taken on the wrong pump")
    store.remove_event(ex.id, reason="wrong pump")
    assert [(f.machine, f.removed_on) for f in store.fitments(serial="S-100")] == [("M-1", None)]
    assert store.fitments(serial="S-300") == []
    assert store.check() == []
    assert _exchange(store).id != ex.id  # and it can be recorded again


def test_an_exchange_without_serial_in_keeps_the_pump_in_place(store):
    saved = _exchange(store, serial_in=None)
    assert saved.serial_in is None
    assert [(f.machine, f.removed_on) for f in store.fitments(serial="S-100")] == [("M-1", None)]


def test_cli_records_shows_and_lists_the_pump_that_went_in(store, tmp_path, capsys):
    db = str(store.path)
    store.close()
    base = ["--db", db, "--today", TODAY.isoformat()]
    assert main([*base, "event", "exchange", "S-100", "--date", DAY.isoformat(), "--hours", "1700",
                 "--serial-in", "S-999"]) == 2
    err = capsys.readouterr().err
    assert "serial_in = 'S-999': must be a known pump serial" in err and "nothing was written" in err
    assert main([*base, "event", "exchange", "S-100", "--date", DAY.isoformat(), "--hours", "1700",
                 "--serial-in", "S-300"]) == 0
    assert "S-300 fitted in its place" in capsys.readouterr().out
    assert main([*base, "show", "S-100"]) == 0
    assert "exchange, S-300 went in" in capsys.readouterr().out
    assert main([*base, "show", "S-100", "--format", "json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["events"][-1]["serial_in"] == "S-300" and doc["events"][-1]["kind"] == "exchange"
    assert main([*base, "show", "S-300"]) == 0
    assert "M-1" in capsys.readouterr().out  # fitted in M-1 from the exchange
    assert main([*base, "history", "S-100", "--format", "json"]) == 0
    entries = json.loads(capsys.readouterr().out)["entries"]
    assert any("serial_in S-300" in e["change"] for e in entries if e["table"] == "events")


def test_an_events_file_names_the_pump_that_went_in(store):
    from .conftest import load

    load(store, "events", b"date,kind,serial,hours,serial_in\n2025-06-01,exchange,S-100,1700,S-300\n")
    assert [(f.machine, f.fitted_on) for f in store.fitments(serial="S-300")] == [("M-1", DAY)]
    assert store.fitments(serial="S-100")[0].removed_on == DAY
    bad = b"date,kind,serial,hours,serial_in\n2025-06-01,exchange,S-200,5400,S-999\n"
    from logbook.imports import import_bytes

    before = _state(store)
    report = import_bytes(store, "events", bad, name="events.csv", today=TODAY)
    assert any("serial_in" in str(p) and "S-999" in str(p) and p.line == 2 for p in report.problems)
    assert _state(store) == before
