"""Plausibility at entry (logbook.plausible): the hour meter against the length of a day
and the machine's utilisation, oil outside the model's test window, a wear reading that
jumps. The thresholds are our own (common practice, no published source); what they
are measured against is checked against outside sources below."""

from __future__ import annotations

from datetime import date, timedelta

import numpy as np
from scipy import stats

from logbook.model import Event, EventKind, Kind, Limit, PumpModel, Reading
from logbook.plausible import CHANGE_SHARE, Context, meter_doubt, reading_doubts
from logbook.units import UnitPrefs

D0 = date(2026, 6, 1)
MODEL = PumpModel("TX-90", "test pump", 90, 420, 2800, 50, 250, 46, 100, 1800, 40, 60, 500, 180,
                  (Limit(Kind.CASE_DRAIN, 5.0, "above"), Limit(Kind.SERVO_PRESSURE, 18.0, "below"),
                   Limit(Kind.NEUTRAL_DRIFT, 12.0, "above")))


def reading(**kw) -> Reading:
    base = dict(id=None, serial="P-1", taken_on=D0 + timedelta(days=30), machine_hours=1000.0)
    base.update(kw)
    return Reading(**base)


# A day is 86,400 s, 24 h (BIPM, The International System of Units, 9th ed., table 8):
# no hour meter can gain more than 24 h per calendar day.
def test_a_meter_gaining_more_than_a_day_holds_is_asked_about():
    before = (date(2026, 11, 1), 22_884.0)
    assert meter_doubt(date(2026, 11, 16), 30_000.0, before, None) is not None  # the case reported
    # 15 days later plus one day of slack (times of day are not recorded): 16 x 24 h
    assert meter_doubt(date(2026, 11, 16), 22_884.0 + 16 * 24, before, None) is None
    assert meter_doubt(date(2026, 11, 16), 22_884.0 + 16 * 24 + 1, before, None) is not None
    assert meter_doubt(date(2026, 11, 16), 22_950.0, before, None) is None
    assert meter_doubt(date(2026, 11, 16), 22_000.0, before, None) is None  # backwards: the store refuses it


def test_the_rate_rule_uses_the_machines_utilisation():
    # 2 h a day: expected 30 h in 15 days; asked above 3 x 30 + 100 = 190 h (our rule)
    before = (D0, 5000.0)
    assert meter_doubt(D0 + timedelta(days=15), 5150.0, before, 2.0) is None
    doubt = meter_doubt(D0 + timedelta(days=15), 5300.0, before, 2.0)
    assert doubt is not None and "2.0 h a day" in doubt.reason and doubt.label == "Hour meter"


def test_utilisation_is_the_theil_sen_slope_of_the_meter_records():
    rng = np.random.default_rng(3)
    days = np.sort(rng.choice(np.arange(0, 200), size=12, replace=False))
    hours = 4000 + 6.5 * days + rng.normal(0, 15, size=days.size)
    ctx = Context(MODEL, tuple((D0 + timedelta(days=int(d)), float(h)) for d, h in zip(days, hours)))
    # Theil-Sen (Sen, JASA 1968) as computed by scipy.stats.theilslopes
    expected = stats.theilslopes(hours, days).slope
    assert abs(ctx.hours_per_day(D0 + timedelta(days=200)) - expected) < 1e-9


def test_oil_outside_the_test_window_is_asked_about_in_the_users_units():
    ctx = Context(MODEL)
    assert [d.field for d in reading_doubts(reading(oil_temp_c=75.0, case_drain_lpm=2.0), ctx)] == ["oil_temp"]
    assert [d.field for d in reading_doubts(reading(oil_temp_c=4.1), ctx)] == ["oil_temp"]
    assert reading_doubts(reading(oil_temp_c=50.0), ctx) == []
    (doubt,) = reading_doubts(reading(oil_temp_c=75.0), ctx, UnitPrefs.us())
    # 75 C = 167 F (t_F = 1.8 t_C + 32, NIST SP 811 B.9)
    assert doubt.shown == "167.0 F" and "104 F to 140 F" in doubt.reason
    assert str(doubt).startswith("Oil temperature 167.0 F: outside the test window of TX-90")


