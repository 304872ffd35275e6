"""The array engine gives the forecasts that its specification, written one pump at a time, gives.

Reference: ``tests/reference/`` writes the rules out per pump (one PumpHistory,
build_series and KindForecast at a time; utilisation, dates, status per machine and
pump), and this test computes the expected forecasts with it, on the same fleet: the demo
fleet and invented fleets full of the awkward cases (overhauls with and without a meter
reading, same-day readings and events, neutral resets, moves, meter replacements,
corrections, other oils, readings while not fitted). Every field must match: dates,
outcomes, flags, paths exactly; floats to 1e-9 relative.
"""

from __future__ import annotations

import dataclasses
import math
import random
from datetime import date, datetime, timedelta

import pytest

import demo_fleet
from logbook.analysis.fit import FitOptions
from logbook.analysis.fleet import forecast_fleet, forecast_histories, forecast_in_fleet, forecast_pump
from tests.reference.calendar import machine_hour_points
from tests.reference.forecast import (
    reference_forecast_fleet,
    reference_forecast_histories,
    reference_uses,
    reference_utilisation,
)
from logbook.analysis.status import StatusThresholds
from logbook.model import (
    Event,
    EventKind,
    Fitment,
    Fleet,
    Kind,
    Limit,
    Machine,
    Pump,
    PumpModel,
    Reading,
)
from logbook.store import Store

REL = 1e-9


def assert_same(got, want, where: str = "forecast") -> None:
    """Field by field: floats to REL relative, everything else equal."""
    if dataclasses.is_dataclass(want) and not isinstance(want, type):
        assert type(got) is type(want), f"{where}: {type(got).__name__} != {type(want).__name__}"
        for f in dataclasses.fields(want):
            if not f.compare:  # e.g. FitDetail.mixture: the engine's arrays behind the chart, not a figure
                continue
            assert_same(getattr(got, f.name), getattr(want, f.name), f"{where}.{f.name}")
    elif isinstance(want, (tuple, list)):
        assert isinstance(got, type(want)) and len(got) == len(want), f"{where}: {got!r} != {want!r}"
        for i, (g, w) in enumerate(zip(got, want)):
            assert_same(g, w, f"{where}[{i}]")
    elif isinstance(want, float) and not isinstance(want, bool):
        assert isinstance(got, float), f"{where}: {got!r} is not a float (want {want!r})"
        ok = (math.isnan(got) and math.isnan(want)) or got == want or math.isclose(got, want, rel_tol=REL)
        assert ok, f"{where}: {got!r} != {want!r}"
    else:
        assert type(got) is type(want) and got == want, f"{where}: {got!r} != {want!r}"


def _model(code: str, oil: tuple[int, float], limits: tuple[Limit, ...]) -> PumpModel:
    return PumpModel(code, "invented test pump", 60.0, 350.0, 2400.0, 50.0, 250.0, oil[0], oil[1], 1500.0, 40.0, 60.0,
                     500.0, 90, limits)  # fmt: skip


MODELS = {
    "A1": _model("A1", (46, 100.0), (Limit(Kind.CASE_DRAIN, 6.0, "above"), Limit(Kind.SERVO_PRESSURE, 18.0, "below"),
                                     Limit(Kind.NEUTRAL_DRIFT, 6.0, "above"))),
    "B2": _model("B2", (68, 105.0), (Limit(Kind.CASE_DRAIN, 9.0, "above"), Limit(Kind.SERVO_PRESSURE, 20.0, "below"))),
    "C3": _model("C3", (32, 140.0), (Limit(Kind.SERVO_PRESSURE, 19.0, "below"),)),
}  # fmt: skip
TODAY = date(2025, 9, 1)
D0 = date(2022, 1, 10)
OILS = ((None, None), (46, 100.0), (68, 105.0), (32, 140.0), (46, None))


class _Meter:
    """An invented machine hour meter, optionally replaced once (the new one starts at ``new_first``)."""

    def __init__(self, rng: random.Random):
        self.start, self.per_day = rng.uniform(0, 15000), rng.choice((0.0, rng.uniform(2, 20)))
        self.replaced_on = D0 + timedelta(days=rng.randint(100, 1000)) if rng.random() < 0.15 else None
        self.new_first = rng.choice((0.0, 5.0))

    def continuous(self, on: date) -> float:
        return self.start + self.per_day * (on - D0).days

    def shown(self, on: date, old: bool = False) -> float:
        if self.replaced_on is not None and on >= self.replaced_on and not old:
            return round(self.new_first + self.continuous(on) - self.continuous(self.replaced_on), 1)
        return round(self.continuous(on), 1)


