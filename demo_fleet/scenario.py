"""Fixed cast of the invented demo operator: company, sites, pump models, machines and
the scenario pumps a planner must see. Everything here is invented; only the random
draws in ``simulate`` depend on the seed.
"""

from __future__ import annotations

from dataclasses import dataclass

COMPANY = "Corvane Aggregates"


@dataclass(frozen=True)
class Oil:
    """An ISO VG grade with its viscosity index; ``nu100_cst`` solves ASTM D2270 for that index."""

    grade: int
    vi: int
    nu100_cst: float


# Viscosity at 100 C giving the stated index to an oil at its grade midpoint at 40 C,
# solved once from ASTM D2270 (table interpolation, procedure A/B) and checked in
# tests/unit/test_demo_fleet.py against chemicals.viscosity.viscosity_index.
OILS = {
    (46, 100): Oil(46, 100, 6.7604),
    (46, 110): Oil(46, 110, 7.0191),
    (46, 140): Oil(46, 140, 7.8247),
    (46, 150): Oil(46, 150, 8.0983),
    (68, 100): Oil(68, 100, 8.7313),
    (68, 105): Oil(68, 105, 8.9319),
}


@dataclass(frozen=True)
class Site:
    name: str
    oil: tuple[int, int]  # (ISO VG, VI) in the machines' tanks
    workdays_per_week: int
    test_temp_mean_c: float  # typical oil temperature during a test
    winter_shutdown: bool  # closed from 24 December to 1 January
    technicians: tuple[str, ...]


SITES = (
    Site("Greyfen Quarry", (46, 150), 6, 46.0, True, ("Ines Marwood", "Tobias Fenck")),
    Site("Lowmarsh Pit", (46, 110), 6, 52.0, True, ("Priya Oduya", "Leon Habberley")),
    Site("Saltbrook Cut", (68, 105), 7, 58.0, False, ("Marta Quesnel", "Sami Ortvall")),
)
WORKSHOP_TECHNICIAN = "Dana Kettleby"  # rebuilds pumps in the central shop


@dataclass(frozen=True)
class ModelSpec:
    """An invented pump model; limits are at the model's reference conditions."""

    code: str
    serial_prefix: str
    displacement_cc: float
    rated_pressure_bar: float
    max_speed_rpm: float
    ref_pressure_bar: float
    ref_oil: tuple[int, int]
    test_speed_rpm: float
    case_drain_limit_lpm: float
    servo_pressure_limit_bar: float
    neutral_drift_limit_bar: float
    reading_interval_hours: int = 500
    reading_interval_days: int = 120
    ref_temp_c: float = 50.0
    test_temp_min_c: float = 40.0
    test_temp_max_c: float = 60.0

    @property
    def max_flow_lpm(self) -> float:
        """Theoretical flow at maximum speed, Vg * n / 1000."""
        return self.displacement_cc * self.max_speed_rpm / 1000.0

    @property
    def description(self) -> str:
        return f"closed-circuit axial piston pump, servo control, {self.displacement_cc:g} cm3/rev"


# Case drain limits: 5-6.5 % of theoretical flow at maximum speed; servo limits
# 17-20 bar below a healthy 25-28 bar; drift limits 10-15 bar (common practice,
# no published source; invented figures for an invented maker).
MODELS = (
    ModelSpec("TQ-55", "A", 55, 420, 2600, 400, (46, 100), 2200, 8.5, 18.0, 10.0),
    ModelSpec("TQ-90", "B", 90, 400, 2400, 380, (46, 100), 2100, 14.0, 17.0, 12.0),
    ModelSpec("TQ-145", "C", 145, 420, 2200, 400, (68, 100), 2000, 17.5, 18.0, 12.0, 600, 150),
    ModelSpec("TQ-250", "D", 250, 380, 1900, 350, (68, 100), 1800, 24.0, 20.0, 15.0, 600, 150),
)
MODEL_BY_CODE = {m.code: m for m in MODELS}


@dataclass(frozen=True)
class MachineType:
    description: str
    positions: tuple[tuple[str, str], ...]  # (position, model code)
    hours_per_day: tuple[float, float]  # range of calendar-day utilisation


TYPES = {
    "SH": MachineType(
        "face shovel, 120 t",
        (("main-1", "TQ-250"), ("main-2", "TQ-250"), ("main-3", "TQ-250"), ("swing", "TQ-145")),
        (12.0, 18.0),
    ),
    "EXL": MachineType(
        "excavator, 70 t", (("main-front", "TQ-145"), ("main-rear", "TQ-145"), ("swing", "TQ-90")), (7.0, 15.0)
    ),
    "EXS": MachineType(
        "excavator, 35 t", (("main-front", "TQ-90"), ("main-rear", "TQ-90"), ("swing", "TQ-55")), (5.0, 12.0)
    ),
    "WL": MachineType("wheel loader", (("drive", "TQ-145"), ("work", "TQ-90")), (3.0, 12.0)),
    "DR": MachineType(
        "drill rig", (("travel-left", "TQ-55"), ("travel-right", "TQ-55"), ("rotation", "TQ-90")), (6.0, 14.0)
    ),
}