def test_a_wear_reading_stepping_more_than_half_its_limit_is_asked_about():
    prev = reading(id=7, taken_on=D0, machine_hours=900.0, servo_pressure_bar=26.5, neutral_drift_bar=1.0)
    ctx = Context(MODEL, earlier=(prev,))
    step = CHANGE_SHARE * 18.0  # 9 bar for an 18 bar limit
    down = reading(servo_pressure_bar=26.5 - step - 0.1)
    (doubt,) = reading_doubts(down, ctx)
    assert doubt.field == "servo_pressure" and doubt.reason.startswith("down 9.10 bar since 26.50 bar on 2026-06-01")
    assert reading_doubts(reading(servo_pressure_bar=26.5 - step + 0.1), ctx) == []
    (drift,) = reading_doubts(reading(neutral_drift_bar=16.0), ctx)  # 15 bar above the previous one
    assert drift.field == "neutral_drift" and drift.reason.startswith("up 15.00 bar")


def test_an_event_restarting_the_trend_makes_a_big_step_expected():
    prev = reading(id=7, taken_on=D0, machine_hours=900.0, servo_pressure_bar=15.0)
    repair = Event(1, EventKind.CONTROL_REPAIR, D0 + timedelta(days=3), "P-1", "M-1", 950.0)
    ctx = Context(MODEL, earlier=(prev,), events=(repair,))
    assert reading_doubts(reading(servo_pressure_bar=27.0), ctx) == []
    oil_change = Event(2, EventKind.OIL_CHANGE, D0 + timedelta(days=3), "P-1", "M-1", 950.0)
    assert len(reading_doubts(reading(servo_pressure_bar=27.0), Context(MODEL, earlier=(prev,), events=(oil_change,)))) == 1


def test_outside_the_forecast_band_is_asked_about():
    ctx = Context(MODEL, bands={Kind.SERVO_PRESSURE: (22.0, 25.0)})
    (doubt,) = reading_doubts(reading(servo_pressure_bar=21.0), ctx)
    assert "where the pump's trend expects a reading now: 22.00 bar to 25.00 bar" in doubt.reason
    assert reading_doubts(reading(servo_pressure_bar=23.0), ctx) == []


# -- the import's screen (plausible.maybe_doubted) -------------------------------------------
def _invented_fleet(seed: int):
    """A small invented fleet with every record the rules read: moves, meter replacements,
    trend-restarting events (one removed), readings on the same day and hour, readings without
    some values, oil outside the test window, meter jumps and big steps."""
    import random

    from logbook.model import Fitment, Fleet, Machine, Pump

    rng = random.Random(seed)
    other = PumpModel("TX-40", "test pump", 40, 350, 3000, 50, 250, 32, 100, 1800, 45, 55, 500, 180,
                      (Limit(Kind.CASE_DRAIN, 3.0, "above"),))
    models = {MODEL.code: MODEL, other.code: other}
    machines = {f"U-{i}": Machine(f"U-{i}", "North yard") for i in range(5)}
    pumps, fitments, readings, events = {}, [], [], []
    ids = iter(range(1, 10_000))
    for p in range(8):
        serial = f"P-{p}"
        pumps[serial] = Pump(serial, MODEL.code if p % 3 else other.code)
        machine = f"U-{p % 5}"
        fitments.append(Fitment(next(ids), serial, machine, f"pos{p}", D0, None, 100.0 * p, 0.0))
        day, hours, cd, sp, nd = D0, 100.0 * p + 10, 1.0, 26.0, 0.5
        for _ in range(40):
            if rng.random() > 0.1:  # else a second reading on the same day (sometimes the same hours)
                day += timedelta(days=rng.randint(1, 20))
                hours += rng.choice([rng.uniform(0, 30), rng.uniform(0, 600)])
            elif rng.random() < 0.5:
                hours += rng.uniform(0, 5)
            cd += rng.choice([0.02, -0.01, 0.0, 2.5, -2.0])
            sp += rng.choice([0.1, -0.2, 0.0, 9.5, -10.0])
            nd += rng.choice([0.1, -0.1, 6.5, -13.0])
            if rng.random() < 0.1:
                events.append(Event(next(ids), rng.choice([EventKind.OVERHAUL, EventKind.NEUTRAL_RESET,
                                                           EventKind.CONTROL_REPAIR]), day, serial=serial,
                                    machine=machine, hours=hours,
                                    removed_reason="entered twice" if rng.random() < 0.2 else None))
            if rng.random() < 0.05:
                events.append(Event(next(ids), EventKind.METER_REPLACED, day, machine=machine, hours=hours, to_hours=0.0))
            readings.append(Reading(
                next(ids), serial, day, round(hours, 1),
                case_drain_lpm=None if rng.random() < 0.1 else round(cd, 2),
                servo_pressure_bar=None if rng.random() < 0.2 else round(sp, 2),
                neutral_drift_bar=None if rng.random() < 0.2 else round(nd, 2),
                oil_temp_c=rng.choice([None, 50.0, 44.0, 58.0, 61.0, 30.0]),
                test_pressure_bar=rng.choice([None, 250.0, 200.0]),
                oil_grade=rng.choice([None, 46, 68]), machine=machine,
            ))
    return Fleet(models, machines, pumps, tuple(fitments), tuple(readings), tuple(events))


