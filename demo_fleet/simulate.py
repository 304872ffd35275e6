"""Run every demo pump through its visits: true wear, events and the raw readings."""

from __future__ import annotations

import bisect
import random
from dataclasses import dataclass, field
from datetime import date, timedelta

from demo_fleet import scenario as sc
from demo_fleet.pumps import PumpPlan, Visit
from demo_fleet.timeline import MachineLife
from demo_fleet.wear import PlannedEvent, Wear, calibrate, viscosity_cst

AUTO_OVERHAUL_FRACTION = 0.9  # ordinary pumps are rebuilt once case drain reaches this share of the limit
AUTO_NEUTRAL_FRACTION = 0.85  # ... and neutral is re-adjusted at this share of the drift limit


@dataclass
class PumpOutcome:
    readings: list[dict] = field(default_factory=list)
    events: list[dict] = field(default_factory=list)


def hours_text(tenths: int) -> str:
    return f"{tenths / 10:.1f}"


def event_row(day: date, kind: str, serial: str = "", machine: str = "", hours: str = "", **extra: str) -> dict:
    row = {"date": day.isoformat(), "kind": kind, "serial": serial, "machine": machine, "hours": hours}
    row.update({"to_machine": "", "to_position": "", "to_hours": "", "technician": "", "note": ""})
    row.update(extra)
    return row


def _iso4406(rng: random.Random, site_index: int) -> str:
    base = (17, 15, 12) if site_index == 0 else (18, 16, 13) if site_index == 1 else (19, 17, 14)
    shift = rng.choice((-1, 0, 0, 1))
    return "/".join(str(n + shift) for n in base)


def measure(rng: random.Random, plan: PumpPlan, visit: Visit, life: MachineLife, wear: Wear, full: bool) -> dict:
    """What the technician writes down at a visit, raw and at the test's conditions."""
    model = plan.model
    site_index = next(i for i, s in enumerate(sc.SITES) if s is life.site)
    hours = visit.pump_hours
    oil = life.oil(visit.day)
    oil_temp = round(min(70.0, max(35.0, rng.gauss(life.site.test_temp_mean_c, 6.0))))
    test_pressure = 5 * round(model.rated_pressure_bar * min(1.0, max(0.82, rng.gauss(0.93, 0.035))) / 5)
    note = ""
    test_speed = model.test_speed_rpm
    if rng.random() < 0.12:
        others = (1800.0, 2000.0, model.max_speed_rpm)
        test_speed = rng.choice([s for s in others if s != model.test_speed_rpm and s <= model.max_speed_rpm])
        note = "tested at high idle" if test_speed == model.max_speed_rpm else "engine held below test speed"
    if oil_temp < model.test_temp_min_c and not note:
        note = "oil not fully warm"
    nu_ref = viscosity_cst(model.ref_oil, model.ref_temp_c)
    q_ref = wear.case_drain(hours, visit.day)
    q_meas = q_ref * (test_pressure / model.ref_pressure_bar) * (nu_ref / viscosity_cst(oil, oil_temp))
    q_meas = max(0.1, q_meas * (1.0 + rng.gauss(0.0, 0.04)))
    servo = wear.servo(hours) + rng.gauss(0.0, 0.35)
    charge = servo + plan_charge_margin(plan) + rng.gauss(0.0, 0.3)
    drift = wear.drift(hours) + rng.gauss(0.0, 0.5)
    take_servo = full or rng.random() < 0.92
    take_drift = full or rng.random() < 0.88
    take_charge = plan.scenario == "charge_wear" or rng.random() < 0.6
    return {
        "serial": plan.serial,
        "date": visit.day.isoformat(),
        "machine_hours": hours_text(visit.meter_tenths),
        "case_drain": f"{q_meas:.1f}",
        "servo_pressure": f"{servo:.1f}" if take_servo else "",
        "neutral_drift": f"{drift:.1f}" if take_drift else "",
        "charge_pressure": f"{charge:.1f}" if take_charge else "",
        "oil_temp": f"{oil_temp:d}",
        "test_pressure": f"{test_pressure:d}",
        "test_speed": f"{test_speed:.0f}",
        "oil_grade": f"{oil[0]:d}",
        "oil_vi": f"{oil[1]:d}",
        "iso4406": _iso4406(rng, site_index) if rng.random() < 0.35 else "",
        "technician": rng.choice(life.site.technicians),
        "note": note,
    }


def plan_charge_margin(plan: PumpPlan) -> float:
    """Charge pressure above servo pressure; a stable per-pump figure."""
    return 1.0 + (sum(map(ord, plan.serial)) % 16) / 10.0


