"""Pump hours across meter replacements and moves, wear segments, and machine utilisation.

The expected values are worked out by hand in the comments from the definitions in the
issue: continuous = meter + sum(old_last - new_first) over earlier replacements;
pump hours = hours at fit + continuous hours run since the fit.
"""

from datetime import date, timedelta

import numpy as np
import pytest
from scipy import stats

from logbook.model import Event, EventKind, Fitment, Kind, Limit, Pump, PumpHistory, PumpModel, Reading
from tests.reference.calendar import date_after_hours, hours_per_day, machine_hour_points
from tests.reference.hours import continuous_hours, pump_hours
from tests.reference.segments import build_series, segment_start

D = date(2024, 1, 1)
REPLACE = Event(id=1, kind=EventKind.METER_REPLACED, happened_on=D + timedelta(days=100), machine="EX-1",
                hours=5200.0, to_hours=10.0)  # fmt: skip
MODEL = PumpModel(
    code="T1", description="test pump", displacement_cc=50.0, rated_pressure_bar=350.0, max_speed_rpm=2500.0,
    ref_temp_c=50.0, ref_pressure_bar=250.0, oil_grade=46, oil_vi=100.0, test_speed_rpm=1450.0,
    test_temp_min_c=40.0, test_temp_max_c=60.0, reading_interval_hours=500.0, reading_interval_days=90,
    limits=(Limit(Kind.CASE_DRAIN, 5.0, "above"),),
)  # fmt: skip


def test_continuous_hours_across_a_meter_replacement():
    # before: the meter itself; after: meter + (5200 - 10) = meter + 5190
    assert continuous_hours("EX-1", 5000.0, D + timedelta(days=90), [REPLACE]) == 5000.0
    assert continuous_hours("EX-1", 110.0, D + timedelta(days=110), [REPLACE]) == 5300.0
    # same day: the nearer meter decides (10.5 is the new meter)
    assert continuous_hours("EX-1", 10.5, REPLACE.happened_on, [REPLACE]) == 5200.5
    assert continuous_hours("EX-1", 5199.0, REPLACE.happened_on, [REPLACE]) == 5199.0
    # another machine's replacement does not apply
    assert continuous_hours("EX-2", 110.0, D + timedelta(days=110), [REPLACE]) == 110.0


def test_two_replacements_add_up():
    second = Event(id=2, kind=EventKind.METER_REPLACED, happened_on=D + timedelta(days=200), machine="EX-1",
                   hours=900.0, to_hours=0.0)  # fmt: skip
    # 50 on the third meter = 50 + (900 - 0) + (5200 - 10) = 6140
    assert continuous_hours("EX-1", 50.0, D + timedelta(days=210), [REPLACE, second]) == 6140.0


def test_pump_hours_through_a_move_and_a_meter_replacement():
    fits = [
        Fitment(1, "P1", "EX-1", "main", D, D + timedelta(days=150), 4000.0, 0.0, machine_hours_at_removal=400.0),
        Fitment(2, "P1", "EX-2", "main", D + timedelta(days=160), None, 7000.0, 1590.0),
    ]
    # on EX-1: fitted at 4000, read 110 on the new meter: 0 + (110 + 5190) - 4000 = 1300
    assert pump_hours(110.0, D + timedelta(days=110), fits, [REPLACE]) == pytest.approx(1300.0)
    # removed at 400 on the new meter: 400 + 5190 - 4000 = 1590 h; refitted in EX-2 at 7000 with
    # 1590 h: 1590 + (7300 - 7000) = 1890
    assert pump_hours(7300.0, D + timedelta(days=200), fits, [REPLACE]) == pytest.approx(1890.0)
    # not fitted on that day
    assert pump_hours(7300.0, D + timedelta(days=155), fits, [REPLACE]) is None


def _history(events, readings):
    fits = (Fitment(1, "P1", "EX-1", "main", D, None, 1000.0, 500.0),)
    return PumpHistory(pump=Pump("P1", "T1"), model=MODEL, fitments=fits, readings=tuple(readings), events=tuple(events))


def _reading(day, meter, drain=2.0, servo=25.0, drift=1.0):
    return Reading(None, "P1", D + timedelta(days=day), meter, case_drain_lpm=drain, servo_pressure_bar=servo,
                   neutral_drift_bar=drift, oil_temp_c=50.0, test_pressure_bar=250.0)  # fmt: skip


