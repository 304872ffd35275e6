"""A small hand-made fleet (invented) for store and import tests."""

from __future__ import annotations

from datetime import date

import pytest

from logbook.imports import import_bytes
from logbook.store import Store

TODAY = date(2026, 12, 1)

MODELS = b"""model,description,displacement,rated_pressure,max_speed,ref_temp,oil_grade,oil_vi,test_speed,case_drain_limit,servo_pressure_limit,neutral_drift_limit
TX-90,test model,90,400,2200,50,46,100,2000,10,18,10
"""
MACHINES = b"""unit,site,description
M-1,North Yard,test loader
M-2,North Yard,test excavator
"""
PUMPS = b"""serial,model,machine,position,fitted_on,machine_hours_at_fit,pump_hours_at_fit
S-100,TX-90,M-1,main,2025-01-10,1000,0
S-200,TX-90,M-2,main,2025-01-10,5000,1200
S-300,TX-90,,,,,
"""
READINGS = b"""serial,date,machine_hours,case_drain,servo_pressure,neutral_drift,oil_temp,test_pressure,test_speed,technician
S-100,2025-02-01,1100,3.1,26,1.0,50,400,2000,Ana
S-100,2025-05-01,1500,3.6,25.5,1.5,55,390,2000,Ana
S-200,2025-03-01,5300,4.0,27,-2.0,48,400,2000,Ben
"""


def load(store: Store, table: str, data: bytes, **kw):
    report = import_bytes(store, table, data, name=f"{table}.csv", today=TODAY, **kw)
    assert report.problems == [], [str(p) for p in report.problems]
    return report


@pytest.fixture
def store(tmp_path):
    s = Store(tmp_path / "t.db", user="tester")
    for table, data in (("models", MODELS), ("machines", MACHINES), ("pumps", PUMPS), ("readings", READINGS)):
        load(s, table, data)
    yield s
    s.close()
