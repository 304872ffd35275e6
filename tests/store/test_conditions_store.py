"""Measured viscosity and parked machines through the store, the import and the command line
(issue 12 items 6 and 7): values checked, nothing written on an error, the forecast saying what it assumed."""

from __future__ import annotations

from datetime import date

import pytest

from logbook.analysis.fleet import forecast_fleet
from logbook.cli import main
from logbook.imports import import_bytes
from logbook.model import Event, EventKind, InputRejected
from logbook.oil import viscosity_cst, viscosity_from_points

from .conftest import TODAY


def _imp(store, data, **kw):
    return import_bytes(store, "readings", data, name="v.csv", today=TODAY, **kw)


def test_import_takes_measured_viscosity_in_either_unit(store):
    data = (b"serial,date,machine_hours,case_drain,oil_temp,test_pressure,test_speed,nu40_cst,nu100_cst [mm2/s]\n"
            b"S-100,2025-08-01,1900,3.9,50,400,2000,44.1,6.6\n")
    report = _imp(store, data)
    assert report.problems == [] and report.added == 1
    r = store.readings("S-100")[-1]
    assert (r.nu40_cst, r.nu100_cst) == (44.1, 6.6)  # 1 mm^2/s = 1 cSt (SI definition of the centistokes)
    pf = forecast_fleet(store.fleet(), TODAY).pump("S-100")
    # the trended value uses the measured oil: Q * nu(50 C; 44.1 & 6.6 cSt, ASTM D341) / nu_ref(50 C; VG 46, VI 100)
    want = 3.9 * viscosity_from_points(50.0, 40.0, 44.1, 100.0, 6.6) / viscosity_cst(50.0, 46, 100.0)
    assert pf.kinds[0].latest_value == pytest.approx(want, rel=1e-9)


@pytest.mark.parametrize("cells, field", [(b",6.6", "nu100_cst"), (b"1.2,", "nu40_cst"), (b"40,45", "nu100_cst")])
def test_a_bad_viscosity_is_refused_naming_line_and_field(store, cells, field):
    before = store.counts()["readings"]
    data = (b"serial,date,machine_hours,case_drain,oil_temp,test_pressure,test_speed,nu40_cst,nu100_cst\n"
            b"S-100,2025-08-01,1900,3.9,50,400,2000," + cells + b"\n")
    report = _imp(store, data)
    assert report.added == 0 and [(p.line, p.field) for p in report.problems] == [(2, field)]
    assert store.counts()["readings"] == before


def test_parked_is_a_machine_event_checked_by_the_store(store):
    with pytest.raises(InputRejected, match="machine = 'M-9'"):
        store.add_event(Event(None, EventKind.PARKED, date(2025, 9, 1), machine="M-9"), today=TODAY)
    with pytest.raises(InputRejected, match="serial = 'S-100': is not taken"):
        store.add_event(Event(None, EventKind.PARKED, date(2025, 9, 1), serial="S-100", machine="M-1"), today=TODAY)
    with pytest.raises(InputRejected, match="runs backwards"):
        store.add_event(Event(None, EventKind.PARKED, date(2025, 9, 1), machine="M-1", hours=1200.0), today=TODAY)
    assert not [e for e in store.events() if e.kind is EventKind.PARKED]
    saved = store.add_event(Event(None, EventKind.PARKED, date(2025, 9, 1), machine="M-1", hours=1950.0), today=TODAY)
    assert saved.machine == "M-1" and saved.serial is None
    pf = forecast_fleet(store.fleet(), TODAY).pump("S-100")
    assert pf.utilisation_basis.startswith("parked since 2025-09-01")


def test_event_command_records_parked_and_back(store, capsys):
    path = str(store.path)
    store.close()
    base = ["--db", path, "--today", TODAY.isoformat(), "event"]
    assert main([*base, "parked", "--machine", "M-2", "--date", "2025-10-01"]) == 0
    assert "recorded parked" in capsys.readouterr().out
    assert main([*base, "parked", "S-200", "--date", "2025-10-02"]) != 0  # a serial is not a machine
    assert "give its unit with --machine" in capsys.readouterr().err
    assert main(["--db", path, "--today", TODAY.isoformat(), "show", "S-200"]) == 0
    assert "M-2 parked since 2025-10-01: no hours counted since" in capsys.readouterr().out
    assert main([*base, "back in service", "--machine", "M-2", "--date", "2025-11-01"]) == 0
    capsys.readouterr()
    assert main(["--db", path, "--today", TODAY.isoformat(), "show", "S-200"]) == 0
    assert "parked since" not in capsys.readouterr().out


def test_record_warns_and_the_forecast_leaves_out_a_reading_it_cannot_normalize(store, capsys):
    path = str(store.path)
    store.close()
    argv = ["--db", path, "--today", TODAY.isoformat(), "record", "S-100", "--date", "2025-08-01", "--hours", "1900",
            "--case-drain", "3.9", "--oil-temp", "-20", "--test-pressure", "400", "--test-speed", "2000"]
    assert main(argv) == 2  # outside the model's test window: asked
    assert "outside the test window" in capsys.readouterr().err
    assert main([*argv, "--confirm"]) == 0
    out = capsys.readouterr()
    assert "Warning - saved with --confirm" in out.err and "outside the test window" in out.err
    assert main(["--db", path, "--today", TODAY.isoformat(), "show", "S-100"]) == 0
    shown = capsys.readouterr().out
    assert "case drain reading of 2025-08-01" in shown and "not used in the trend" in shown