# (unit, type, site index). Unit numbers: first digit = site.
MACHINES = (
    *(("SH-10" + str(i), "SH", 0) for i in (1, 2)),
    *(("EX-11" + str(i), "EXL", 0) for i in (0, 1, 2)),
    *(("EX-12" + str(i), "EXS", 0) for i in (0, 1)),
    *(("WL-13" + str(i), "WL", 0) for i in (0, 1, 2, 3)),
    *(("DR-14" + str(i), "DR", 0) for i in (0, 1)),
    ("SH-201", "SH", 1),
    *(("EX-21" + str(i), "EXL", 1) for i in (0, 1, 2, 3, 4)),
    *(("EX-22" + str(i), "EXS", 1) for i in (0, 1, 2)),
    *(("WL-23" + str(i), "WL", 1) for i in (0, 1, 2, 3)),
    *(("DR-24" + str(i), "DR", 1) for i in (0, 1)),
    ("SH-301", "SH", 2),
    *(("EX-31" + str(i), "EXL", 2) for i in (0, 1)),
    *(("EX-32" + str(i), "EXS", 2) for i in (0, 1, 2)),
    *(("WL-33" + str(i), "WL", 2) for i in (0, 1, 2, 3, 4)),
    *(("DR-34" + str(i), "DR", 2) for i in (0, 1)),
)

# Special machines (days are counted back from ``today``).
RETIRED_MACHINE = "EX-212"  # frame cracked; retired on MOVE_DAYS_AGO, its pumps moved to ...
REPLACEMENT_MACHINE = "EX-214"  # ... a used excavator bought without pumps, in service from that day
MOVE_DAYS_AGO = 400
NEW_MACHINE = "WL-334"  # delivered new; its pumps have two readings each
NEW_MACHINE_DAYS_AGO = 75
METER_MACHINE = "DR-341"  # hour meter replaced (new meter starts at 0)
METER_REPLACED_DAYS_AGO = 300
OIL_CHANGE_MACHINE = "EX-320"  # changed from VG 46 VI 140 to the site's VG 68 VI 105
OIL_CHANGE_DAYS_AGO = 520
OIL_BEFORE_CHANGE = (46, 140)
SHELF_SPARES_PER_MODEL = 2  # exchange pumps on the shelf, no readings


@dataclass(frozen=True)
class Scenario:
    """A pump that shows one case the planner must handle."""

    name: str
    serial: str
    machine: str
    position: str
    what: str


SCENARIOS = (
    Scenario("linear", "C-28412", "EX-110", "main-front", "steady linear case drain wear, limit expected within a year"),
    Scenario("exponential", "D-17093", "SH-102", "main-2", "accelerating (exponential) case drain wear"),
    Scenario("step", "B-19736", "WL-231", "work", "sudden step in case drain (a broken part), then slow wear"),
    Scenario("neutral_reset", "A-20158", "DR-240", "travel-left", "neutral drift near its limit, fixed by a neutral_reset"),
    Scenario("overhaul", "C-16377", "SH-201", "swing", "worn pump overhauled mid-history; wear restarts low"),
    Scenario("move", "B-18521", "EX-212", "swing", "moved with its machine's pumps from EX-212 to EX-214 (move event)"),
    Scenario("past_limit", "D-15264", "SH-301", "main-1", "case drain already past its limit, overhaul still waiting"),
    Scenario("new_pump", "B-24187", "WL-334", "work", "new pump on a new machine: two readings only"),
    Scenario("typo", "A-21385", "EX-120", "swing", "one case drain typed with a slipped decimal point (ten times too high)"),
    Scenario("meter_replaced", "A-22907", "DR-341", "travel-right", "its machine's hour meter was replaced (meter_replaced)"),
    Scenario("servo_decline", "B-25530", "EX-311", "swing", "servo pressure falling steadily toward its limit"),
    Scenario("servo_repair", "C-26604", "WL-132", "drive", "servo pressure fell below its limit; control_repair restored it"),
    Scenario("charge_wear", "B-27118", "DR-141", "rotation", "charge pump wear: servo and charge pressure falling together"),
)
SCENARIO_BY_SERIAL = {s.serial: s for s in SCENARIOS}
SCENARIO_BY_NAME = {s.name: s for s in SCENARIOS}

# Money of the invented operator (invented figures, in euros): per model a planned
# rebuild or exchange and an in-service failure (parts, secondary damage, flushing
# the circuit); downtime per site, with one machine whose standing costs more.
CURRENCY = "EUR"
MODEL_COSTS = {"TQ-55": (3_800, 14_500), "TQ-90": (5_200, 21_000), "TQ-145": (7_900, 33_000), "TQ-250": (12_500, 52_000)}
SITE_DOWNTIME = {  # cost per hour, hours standing for a planned job, hours for a failure
    "Greyfen Quarry": (140, 8, 36),
    "Lowmarsh Pit": (180, 8, 40),
    "Saltbrook Cut": (220, 10, 48),
}
MACHINE_DOWNTIME = {OIL_CHANGE_MACHINE: (350, 10, 56)}  # the site's main loading shovel
