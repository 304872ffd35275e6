"""Benchmark of the forecast export (a script, not a test): run with the project's python.

A synthetic fleet of 10,000 pumps (invented numbers) is forecast by the engine
(``forecast_fleet``) and then exported: fleet life, the plan, and each format.
Baselines, measured in the same run: the engine's forecast alone (the export overhead
per format), and the csv plan: the whole html plan (forecast, fleet life, plan and the
page with its charts) against the whole csv plan, target <= 3x. Also the peak memory
the forecast adds (tracemalloc) against the fleet it read.
"""

from __future__ import annotations

import argparse
import random
import resource
import time
from datetime import date, timedelta

from logbook.analysis.fleet import forecast_fleet
from logbook.analysis.life import fleet_life
from logbook.exports import FORMATS, Provenance, Report, render
from logbook.model import Event, EventKind, Fitment, Fleet, Kind, Limit, Machine, Pump, PumpModel, Reading
from logbook.plan import PlanSettings, add_months, make_plan, month_start

TODAY = date(2026, 6, 15)
SITES = ("Site A", "Site B", "Site C", "Site D", "Site E")


def _model(code: str, cc: float, limit_lpm: float) -> PumpModel:
    limits = (
        Limit(Kind.CASE_DRAIN, limit_lpm, "above"),
        Limit(Kind.SERVO_PRESSURE, 18.0, "below"),
        Limit(Kind.NEUTRAL_DRIFT, 10.0, "above"),
    )
    return PumpModel(code, "synthetic", cc, 400.0, 2200.0, 50.0, 250.0, 46, 100.0, 1800.0, 40.0, 60.0, 500.0, 90, limits)


def make_fleet(pumps: int, seed: int = 11) -> Fleet:
    """Pumps with 8-20 readings each, a third overhauled once, wear rising with hours since overhaul."""
    rng = random.Random(seed)
    models = {m.code: m for m in (_model("SYN-45", 45, 6.0), _model("SYN-75", 75, 9.0), _model("SYN-110", 110, 12.0))}
    codes = sorted(models)
    machines, pump_map, fitments, readings, events = {}, {}, [], [], []
    reading_id = event_id = 0
    for i in range(pumps):
        serial, unit = f"S{i:05d}", f"U{i:05d}"
        model = models[codes[i % len(codes)]]
        machines[unit] = Machine(unit, SITES[i % len(SITES)])
        pump_map[serial] = Pump(serial, model.code)
        per_day = rng.uniform(6.0, 18.0)
        span_days = rng.randint(500, 1500)
        fitted_on = TODAY - timedelta(days=span_days)
        meter0 = rng.uniform(0.0, 20000.0)
        pump0 = 0.0 if rng.random() < 0.7 else rng.uniform(0.0, 4000.0)
        fitments.append(Fitment(i + 1, serial, unit, "main", fitted_on, None, meter0, pump0))
        overhaul_day = rng.randint(200, span_days - 150) if rng.random() < 0.33 else None
        if overhaul_day is not None:
            event_id += 1
            events.append(Event(event_id, EventKind.OVERHAUL, fitted_on + timedelta(days=overhaul_day), serial=serial,
                                machine=unit, hours=round(meter0 + per_day * overhaul_day, 1)))
        rate = model.limits[0].value * 0.8 / rng.lognormvariate(10.3, 0.35)  # L/min per hour, limit near 30,000 h
        servo_rate, drift_rate = rng.uniform(5e-5, 3e-4), rng.uniform(5e-5, 3e-4)
        day = rng.randint(5, 40)
        while day < span_days:
            since = day - overhaul_day if overhaul_day is not None and day >= overhaul_day else day
            hours = since * per_day + (0.0 if overhaul_day is not None and day >= overhaul_day else pump0)
            reading_id += 1
            readings.append(Reading(
                reading_id, serial, fitted_on + timedelta(days=day), round(meter0 + per_day * day, 1),
                case_drain_lpm=round(model.limits[0].value * 0.2 + rate * hours + rng.gauss(0, 0.1), 2),
                servo_pressure_bar=round(27.0 - servo_rate * hours + rng.gauss(0, 0.3), 1),
                neutral_drift_bar=round(0.5 + drift_rate * hours + rng.gauss(0, 0.2), 1),
                oil_temp_c=round(rng.uniform(42, 58), 1), test_pressure_bar=round(rng.uniform(230, 260)),
                test_speed_rpm=1800.0,
            ))
            day += rng.randint(60, 100)
    return Fleet(models=models, machines=machines, pumps=pump_map, fitments=tuple(fitments),
                 readings=tuple(readings), events=tuple(events), source="synthetic-bench")


