"""Wear paths of the demo pumps and the raw readings a technician would write down.

Case drain wear is generated at the model's reference conditions and then turned into
what the flow meter shows at the test's oil temperature and pressure with laminar
leakage scaling, Q_meas = Q_ref * (dp_meas / dp_ref) * (nu_ref / nu_meas).
"""

from __future__ import annotations

import math
import random
from dataclasses import dataclass
from datetime import date, timedelta
from typing import Callable

from demo_fleet import scenario as sc
from demo_fleet.pumps import PumpPlan, Visit


def walther_cst(temp_c: float, t1_c: float, nu1_cst: float, t2_c: float, nu2_cst: float) -> float:
    """Kinematic viscosity at ``temp_c`` through two known points: Walther equation, ASTM D341."""

    def loglog(nu: float) -> float:
        return math.log10(math.log10(nu + 0.7))

    lt1, lt2 = math.log10(t1_c + 273.15), math.log10(t2_c + 273.15)
    b = (loglog(nu1_cst) - loglog(nu2_cst)) / (lt2 - lt1)
    a = loglog(nu1_cst) + b * lt1
    return 10.0 ** (10.0 ** (a - b * math.log10(temp_c + 273.15))) - 0.7


def viscosity_cst(oil: tuple[int, int], temp_c: float) -> float:
    """Kinematic viscosity of one of the demo oils (ISO VG, VI) at ``temp_c``."""
    spec = sc.OILS[oil]
    return walther_cst(temp_c, 40.0, float(spec.grade), 100.0, spec.nu100_cst)


@dataclass
class Wear:
    """True state of a pump as functions of its operating hours (values at reference conditions)."""

    cd_start_h: float = 0.0
    cd_q0: float = 0.0  # L/min at the segment start
    cd_rate: float = 0.0  # L/min per hour (linear)
    cd_k: float = 0.0  # per hour (exponential; 0 = linear)
    step_day: date | None = None
    step_lpm: float = 0.0
    servo_start_h: float = 0.0
    servo_s0: float = 27.0
    servo_rate: float = 0.0  # bar per hour, falling
    drift_start_h: float = 0.0
    drift_d0: float = 0.5
    drift_rate: float = 0.0  # bar per hour, growing
    drift_sign: float = 1.0

    def case_drain(self, hours: float, day: date) -> float:
        x = hours - self.cd_start_h
        q = self.cd_q0 * math.exp(self.cd_k * x) if self.cd_k else self.cd_q0 + self.cd_rate * x
        return q + (self.step_lpm if self.step_day is not None and day >= self.step_day else 0.0)

    def servo(self, hours: float) -> float:
        return self.servo_s0 - self.servo_rate * (hours - self.servo_start_h)

    def drift(self, hours: float) -> float:
        return self.drift_sign * (self.drift_d0 + self.drift_rate * (hours - self.drift_start_h))

    def renew_case_drain(self, rng: random.Random, model: sc.ModelSpec, hours: float) -> None:
        self.cd_start_h, self.cd_k, self.step_day = hours, 0.0, None
        self.cd_q0 = model.max_flow_lpm * rng.uniform(0.013, 0.02)
        self.cd_rate = model.max_flow_lpm * rng.lognormvariate(math.log(0.0015), 0.35) / 1000.0

    def renew_servo(self, rng: random.Random, hours: float) -> None:
        self.servo_start_h, self.servo_s0 = hours, rng.uniform(25.5, 28.0)
        self.servo_rate = rng.uniform(0.0, 0.12) / 1000.0

    def renew_drift(self, rng: random.Random, model: sc.ModelSpec, hours: float) -> None:
        self.drift_start_h, self.drift_d0 = hours, rng.uniform(0.2, 0.12 * model.neutral_drift_limit_bar)
        self.drift_rate = rng.uniform(0.05, 0.35) / 1000.0
        self.drift_sign = rng.choice((-1.0, 1.0))


#: Scenarios about something else keep a healthy, slowly rising case drain.
HEALTHY_CASE_DRAIN = ("neutral_reset", "move", "typo", "meter_replaced", "servo_decline", "servo_repair", "charge_wear")


