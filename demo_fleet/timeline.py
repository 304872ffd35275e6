"""Machine hour meters and test-visit dates of the demo fleet.

Hours are kept as integer tenths so that meters add up exactly. ``op_tenths`` is the
machine's continuous operating time at the start of a day; the meter shown to people
equals it until a meter replacement, after which the new meter counts from zero.
"""

from __future__ import annotations

import random
from dataclasses import dataclass, field
from datetime import date, timedelta

from demo_fleet import scenario as sc

WINDOW_DAYS = 1100  # simulated calendar before ``today``
MAX_DAY_HOURS = 22.0


@dataclass
class MachineLife:
    """One machine's daily hours, meter and test-visit days inside the simulated window."""

    unit: str
    type_code: str
    site: sc.Site
    window_start: date
    hours_per_day: float
    first_day: date  # first day the machine runs in the window
    last_day: date | None  # retired after this day
    tenths: list[int] = field(default_factory=list)  # op hours x10 at the start of each window day
    replaced_on: date | None = None  # hour meter replaced on this day (new meter starts at 0)
    visit_days: list[date] = field(default_factory=list)

    @property
    def description(self) -> str:
        return sc.TYPES[self.type_code].description

    def op_tenths(self, day: date) -> int:
        """Continuous operating hours x10 at the start of ``day`` (extrapolated before the window)."""
        index = (day - self.window_start).days
        if index < 0:
            return max(0, self.tenths[0] - round(-index * self.hours_per_day * 10))
        return self.tenths[min(index, len(self.tenths) - 1)]

    def meter_tenths(self, day: date) -> int:
        """The hour meter people read on ``day`` (x10)."""
        if self.replaced_on is not None and day >= self.replaced_on:
            return self.op_tenths(day) - self.op_tenths(self.replaced_on)
        return self.op_tenths(day)

    def oil(self, day: date) -> tuple[int, int]:
        if self.unit == sc.OIL_CHANGE_MACHINE and day < self.window_start + timedelta(WINDOW_DAYS - sc.OIL_CHANGE_DAYS_AGO):
            return sc.OIL_BEFORE_CHANGE
        return self.site.oil

    def in_service(self, day: date) -> bool:
        return self.first_day <= day and (self.last_day is None or day <= self.last_day)


def _parked_days(rng: random.Random, start: date, days: int) -> set[date]:
    """0-2 parked spells of 10-45 days (waiting for parts, no work for the machine)."""
    parked: set[date] = set()
    spells = (rng.random() < 0.55) + (rng.random() < 0.2)
    for _ in range(spells):
        length = rng.randint(10, 45)
        begin = start + timedelta(rng.randint(0, days - length))
        parked.update(begin + timedelta(i) for i in range(length))
    return parked


def _daily_hours(rng: random.Random, life: MachineLife, day: date, parked: set[date]) -> float:
    if not life.in_service(day) or day in parked:
        return 0.0
    site = life.site
    if site.winter_shutdown and ((day.month == 12 and day.day >= 24) or (day.month == 1 and day.day == 1)):
        return 0.0
    if site.workdays_per_week == 6 and day.weekday() == 6:
        return 0.0
    if rng.random() < 0.03:  # broken down for the day
        return 0.0
    hours = life.hours_per_day * 7.0 / site.workdays_per_week * rng.lognormvariate(0.0, 0.3)
    return min(hours, MAX_DAY_HOURS)


def build_machine(unit: str, type_code: str, site_index: int, today: date, seed: int) -> MachineLife:
    """Daily hours over the window and the meter at its start, for one machine."""
    rng = random.Random(f"demo-fleet:{seed}:machine:{unit}")
    window_start = today - timedelta(WINDOW_DAYS)
    lo, hi = sc.TYPES[type_code].hours_per_day
    hours_per_day = round(rng.uniform(lo, hi), 2)
    first_day, last_day = window_start, None
    start_hours = hours_per_day * rng.randint(300, 2500)  # machine age in days times utilisation
    if unit == sc.RETIRED_MACHINE:
        last_day = today - timedelta(sc.MOVE_DAYS_AGO + 1)
    elif unit == sc.REPLACEMENT_MACHINE:
        first_day = today - timedelta(sc.MOVE_DAYS_AGO)
        start_hours = rng.uniform(6000, 9000)  # bought used
    elif unit == sc.NEW_MACHINE:
        first_day = today - timedelta(sc.NEW_MACHINE_DAYS_AGO)
        hours_per_day, start_hours = 6.5, 8.0  # delivery and commissioning hours
    life = MachineLife(unit, type_code, sc.SITES[site_index], window_start, hours_per_day, first_day, last_day)
    parked = set() if unit == sc.NEW_MACHINE else _parked_days(rng, first_day, (today - first_day).days)
    running = round(start_hours * 10)
    for i in range(WINDOW_DAYS + 1):
        day = window_start + timedelta(i)
        life.tenths.append(running)
        running += round(_daily_hours(rng, life, day, parked) * 10)
    if unit == sc.METER_MACHINE:
        life.replaced_on = today - timedelta(sc.METER_REPLACED_DAYS_AGO)
    life.visit_days = _visit_days(rng, life, today)
    return life


def _first_day_reaching(life: MachineLife, after: date, target_tenths: int, until: date) -> date:
    day = after + timedelta(1)
    while day < until and life.op_tenths(day) < target_tenths:
        day += timedelta(1)
    return day


def _visit_days(rng: random.Random, life: MachineLife, today: date) -> list[date]:
    """Test visits every ~250-600 operating hours (at most ~6 months apart), none after today."""
    yesterday = today - timedelta(1)
    if life.unit == sc.NEW_MACHINE:
        return [life.first_day + timedelta(1), today - timedelta(rng.randint(8, 20))]
    if life.first_day > life.window_start:
        day = life.first_day + timedelta(2)
    else:
        day = today - timedelta(rng.randint(730, 1080))
    avoid = {life.replaced_on, today - timedelta(sc.MOVE_DAYS_AGO)}
    days: list[date] = []
    while True:
        while day in avoid:
            day += timedelta(1)
        days.append(day)
        target = life.op_tenths(day) + round(rng.uniform(250, 600) * 10)
        cap = day + timedelta(rng.randint(150, 200))
        nxt = _first_day_reaching(life, day, target, cap) + timedelta(rng.randint(0, 6))
        if nxt > yesterday or (life.last_day is not None and nxt > life.last_day):
            break
        day = nxt
    if life.last_day is None and days[-1] < today - timedelta(60):
        late = rng.randint(max((days[-1] - today).days + 20, -58), -2)
        extra = today + timedelta(late)
        while extra in avoid:
            extra += timedelta(1)
        days.append(extra)
    return days


def build_machines(today: date, seed: int) -> dict[str, MachineLife]:
    return {unit: build_machine(unit, type_code, site, today, seed) for unit, type_code, site in sc.MACHINES}