def simulate_pump(plan: PumpPlan, machines: dict[str, MachineLife], today: date, seed: int) -> PumpOutcome:
    """Readings and events of one pump over its fitments."""
    out = PumpOutcome()
    visits = plan.visits(machines)
    if not visits:
        return out
    rng = random.Random(f"demo-fleet:{seed}:wear:{plan.serial}")
    meas_rng = random.Random(f"demo-fleet:{seed}:measure:{plan.serial}")
    model = plan.model
    wear = Wear()
    first_h = visits[0].pump_hours
    wear.renew_case_drain(rng, model, 0.0)
    wear.renew_servo(rng, 0.0)
    wear.renew_drift(rng, model, max(0.0, first_h - rng.uniform(0.0, 4000.0)))
    pending = calibrate(plan, wear, visits, rng) if plan.scenario else []
    auto = plan.scenario is None
    typo_index = round(0.5 * len(visits)) if plan.scenario == "typo" else None
    for day in [p.day + timedelta(2) for p in pending if p.kind == "overhaul"]:
        _insert_visit(plan, machines, visits, day, today)
    busy = {"overhaul": False, "neutral_reset": False}
    i = 0
    while i < len(visits):
        visit = visits[i]
        pending.sort(key=lambda p: p.day)
        while pending and pending[0].day < visit.day:
            _apply(plan, machines, pending.pop(0), wear, out, busy)
        full = plan.scenario is not None
        row = measure(meas_rng, plan, visit, machines[visit.machine], wear, full)
        if i == typo_index:
            row["case_drain"] = f"{float(row['case_drain']) * 10:.1f}"
        if plan.scenario == "past_limit" and wear.case_drain(visit.pump_hours, visit.day) > model.case_drain_limit_lpm:
            row["note"] = "over the limit; overhaul requested, waiting for an exchange unit"
        out.readings.append(row)
        if auto:
            pending += _auto_events(plan, machines, visits, i, wear, rng, today, busy)
        i += 1
    for planned in pending:
        if planned.day < today:
            _apply(plan, machines, planned, wear, out, busy)
    return out


def _insert_visit(plan: PumpPlan, machines: dict[str, MachineLife], visits: list[Visit], day: date, today: date) -> None:
    """Add a baseline test on ``day`` (after a rebuild) unless it clashes or is after yesterday."""
    if day >= today or any(v.day == day for v in visits):
        return
    visit = plan.visit_on(day, machines)
    if visit is not None:
        bisect.insort(visits, visit, key=lambda v: v.day)


def _auto_events(plan, machines, visits, i, wear, rng, today, busy) -> list[PlannedEvent]:
    """Ordinary fleet practice: rebuild a pump near its case drain limit, re-adjust a drifting neutral."""
    model, visit = plan.model, visits[i]
    nxt = visits[i + 1].day if i + 1 < len(visits) else today
    taken = {v.day for v in visits}
    events = []
    q = wear.case_drain(visit.pump_hours, visit.day)
    if not busy["overhaul"] and q >= AUTO_OVERHAUL_FRACTION * model.case_drain_limit_lpm:
        day = visit.day + timedelta(rng.randint(5, 30))
        fit = plan.fit_on(visit.day)
        if day < today - timedelta(3) and day not in taken and plan.fit_on(day) is fit:
            busy["overhaul"] = True

            def rebuilt(w: Wear, hours: float) -> None:
                w.renew_case_drain(rng, model, hours)
                w.renew_servo(rng, hours)
                w.renew_drift(rng, model, hours)

            events.append(PlannedEvent(day, "overhaul", rebuilt, "rebuilt: case drain near its limit", sc.WORKSHOP_TECHNICIAN))
            _insert_visit(plan, machines, visits, day + timedelta(rng.randint(1, 3)), today)
    if not busy["neutral_reset"] and abs(wear.drift(visit.pump_hours)) >= AUTO_NEUTRAL_FRACTION * model.neutral_drift_limit_bar:
        day = visit.day + timedelta(rng.randint(1, 5))
        if day < min(nxt, today) and plan.fit_on(day) is plan.fit_on(visit.day):
            busy["neutral_reset"] = True

            def reset(w: Wear, hours: float) -> None:
                w.drift_start_h, w.drift_d0 = hours, rng.uniform(0.2, 1.0)

            events.append(PlannedEvent(day, "neutral_reset", reset, "neutral re-adjusted", ""))
    return events


def _apply(plan, machines, planned: PlannedEvent, wear: Wear, out: PumpOutcome, busy: dict) -> None:
    """Change the wear state at a planned event and write its row."""
    visit = plan.visit_on(planned.day, machines)
    if visit is None:
        return
    life = machines[visit.machine]
    planned.apply(wear, visit.pump_hours)
    busy[planned.kind] = False
    technician = planned.technician or life.site.technicians[0]
    out.events.append(
        event_row(planned.day, planned.kind, plan.serial, visit.machine, hours_text(visit.meter_tenths),
                  technician=technician, note=planned.note)
    )