@dataclass
class PlannedEvent:
    day: date
    kind: str
    apply: Callable[[Wear, float], None]
    note: str
    technician: str


def _between(rng: random.Random, after: date, before: date, lo: int, hi: int) -> date:
    """A day lo-hi days after ``after`` but before ``before``."""
    gap = (before - after).days
    return after + timedelta(max(1, min(rng.randint(lo, hi), gap - 3)))


def calibrate(plan: PumpPlan, wear: Wear, visits: list[Visit], rng: random.Random) -> list[PlannedEvent]:
    """Shape a scenario pump's wear from its visit hours; returns its scheduled events."""
    model, story = plan.model, plan.scenario
    limit, n = model.case_drain_limit_lpm, len(visits)
    h = [v.pump_hours for v in visits]
    tech = sc.WORKSHOP_TECHNICIAN

    def linear(q_first: float, i: int, q_i: float) -> None:
        wear.cd_start_h, wear.cd_q0, wear.cd_k = h[0], q_first, 0.0
        wear.cd_rate = (q_i - q_first) / (h[i] - h[0])

    events: list[PlannedEvent] = []
    if story in HEALTHY_CASE_DRAIN:
        linear(rng.uniform(0.25, 0.35) * limit, n - 1, rng.uniform(0.45, 0.6) * limit)
    if story == "linear":
        linear(0.4 * limit, n - 1, 0.88 * limit)
    elif story == "exponential":
        wear.cd_start_h, wear.cd_q0 = h[0], 0.25 * limit
        wear.cd_k = math.log(0.9 / 0.25) / (h[-1] - h[0])
    elif story == "step":
        linear(0.33 * limit, n - 1, 0.45 * limit)
        j = round(0.6 * n)
        wear.step_day = _between(rng, visits[j - 1].day, visits[j].day, 3, 30)
        wear.step_lpm = 0.3 * limit
    elif story == "past_limit":
        linear(0.7 * limit, n - 1, 1.1 * limit)
    elif story == "overhaul":
        m = round(0.45 * n)
        linear(0.55 * limit, m, 0.93 * limit)

        def rebuilt(w: Wear, hours: float) -> None:
            w.renew_case_drain(rng, model, hours)
            w.renew_servo(rng, hours)
            w.renew_drift(rng, model, hours)

        day = _between(rng, visits[m].day, visits[m + 1].day, 8, 20)
        events.append(PlannedEvent(day, "overhaul", rebuilt, "rebuilt: rotating group, valve plate, bearings", tech))
    elif story == "neutral_reset":
        m = round(0.55 * n)
        drift_limit = model.neutral_drift_limit_bar
        wear.drift_start_h, wear.drift_d0, wear.drift_sign = h[0], 0.3 * drift_limit, 1.0
        wear.drift_rate = 0.65 * drift_limit / (h[m] - h[0])

        def reset(w: Wear, hours: float) -> None:
            w.drift_start_h, w.drift_d0 = hours, 0.08 * drift_limit

        day = _between(rng, visits[m].day, visits[m + 1].day, 2, 6)
        events.append(PlannedEvent(day, "neutral_reset", reset, "neutral re-adjusted: A and B equal at centre", ""))
    elif story in ("servo_decline", "charge_wear"):
        end = model.servo_pressure_limit_bar + (1.2 if story == "servo_decline" else 2.5)
        wear.servo_start_h, wear.servo_s0 = h[0], 26.5 if story == "servo_decline" else 27.5
        wear.servo_rate = (wear.servo_s0 - end) / (h[-1] - h[0])
    elif story == "servo_repair":
        m = round(0.65 * n)
        wear.servo_start_h, wear.servo_s0 = h[0], 26.8
        wear.servo_rate = (26.8 - (model.servo_pressure_limit_bar - 1.5)) / (h[m] - h[0])

        def repaired(w: Wear, hours: float) -> None:
            w.servo_start_h, w.servo_s0, w.servo_rate = hours, 27.2, 0.03 / 1000.0
            w.renew_drift(rng, model, hours)

        day = _between(rng, visits[m].day, visits[m + 1].day, 3, 10)
        events.append(PlannedEvent(day, "control_repair", repaired, "control spool and servo piston seals renewed", tech))
    return events