def test_the_import_screen_lets_through_every_reading_the_rules_doubt():
    # The screen must never be narrower than the rules: the doubts told with it are exactly those
    # of reading_doubts run on every reading (screen=False), on invented fleets holding each kind.
    from logbook.plausible import fleet_doubts, maybe_doubted

    told = set()
    for seed in range(12):
        fleet = _invented_fleet(seed)
        new = list(fleet.readings[len(fleet.readings) // 3:])
        every = fleet_doubts(fleet, new, screen=False)
        assert fleet_doubts(fleet, new) == every
        assert len(maybe_doubted(fleet, new)) < len(new)  # it does leave readings out
        told |= {label for line in every for label in ("Hour meter", "Oil temperature", "Case drain", "Servo pressure",
                                                         "Neutral drift") if f": {label}" in line}
    assert told == {"Hour meter", "Oil temperature", "Case drain", "Servo pressure", "Neutral drift"}


def _as_columns(readings):
    """The records as the store's columns (``ReadingColumns.from_rows`` of rows in ``FIELDS`` order)."""
    from logbook.columns import FIELDS, ReadingColumns

    def cell(r, name):
        v = getattr(r, name)
        return v.isoformat() if name in ("taken_on", "entered_at") and v is not None else v

    return ReadingColumns.from_rows([tuple(cell(r, name) for name in FIELDS) for r in readings])


def test_the_import_screen_reads_the_stores_columns_as_it_reads_records():
    # An import hands the screen the store's columns (the fleet's and the new readings'); the
    # positions and the doubts must be those found on the same readings as records.
    from dataclasses import replace

    from logbook.plausible import fleet_doubts, maybe_doubted

    passed = 0
    for seed in range(12):
        fleet = _invented_fleet(seed)
        cols = _as_columns(fleet.readings)
        assert list(cols) == list(fleet.readings)
        as_cols = replace(fleet, readings=cols)
        first = len(fleet.readings) // 3
        new = list(fleet.readings[first:])
        new_cols = cols.take(range(first, len(cols)))
        expected = maybe_doubted(fleet, new)
        assert maybe_doubted(as_cols, new_cols) == expected
        assert maybe_doubted(as_cols, new) == expected  # records matched to the columns by id
        assert fleet_doubts(as_cols, new_cols) == fleet_doubts(fleet, new)
        passed += len(expected)
    assert passed  # the screen let something through to compare


def test_a_signed_drift_is_compared_by_its_size_and_the_message_says_so():
    # neutral drift is signed (A-B pressure); its trend and band are of the size: -1.20 bar is 1.20 bar
    ctx = Context(MODEL, bands={Kind.NEUTRAL_DRIFT: (1.98, 5.43)})
    (doubt,) = reading_doubts(reading(neutral_drift_bar=-1.2), ctx)
    assert doubt.shown == "-1.20 bar"  # the value as typed, sign kept
    assert doubt.reason.startswith("its size 1.20 bar is outside where the pump's trend expects a reading now")
    assert "1.98 bar to 5.43 bar (the drift's size, either sign)" in doubt.reason
    assert reading_doubts(reading(neutral_drift_bar=-2.5), ctx) == []  # size 2.5 inside the band