def edge_fleet(seed: int, pumps: int = 90) -> Fleet:
    """Invented fleet where most pumps carry one or more of the awkward cases."""
    rng = random.Random(seed)
    machines = {f"M{j}": Machine(f"M{j}", f"yard {j % 3}") for j in range(pumps // 2 + 4)}
    meters = {unit: _Meter(rng) for unit in machines}
    meters["GHOST"] = _Meter(rng)  # a machine missing from fleet.machines: no site
    pump_map, fits, reads, events = {}, [], [], []
    for unit, m in meters.items():
        if m.replaced_on is not None:
            events.append(Event(len(events) + 1, EventKind.METER_REPLACED, m.replaced_on, machine=unit,
                                hours=m.shown(m.replaced_on, old=True), to_hours=m.new_first))  # fmt: skip
    stamp = datetime(2022, 1, 1, 8, 0)

    def add_reading(serial, on, meter_hours, wear, rid=None, **kw):
        grade, vi = rng.choice(OILS) if rng.random() < 0.3 else (None, None)
        values = dict(
            case_drain_lpm=None if rng.random() < 0.05 else round(1.2 + 4e-4 * wear + rng.gauss(0, 0.1), 2),
            servo_pressure_bar=None if rng.random() < 0.05 else round(27.0 - 6e-4 * wear + rng.gauss(0, 0.3), 1),
            neutral_drift_bar=None if rng.random() < 0.1 else round(rng.choice((-1, 1)) * (0.3 + 2e-4 * wear), 2),
            oil_temp_c=None if rng.random() < 0.1 else round(rng.uniform(38, 62), 1),
            test_pressure_bar=None if rng.random() < 0.1 else float(rng.randint(200, 280)),
            oil_grade=grade, oil_vi=vi, entered_at=stamp + timedelta(days=(on - D0).days, minutes=rng.randint(0, 600)),
        )  # fmt: skip
        values.update(kw)
        reads.append(Reading(len(reads) + 1 if rid is None else rid, serial, on, meter_hours, **values))
        return reads[-1]

    for i in range(pumps):
        serial = f"P{i:03d}"
        model = rng.choice(sorted(MODELS))
        pump_map[serial] = Pump(serial, model)
        unit = "GHOST" if i == 3 else f"M{i // 2}"
        meter = meters[unit]
        fit_on = D0 + timedelta(days=rng.randint(0, 200))
        at_fit = float(rng.choice((0.0, 0.0, round(rng.uniform(0, 3000), 1))))
        style = rng.random()
        own_fits = [Fitment(len(fits) + 1, serial, unit, f"pos{i % 2}", fit_on, None, meter.shown(fit_on), at_fit)]
        moved_on = None
        if style < 0.1:  # moved to a spare machine (M-spares share meters with other pumps)
            moved_on = fit_on + timedelta(days=rng.randint(200, 900))
            spare = f"M{pumps // 2 + rng.randint(0, 3)}"
            hours_then = at_fit + meter.continuous(moved_on) - meter.continuous(fit_on)
            own_fits[0] = dataclasses.replace(own_fits[0], removed_on=moved_on, machine_hours_at_removal=meter.shown(moved_on))
            own_fits.append(Fitment(len(fits) + 2, serial, spare, "spare", moved_on, None, meters[spare].shown(moved_on),
                                    round(hours_then, 1)))  # fmt: skip
            events.append(Event(len(events) + 1, EventKind.MOVE, moved_on, serial=serial, machine=unit,
                                hours=meter.shown(moved_on), to_machine=spare, to_position="spare",
                                to_hours=meters[spare].shown(moved_on)))  # fmt: skip
        elif style < 0.15:  # an old fitment never closed, and a newer one on top (the newer wins)
            later = fit_on + timedelta(days=rng.randint(100, 400))
            own_fits.append(Fitment(None if rng.random() < 0.5 else len(fits) + 2, serial, unit, "pos9", later, None,
                                    meter.shown(later), at_fit + 50.0))  # fmt: skip
        elif style < 0.2:  # taken off and not refitted (forecast as unfitted, with readings)
            off = fit_on + timedelta(days=rng.randint(300, 900))
            own_fits[0] = dataclasses.replace(own_fits[0], removed_on=off, machine_hours_at_removal=meter.shown(off))
        elif style < 0.23:  # on the shelf with no readings: not forecast
            own_fits[0] = dataclasses.replace(own_fits[0], removed_on=fit_on + timedelta(days=10))
            fits.extend(own_fits)
            continue
        fits.extend(own_fits)

        def where(on):
            if moved_on is not None and on >= moved_on:
                return meters[own_fits[1].machine], own_fits[1]
            return meter, own_fits[0]

        if style > 0.97:  # fitted, no readings yet
            continue
        # events that restart segments, some on a reading day, some without a meter reading
        resets = []
        for kind, p in ((EventKind.OVERHAUL, 0.3), (EventKind.EXCHANGE, 0.08), (EventKind.NEUTRAL_RESET, 0.25),
                        (EventKind.CONTROL_REPAIR, 0.12), (EventKind.OIL_CHANGE, 0.1)):  # fmt: skip
            if rng.random() < p:
                on = fit_on + timedelta(days=rng.randint(60, 1100))
                m, f = where(on)
                hours = None if rng.random() < 0.25 else m.shown(on)
                mach = f.machine if rng.random() < 0.9 else "M0"  # now and then the wrong machine: interpolated
                ev_id = None if rng.random() < 0.1 else len(events) + 1
                entered = stamp + timedelta(days=(on - D0).days, minutes=rng.randint(0, 600)) if rng.random() < 0.7 else None
                events.append(Event(ev_id, kind, on, serial=serial, machine=mach, hours=hours, entered_at=entered))
                resets.append(on)
        # readings: a few dated before the fitment (no fitment covers them), most after
        day = fit_on - timedelta(days=rng.choice((0, 0, 0, 40)))
        n = rng.choice((1, 2, 3, 5, 8, 14, 25))
        step = rng.random() < 0.05
        for k in range(n):
            m, f = where(day)
            hours = f.pump_hours_at_fit + m.continuous(day) - m.continuous(f.fitted_on)
            wear = hours + (3000 if step and k > n // 2 else 0)
            r = add_reading(serial, day, m.shown(day), wear)
            if rng.random() < 0.05:  # corrected later the same day
                reads[-1] = dataclasses.replace(r, superseded_by=len(reads) + 1)
                add_reading(serial, day, r.machine_hours, wear)
            if resets and rng.random() < 0.3:  # a check on the day of some work
                on = rng.choice(resets)
                m2, f2 = where(on)
                add_reading(serial, on, m2.shown(on) + rng.choice((-1.0, 0.0, 2.0)), wear)
            if m.replaced_on is not None and rng.random() < 0.3:  # read on the replacement day, either meter
                add_reading(serial, m.replaced_on, m.shown(m.replaced_on, old=rng.random() < 0.5), wear)
            day += timedelta(days=rng.randint(10, 90))
        if rng.random() < 0.03:  # one reading dated after today
            add_reading(serial, TODAY + timedelta(days=5), meter.shown(TODAY + timedelta(days=5)), 9000.0)
    rng.shuffle(reads)  # the store gives them in date order; the engine must not rely on it
    return Fleet(models=MODELS, machines=machines, pumps=pump_map, fitments=tuple(fits), readings=tuple(reads),
                 events=tuple(events), source="invented")  # fmt: skip


@pytest.fixture(scope="module")
def demo() -> Fleet:
    store = Store(":memory:")
    demo_fleet.load(store, date(2026, 12, 1), seed=7)
    return store.fleet()


@pytest.mark.slow
def test_demo_fleet_forecast_is_unchanged(demo):
    today = date(2026, 12, 1)
    want = reference_forecast_fleet(demo, today)
    got = forecast_fleet(demo, today)
    assert len(got.pumps) == len(want.pumps) > 100
    assert_same(got, want)


@pytest.mark.slow
@pytest.mark.parametrize("seed", [1, 2, 3, 4])
def test_edge_fleet_forecast_is_unchanged(seed):
    fleet = edge_fleet(seed)
    want = reference_forecast_fleet(fleet, TODAY)
    got = forecast_fleet(fleet, TODAY)
    assert len(want.pumps) > 60
    assert_same(got, want)


@pytest.mark.slow
def test_options_noise_and_thresholds_pass_through():
    fleet = edge_fleet(5)
    kwargs = dict(horizon_hours=8000.0, options=FitOptions(pool=False, exponential=False), with_noise=True,
                  thresholds=StatusThresholds(due_days=200, plan_days=800))  # fmt: skip
    assert_same(forecast_fleet(fleet, TODAY, **kwargs), reference_forecast_fleet(fleet, TODAY, **kwargs))


@pytest.mark.slow
def test_forecast_histories_and_one_pump_in_its_fleet():
    fleet = edge_fleet(6)
    histories = fleet.histories(sorted(fleet.pumps)[:25])
    util = reference_utilisation(fleet, TODAY)
    assert_same(forecast_histories(histories, TODAY, util), reference_forecast_histories(histories, TODAY, util))
    want = reference_forecast_fleet(fleet, TODAY)
    for serial in ("P004", "P017"):
        assert_same(forecast_in_fleet(fleet, serial, TODAY).kinds, want.pump(serial).kinds)


@pytest.mark.slow
@pytest.mark.parametrize("seed", [1, 9])
def test_one_pump_is_the_engine_on_arrays_of_length_one(seed):
    fleet = edge_fleet(seed, pumps=40)
    checked = 0
    for history in fleet.histories():
        current = next((f for f in history.fitments if f.removed_on is None), None)
        if current is None or not history.readings:
            continue
        points = machine_hour_points(history.fitments, history.readings, history.events).get(current.machine, [])
        uses = reference_uses({current.machine: points}, history.events, TODAY)
        util = {current.machine: uses[current.machine].per_day}
        (want,) = reference_forecast_histories([history], TODAY, util, options=FitOptions(pool=False), uses=uses)
        assert_same(forecast_pump(history, TODAY), want, history.pump.serial)
        checked += 1
    assert checked > 20


def test_the_cases_are_present():
    # the invented fleets must really hold the awkward cases, or the checks above prove little
    fleet = edge_fleet(1)
    kinds = {e.kind for e in fleet.events}
    assert {EventKind.OVERHAUL, EventKind.NEUTRAL_RESET, EventKind.MOVE, EventKind.METER_REPLACED} <= kinds
    assert any(e.hours is None for e in fleet.events) and any(r.superseded_by for r in fleet.readings)
    event_days = {(e.serial, e.happened_on) for e in fleet.events}
    assert sum((r.serial, r.taken_on) in event_days for r in fleet.readings) > 5


def test_a_bad_test_pressure_is_refused_as_before():
    fleet = edge_fleet(7, pumps=20)
    reads = list(fleet.readings)
    i = next(j for j, r in enumerate(reads) if r.case_drain_lpm is not None and r.taken_on > date(2025, 6, 1))
    reads[i] = dataclasses.replace(reads[i], test_pressure_bar=0.0)
    bad = dataclasses.replace(fleet, readings=tuple(reads))
    with pytest.raises(ValueError, match="test_pressure_bar"):
        reference_forecast_fleet(bad, TODAY)
    with pytest.raises(ValueError, match="test_pressure_bar"):
        forecast_fleet(bad, TODAY)


@pytest.mark.slow
@pytest.mark.parametrize("part", ["events", "meter_replaced", "readings", "fitments", "all", "pumps"])
def test_a_fleet_with_parts_missing(part):
    fleet = edge_fleet(8, pumps=30)
    cut = {
        "events": dict(events=()),
        "meter_replaced": dict(events=tuple(e for e in fleet.events if e.kind is not EventKind.METER_REPLACED)),
        "readings": dict(readings=()),
        "fitments": dict(fitments=()),
        "all": dict(readings=(), fitments=(), events=()),
        "pumps": dict(pumps={}),
    }[part]
    fleet = dataclasses.replace(fleet, **cut)
    assert_same(forecast_fleet(fleet, TODAY), reference_forecast_fleet(fleet, TODAY))


@pytest.mark.parametrize("seed", [1, 2])
def test_parked_machines_match_the_reference(seed):
    # machines parked (some back in service, some still standing, one parked twice) on the invented fleet
    fleet = edge_fleet(seed)
    rng = random.Random(seed)
    extra = []
    for j, unit in enumerate(sorted(fleet.machines)[:14]):
        on = TODAY - timedelta(days=rng.randint(20, 700))
        extra.append(Event(10_000 + 3 * j, EventKind.PARKED, on, machine=unit))
        if j % 2:
            extra.append(Event(10_001 + 3 * j, EventKind.BACK_IN_SERVICE, on + timedelta(days=rng.randint(1, 300)),
                               machine=unit))  # fmt: skip
        if j == 4:
            extra.append(Event(10_002 + 3 * j, EventKind.PARKED, on + timedelta(days=5), machine=unit))
    fleet = dataclasses.replace(fleet, events=fleet.events + tuple(extra))
    got = forecast_fleet(fleet, TODAY)
    assert sum("parked since" in n for n in got.notes) >= 3  # the case is really there
    assert_same(got, reference_forecast_fleet(fleet, TODAY))


def test_a_seasonal_machine_matches_the_reference():
    from tests.unit.test_conditions import TODAY as today, _fleet, _seasonal

    start = date(2023, 1, 2)
    on = [d for d in (start + timedelta(14 * k) for k in range(1, 140)) if 5 <= d.month <= 9 and d < today]
    fleet = _fleet(_seasonal, (today - start).days, readings_on=on, wear=4e-4)
    got = forecast_fleet(fleet, today)
    assert got.pumps[0].utilisation_basis.startswith("runs by season") and got.pumps[0].kinds[0].p50_date is not None
    assert_same(got, reference_forecast_fleet(fleet, today))