def test_segments_reset_per_event_kind():
    # model.SEGMENT_RESETS: neutral_reset restarts drift only; control_repair servo and drift; overhaul all
    reads = [_reading(d, 1000.0 + 10 * d) for d in (10, 40, 70, 100, 130)]
    reset = Event(1, EventKind.NEUTRAL_RESET, D + timedelta(days=50), serial="P1", machine="EX-1", hours=1500.0)
    h = _history([reset], reads)
    assert segment_start(Kind.NEUTRAL_DRIFT, h) is reset
    assert segment_start(Kind.CASE_DRAIN, h) is None
    drift = build_series(h, Kind.NEUTRAL_DRIFT)
    drain = build_series(h, Kind.CASE_DRAIN)
    assert len(drain.x_hours) == 5 and drift.readings_before == 2
    # pump hours at the reset: 500 + (1500 - 1000) = 1000; readings at days 70, 100, 130 read the
    # meter at 1700, 2000, 2300 -> pump hours 1200, 1500, 1800 -> x since the reset = 200, 500, 800
    assert drift.x_hours == pytest.approx((200.0, 500.0, 800.0))
    # no reset for case drain: x = pump hours since new = 500 + (meter - 1000)
    assert drain.x_hours == pytest.approx((600.0, 900.0, 1200.0, 1500.0, 1800.0))

    repair = Event(2, EventKind.CONTROL_REPAIR, D + timedelta(days=80), serial="P1", machine="EX-1", hours=1800.0)
    h2 = _history([reset, repair], reads)
    assert segment_start(Kind.SERVO_PRESSURE, h2) is repair
    assert segment_start(Kind.NEUTRAL_DRIFT, h2) is repair
    assert segment_start(Kind.CASE_DRAIN, h2) is None
    overhaul = Event(3, EventKind.OVERHAUL, D + timedelta(days=90), serial="P1")
    h3 = _history([reset, repair, overhaul], reads)
    assert all(segment_start(k, h3) is overhaul for k in Kind)
    # overhaul without meter value: pump hours interpolated by date between days 70 and 100 -> 1400
    s = build_series(h3, Kind.CASE_DRAIN)
    assert s.start_hours == pytest.approx(1400.0) and s.x_hours == pytest.approx((100.0, 400.0))


def test_utilisation_is_robust_to_a_typo_and_a_gap():
    # 10 h/day exactly, a quiet 3-month gap, one meter typo: the Theil-Sen slope stays 10
    # (Sen, JASA 1968; cross-checked with scipy.stats.theilslopes on the same points).
    today = D + timedelta(days=700)
    pts = [(D + timedelta(days=d), 1000.0 + 10.0 * d) for d in range(0, 700, 20) if not 300 <= d < 390]
    pts[10] = (pts[10][0], pts[10][1] + 5000.0)
    got = hours_per_day(pts, today)
    recent = [(d, h) for d, h in pts if d >= today - timedelta(days=365)]
    ref = stats.theilslopes([h for _, h in recent], [d.toordinal() for d, _ in recent])[0]
    assert got == pytest.approx(10.0) and got == pytest.approx(ref)


def test_utilisation_falls_back_to_the_whole_history():
    today = D + timedelta(days=1000)
    pts = [(D + timedelta(days=d), 8.0 * d) for d in (0, 100, 200, 300)]  # nothing in the last year
    assert hours_per_day(pts, today) == pytest.approx(8.0)
    assert hours_per_day(pts[:1], today) is None


def test_machine_points_use_continuous_hours():
    fits = [Fitment(1, "P1", "EX-1", "main", D, None, 4000.0, 0.0)]
    reads = [Reading(None, "P1", D + timedelta(days=110), 110.0)]
    pts = machine_hour_points(fits, reads, [REPLACE])["EX-1"]
    assert pts[-1] == (D + timedelta(days=110), 5300.0)
    assert (REPLACE.happened_on, 5200.0) in pts  # old meter's last and new meter's first coincide


def test_date_after_hours():
    assert date_after_hours(D, 100.0, 10.0) == D + timedelta(days=10)
    assert date_after_hours(D, 95.0, 10.0) == D + timedelta(days=10)  # rounded up to a whole day
    assert date_after_hours(D, np.inf, 10.0) is None and date_after_hours(D, 100.0, None) is None
