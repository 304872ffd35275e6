"""Which pump sits where, and when: fitments of the demo pumps and their test visits."""

from __future__ import annotations

import random
from dataclasses import dataclass, field
from datetime import date, timedelta

from demo_fleet import scenario as sc
from demo_fleet.timeline import MachineLife

# Pump hours at the first reading for scenario pumps whose story needs an age.
SCENARIO_HOURS_AT_FIRST = {"linear": 5000, "exponential": 3000, "step": 4000, "overhaul": 9000, "past_limit": 8000}


@dataclass(frozen=True)
class Fit:
    """Pump in ``machine``/``position`` from ``on`` until ``until`` (exclusive; None = still)."""

    machine: str
    position: str
    on: date
    until: date | None
    op_tenths_at_fit: int  # machine's continuous hours x10 at fitting
    pump_tenths_at_fit: int  # pump's own hours x10 at fitting


@dataclass(frozen=True)
class Visit:
    day: date
    machine: str
    meter_tenths: int  # what the machine's hour meter showed
    pump_tenths: int  # pump's own operating hours x10

    @property
    def pump_hours(self) -> float:
        return self.pump_tenths / 10.0


@dataclass
class PumpPlan:
    serial: str
    model: sc.ModelSpec
    scenario: str | None
    fits: list[Fit] = field(default_factory=list)
    note: str = ""

    def fit_on(self, day: date) -> Fit | None:
        """The fitment holding on ``day`` (on a move day, the new one)."""
        for fit in reversed(self.fits):
            if fit.on <= day and (fit.until is None or day < fit.until):
                return fit
        return None

    def visit_on(self, day: date, machines: dict[str, MachineLife]) -> Visit | None:
        fit = self.fit_on(day)
        if fit is None or not machines[fit.machine].in_service(day):
            return None
        life = machines[fit.machine]
        pump_tenths = fit.pump_tenths_at_fit + life.op_tenths(day) - fit.op_tenths_at_fit
        return Visit(day, fit.machine, life.meter_tenths(day), pump_tenths)

    def visits(self, machines: dict[str, MachineLife]) -> list[Visit]:
        """The machine test visits while this pump was fitted (not on its fitting day)."""
        out = []
        for fit in self.fits:
            for day in machines[fit.machine].visit_days:
                if fit.on < day and (fit.until is None or day < fit.until):
                    visit = self.visit_on(day, machines)
                    if visit is not None:
                        out.append(visit)
        return sorted(out, key=lambda v: v.day)


def _first_fit(rng: random.Random, life: MachineLife, position: str, hours_at_first: float | None) -> Fit:
    """Initial fitment consistent with the machine's meter and a pump age at its first visit."""
    if life.first_day > life.window_start:  # delivered inside the window: new pumps
        return Fit(life.unit, position, life.first_day, None, life.op_tenths(life.first_day), 0)
    first = life.visit_days[0]
    op_first = life.op_tenths(first)
    age_tenths = round((hours_at_first if hours_at_first is not None else rng.uniform(300, 12000)) * 10)
    if age_tenths <= op_first - 5000:  # fitted new when the machine had op_first - age
        target = op_first - age_tenths
        if target >= life.tenths[0]:
            on = life.window_start
            while life.op_tenths(on) < target:
                on += timedelta(1)
        else:
            on = life.window_start - timedelta(int((life.tenths[0] - target) / (life.hours_per_day * 10)) + 1)
        return Fit(life.unit, position, on, None, life.op_tenths(on), 0)
    on = first - timedelta(rng.randint(20, 600))  # exchange unit with hours of its own
    op_fit = life.op_tenths(on)
    return Fit(life.unit, position, on, None, op_fit, max(0, age_tenths - (op_first - op_fit)))


def build_pumps(machines: dict[str, MachineLife], today: date, seed: int) -> list[PumpPlan]:
    """Every demo pump with its fitments: scenario serials fixed, the others drawn from ``seed``."""
    serial_rng = random.Random(f"demo-fleet:{seed}:serials")
    used = {s.serial for s in sc.SCENARIOS}
    by_place = {(s.machine, s.position): s for s in sc.SCENARIOS}

    def new_serial(model: sc.ModelSpec) -> str:
        while True:
            serial = f"{model.serial_prefix}-{serial_rng.randint(30000, 99999)}"
            if serial not in used:
                used.add(serial)
                return serial

    move_day = today - timedelta(sc.MOVE_DAYS_AGO)
    plans: list[PumpPlan] = []
    for unit, type_code, _site in sc.MACHINES:
        if unit == sc.REPLACEMENT_MACHINE:
            continue  # receives the retired machine's pumps by move events
        life = machines[unit]
        for position, code in sc.TYPES[type_code].positions:
            model = sc.MODEL_BY_CODE[code]
            story = by_place.get((unit, position))
            serial = story.serial if story else new_serial(model)
            rng = random.Random(f"demo-fleet:{seed}:fit:{serial}")
            hours = SCENARIO_HOURS_AT_FIRST.get(story.name) if story else None
            first = _first_fit(rng, life, position, hours)
            plan = PumpPlan(serial, model, story.name if story else None, [first])
            if unit == sc.RETIRED_MACHINE:
                target = machines[sc.REPLACEMENT_MACHINE]
                pump_tenths = first.pump_tenths_at_fit + life.op_tenths(move_day) - first.op_tenths_at_fit
                plan.fits = [
                    Fit(unit, position, first.on, move_day, first.op_tenths_at_fit, first.pump_tenths_at_fit),
                    Fit(target.unit, position, move_day, None, target.op_tenths(move_day), pump_tenths),
                ]
            plans.append(plan)
    for model in sc.MODELS:
        for _ in range(sc.SHELF_SPARES_PER_MODEL):
            plans.append(PumpPlan(new_serial(model), model, None, [], note="rebuilt exchange unit on the shelf"))
    return plans
