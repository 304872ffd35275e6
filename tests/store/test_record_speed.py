"""What one save reads: `logbook record` forecasts the saved pump from the part of the
file its forecast depends on (Store.fleet_for_pump), which must give the forecast the
whole fleet gives (the fleet view's); timings are in tests/bench/bench_record.py."""

from __future__ import annotations

import dataclasses
from datetime import date

import pytest

from logbook.analysis.fleet import forecast_in_fleet
from logbook.store import Store

TODAY = date(2026, 12, 1)


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    import demo_fleet

    path = tmp_path_factory.mktemp("speed") / "demo.db"
    with Store(path, create=True, user="demo") as store:
        demo_fleet.load(store, today=TODAY, seed=7)
    return path


def test_the_pumps_part_of_the_fleet_forecasts_it_as_the_whole_fleet_does(demo):
    with Store(demo) as store:
        whole = store.fleet()
        by_model: dict[str, list[str]] = {}
        for serial, pump in sorted(whole.pumps.items()):
            by_model.setdefault(pump.model, []).append(serial)
        chosen = [serials[i] for serials in by_model.values() for i in (0, len(serials) // 2, -1)]
        for serial in chosen:
            part = store.fleet_for_pump(serial)
            assert len(part.readings) < len(whole.readings)  # a part of the file was read
            # The engine's own whole-fleet answer is the reference (the fleet view shows it).
            assert forecast_in_fleet(part, serial, TODAY) == forecast_in_fleet(whole, serial, TODAY), serial


def test_one_save_reads_only_its_pump_and_machine(demo, monkeypatch):
    """Store.add_reading reads no other pump, fitment or reading: every SQL it runs names
    the pump, its machine or a row id (counted through the connection's trace)."""
    with Store(demo, user="t") as store:
        last = store.readings()[-1]
        new = dataclasses.replace(last, id=None, taken_on=TODAY, machine_hours=last.machine_hours + 5, machine=None,
                                  entered_by="", entered_at=None)
        statements: list[str] = []
        store.conn.set_trace_callback(statements.append)
        store.add_reading(new, today=TODAY)
        store.conn.set_trace_callback(None)
    reads = [s for s in statements if s.lstrip().upper().startswith("SELECT") and " FROM " in s.upper()]
    whole = [s for s in reads if "WHERE" not in s.upper() and "FROM MODELS" not in s.upper()
             and "FROM LIMITS" not in s.upper()]
    assert reads and whole == []  # models and limits (a handful of rows) are read whole; nothing else