def timed(fn):
    t0 = time.perf_counter()
    out = fn()
    return out, time.perf_counter() - t0


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--pumps", type=int, default=10_000)
    ap.add_argument("--capacity", type=int, default=60, help="shop jobs per month (default 60)")
    ap.add_argument("--max-charts", type=int, default=200)
    args = ap.parse_args()

    fleet, t_build = timed(lambda: make_fleet(args.pumps))
    forecast_fleet(make_fleet(50), TODAY)  # warm up imports
    forecast, t_engine = timed(lambda: forecast_fleet(fleet, TODAY))
    start = add_months(month_start(TODAY), 1)
    settings = PlanSettings(start, 6, capacity_per_month=args.capacity, exchange_on_hand={"SYN-45": 20})
    horizon_days = (add_months(start, 6) - TODAY).days
    life, t_life = timed(lambda: fleet_life(fleet, forecast, horizon_days=horizon_days))
    plan, t_plan = timed(lambda: make_plan(forecast, settings))
    provenance = Provenance.from_models(fleet.source, TODAY, fleet.models)
    report = Report(forecast, plan, life, provenance, max_charts=args.max_charts)

    print(f"fleet: {len(fleet.pumps):,} pumps, {len(fleet.readings):,} readings, {len(fleet.events):,} overhauls "
          f"(built in {t_build:.1f} s)")
    print(f"plan: {len(plan.lines):,} planned ({sum(1 for x in plan.lines if x.shop):,} in the shop), "
          f"{len(plan.unplaced):,} do not fit; life fits: "
          + ", ".join(f"{f.model} {'%.2f' % f.fit.shape if f.fit else 'none'}" for f in life))
    print(f"baseline engine forecast_fleet : {t_engine:8.2f} s")
    print(f"fleet life (Weibull per model) : {t_life:8.2f} s   ratio {t_life / t_engine:6.3f}  (no target)")
    print(f"plan                           : {t_plan:8.2f} s   ratio {t_plan / t_engine:6.3f}  (no target)")
    whole = {}
    for fmt in FORMATS:
        data, t_render = timed(lambda: render(report, fmt))
        total = t_life + t_plan + t_render
        whole[fmt] = t_engine + total
        print(f"export {fmt:<5} render {t_render:6.2f} s, life+plan+render {total:6.2f} s, "
              f"overhead vs engine {total / t_engine:6.3f}  ({len(data) / 2**20:.1f} MiB; no target)")
    ratio = whole["html"] / whole["csv"]
    print(f"whole html plan / whole csv plan: {ratio:6.2f}  (target <= 3: {'met' if ratio <= 3 else 'MISSED'}; "
          f"{min(args.max_charts, len(plan.lines))} charts)")
    import tracemalloc

    tracemalloc.start()
    held = make_fleet(args.pumps)
    read_peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.reset_peak()
    forecast_fleet(held, TODAY)
    peak = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
    print(f"peak traced memory while forecasting / the fleet built: {peak / read_peak:5.2f}  "
          f"({peak / 2**20:.0f} MiB against {read_peak / 2**20:.0f} MiB; target <= 2: {'met' if peak <= 2 * read_peak else 'MISSED'})")
    print(f"process max RSS {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024:.0f} MiB")


if __name__ == "__main__":
    main()
