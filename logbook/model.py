"""Domain records shared by every layer (stdlib only).

All numbers are in canonical units: bar, L/min, degrees C, hours, cSt, rpm,
cm^3/rev. Conversion to and from user units happens in ``logbook.units`` at the
edges (CLI, import, TUI, exports), never here.
"""

from __future__ import annotations

from collections import defaultdict
from dataclasses import dataclass, field
from datetime import date, datetime
from enum import Enum
from typing import Iterable, Sequence


class Kind(str, Enum):
    """The three wear readings the logbook trends."""

    CASE_DRAIN = "case_drain"  # L/min, rises with wear
    SERVO_PRESSURE = "servo_pressure"  # bar, falls with wear
    NEUTRAL_DRIFT = "neutral_drift"  # bar (A-B difference at neutral), magnitude rises

    @property
    def label(self) -> str:
        return KIND_LABELS[self]

    @property
    def unit(self) -> str:
        return KIND_UNITS[self]


KIND_LABELS = {
    Kind.CASE_DRAIN: "case drain",
    Kind.SERVO_PRESSURE: "servo pressure",
    Kind.NEUTRAL_DRIFT: "neutral drift",
}
KIND_UNITS = {Kind.CASE_DRAIN: "L/min", Kind.SERVO_PRESSURE: "bar", Kind.NEUTRAL_DRIFT: "bar"}
ALL_KINDS = (Kind.CASE_DRAIN, Kind.SERVO_PRESSURE, Kind.NEUTRAL_DRIFT)


class EventKind(str, Enum):
    """Things that happen to a pump or a machine between readings."""

    OVERHAUL = "overhaul"  # pump rebuilt: new wear segment for every kind
    EXCHANGE = "exchange"  # pump taken out, another unit put in its place (Event.serial_in names it): new segment
    NEUTRAL_RESET = "neutral_reset"  # neutral re-adjusted: new segment for neutral drift only
    CONTROL_REPAIR = "control_repair"  # control valve / servo repaired: new segment for servo pressure and drift
    OIL_CHANGE = "oil_change"
    MOVE = "move"  # pump moved to another machine or position
    METER_REPLACED = "meter_replaced"  # machine hour meter replaced
    PARKED = "parked"  # machine stands still from this day: its pumps run no hours until it is back
    BACK_IN_SERVICE = "back_in_service"  # a parked machine runs again from this day


#: Events of a machine, not of a pump: recorded with ``machine`` and no serial.
MACHINE_EVENTS = frozenset({EventKind.METER_REPLACED, EventKind.PARKED, EventKind.BACK_IN_SERVICE})


#: Which reading kinds restart their trend at an event.
SEGMENT_RESETS: dict[EventKind, tuple[Kind, ...]] = {
    EventKind.OVERHAUL: ALL_KINDS,
    EventKind.EXCHANGE: ALL_KINDS,
    EventKind.NEUTRAL_RESET: (Kind.NEUTRAL_DRIFT,),
    EventKind.CONTROL_REPAIR: (Kind.SERVO_PRESSURE, Kind.NEUTRAL_DRIFT),
}


@dataclass(frozen=True)
class Limit:
    """A wear limit: ``direction`` is "above" (rising readings) or "below" (falling)."""

    kind: Kind
    value: float
    direction: str  # "above" | "below"


@dataclass(frozen=True)
class PumpModel:
    code: str
    description: str
    displacement_cc: float  # cm^3/rev, maximum
    rated_pressure_bar: float
    max_speed_rpm: float
    ref_temp_c: float  # reference oil temperature for normalization
    ref_pressure_bar: float  # reference test pressure for normalization
    oil_grade: int  # ISO VG of the reference oil
    oil_vi: float  # viscosity index of the reference oil
    test_speed_rpm: float  # speed to test at
    test_temp_min_c: float  # oil temperature window to test in
    test_temp_max_c: float
    reading_interval_hours: float | None  # a reading is due after this many operating hours
    reading_interval_days: int | None  # ... or after this many calendar days
    limits: tuple[Limit, ...] = ()

    def limit(self, kind: Kind) -> Limit | None:
        for lim in self.limits:
            if lim.kind == kind:
                return lim
        return None


@dataclass(frozen=True)
class Machine:
    unit: str  # the operator's unit number, e.g. "EX-07"
    site: str
    description: str = ""


@dataclass(frozen=True)
class Pump:
    serial: str
    model: str  # PumpModel.code
    note: str = ""


@dataclass(frozen=True)
class Fitment:
    """Pump ``serial`` sat in ``machine``/``position`` from ``fitted_on`` until ``removed_on``."""

    id: int | None
    serial: str
    machine: str
    position: str
    fitted_on: date
    removed_on: date | None
    machine_hours_at_fit: float  # machine hour-meter reading when fitted
    pump_hours_at_fit: float  # pump's own operating hours when fitted (0 for new)
    machine_hours_at_removal: float | None = None


@dataclass(frozen=True)
class Reading:
    id: int | None
    serial: str
    taken_on: date
    machine_hours: float  # hour meter of the machine the pump sat in
    case_drain_lpm: float | None = None
    servo_pressure_bar: float | None = None
    neutral_drift_bar: float | None = None  # signed A-B
    charge_pressure_bar: float | None = None
    oil_temp_c: float | None = None
    test_pressure_bar: float | None = None
    test_speed_rpm: float | None = None
    oil_grade: int | None = None  # ISO VG; None = the model's reference oil
    oil_vi: float | None = None
    iso4406: str | None = None  # e.g. "18/16/13"
    technician: str = ""
    note: str = ""
    entered_by: str = ""
    entered_at: datetime | None = None
    superseded_by: int | None = None  # id of the correcting reading, if corrected
    machine: str | None = None  # machine the pump sat in when read (set by the store)
    removed_reason: str | None = None  # set when the reading was removed (kept, never deleted)
    nu40_cst: float | None = None  # measured kinematic viscosity of the oil at 40 C (mm^2/s)
    nu100_cst: float | None = None  # ... and at 100 C

    def value(self, kind: Kind) -> float | None:
        if kind is Kind.CASE_DRAIN:
            return self.case_drain_lpm
        if kind is Kind.SERVO_PRESSURE:
            return self.servo_pressure_bar
        return self.neutral_drift_bar


@dataclass(frozen=True)
class Event:
    id: int | None
    kind: EventKind
    happened_on: date
    serial: str | None = None  # pump events
    machine: str | None = None  # machine the event happened on
    hours: float | None = None  # machine hour meter at the event (old meter for meter_replaced)
    to_machine: str | None = None  # move: target machine
    to_position: str | None = None  # move: target position
    to_hours: float | None = None  # move: target machine's meter; meter_replaced: new meter start
    technician: str = ""
    note: str = ""
    entered_by: str = ""
    entered_at: datetime | None = None
    removed_reason: str | None = None  # set when the event was removed (kept, never deleted)
    serial_in: str | None = None  # exchange: serial of the pump fitted in its place


@dataclass(frozen=True)
class PumpHistory:
    """Everything the analysis needs about one pump, in date order."""

    pump: Pump
    model: PumpModel
    fitments: tuple[Fitment, ...]
    readings: tuple[Reading, ...]  # current (not superseded) readings only
    events: tuple[Event, ...]  # pump events and the machine events (model.MACHINE_EVENTS) of its machines


@dataclass(frozen=True)
class Fleet:
    """A whole-database snapshot handed from the store to the analysis."""

    models: dict[str, PumpModel]
    machines: dict[str, Machine]
    pumps: dict[str, Pump]
    fitments: tuple[Fitment, ...]
    readings: Sequence[Reading]  # a tuple, or the store's columns (logbook.columns.ReadingColumns)
    events: tuple[Event, ...]
    source: str = ""  # database path, for provenance lines
    change_count: int = 0  # the store's change_count() when read: rises with every committed write

    def history(self, serial: str) -> PumpHistory:
        return self.histories([serial])[0]

    def histories(self, serials: Iterable[str] | None = None) -> list[PumpHistory]:
        """Histories of the given pumps (default: all, by serial), indexes built once.
        Readings are the current ones (not superseded); events are the pump's own plus
        the machine events (meter replacements, parked, back in service) of every machine
        it sat in, in date order."""
        fits: dict[str, list[Fitment]] = defaultdict(list)
        reads: dict[str, list[Reading]] = defaultdict(list)
        own: dict[str, list[Event]] = defaultdict(list)
        meters: dict[str, list[Event]] = defaultdict(list)
        for f in self.fitments:
            fits[f.serial].append(f)
        for r in self.readings:
            if r.superseded_by is None:
                reads[r.serial].append(r)
        for e in self.events:
            if e.kind in MACHINE_EVENTS:
                if e.machine is not None:
                    meters[e.machine].append(e)
            elif e.serial is not None:
                own[e.serial].append(e)
        out = []
        for serial in sorted(self.pumps) if serials is None else serials:
            pump = self.pumps[serial]
            fitted = tuple(sorted(fits[serial], key=lambda f: (f.fitted_on, f.id or 0)))
            events = own[serial] + [e for m in sorted({f.machine for f in fitted}) for e in meters[m]]
            out.append(
                PumpHistory(
                    pump=pump,
                    model=self.models[pump.model],
                    fitments=fitted,
                    readings=tuple(sorted(reads[serial], key=lambda r: (r.taken_on, r.machine_hours))),
                    events=tuple(sorted(events, key=lambda e: (e.happened_on, e.id or 0))),
                )
            )
        return out


#: Characters of a value a message quotes; the rest is counted, not shown.
ECHO_LIMIT = 60


def echo(value: object) -> str:
    """A value as a message quotes it: its repr, a long text cut to its first
    ``ECHO_LIMIT`` characters and followed by how long it is (a 1 MB cell would
    otherwise fill the screen)."""
    if isinstance(value, str) and len(value) > ECHO_LIMIT:
        return f"{value[:ECHO_LIMIT]!r}... ({len(value)} characters)"
    text = repr(value)
    if len(text) > ECHO_LIMIT + 2:
        return f"{text[:ECHO_LIMIT]}... ({len(text)} characters)"
    return text


@dataclass
class Problem:
    """One thing wrong with an input: names the field, the value and what is allowed.
    The value is kept whole; its message quotes it through ``echo``."""

    field: str
    value: object
    allowed: str
    unit: str = ""
    line: int | None = None  # CSV line number, when from a file

    def __str__(self) -> str:
        where = f"line {self.line}: " if self.line is not None else ""
        unit = f" {self.unit}" if self.unit else ""
        return f"{where}{self.field} = {echo(self.value)}{unit}: {self.allowed}"


class InputRejected(Exception):
    """Raised with every problem found; nothing has been written."""

    def __init__(self, problems: list[Problem]):
        self.problems = list(problems)
        super().__init__("; ".join(str(p) for p in self.problems))


@dataclass(frozen=True)
class ImportReport:
    table: str
    added: int = 0
    already_present: int = 0
    blank: int = 0
    problems: list[Problem] = field(default_factory=list)
    flagged: list[str] = field(default_factory=list)  # accepted, but worth a second look
    dry_run: bool = False
    ids: list[int] = field(default_factory=list)  # ids of the rows written (readings, events)


# ------------------------------------------------------------------ money (user's currency, no rates)


@dataclass(frozen=True)
class ModelCosts:
    """What one pump model's jobs cost: a planned overhaul or exchange (parts and shop labour)
    and an in-service failure (parts, secondary damage, circuit flush)."""

    model: str
    planned: float
    failure: float


@dataclass(frozen=True)
class Downtime:
    """A site's or a machine's downtime: cost per hour and the hours a planned job and a
    failure keep it standing (a machine's own figures win over its site's)."""

    scope: str  # "site" or "machine"
    name: str
    cost_per_hour: float
    planned_hours: float
    failure_hours: float


@dataclass(frozen=True)
class CostBook:
    """Every cost entered, in one currency (an ISO 4217 code such as EUR; no exchange rates)."""

    currency: str = ""
    models: dict[str, ModelCosts] = field(default_factory=dict)
    sites: dict[str, Downtime] = field(default_factory=dict)
    machines: dict[str, Downtime] = field(default_factory=dict)

    def downtime(self, machine: str | None, site: str | None) -> Downtime | None:
        """The machine's own downtime figures, else its site's, else None."""
        if machine is not None and machine in self.machines:
            return self.machines[machine]
        return self.sites.get(site) if site is not None else None

    @property
    def empty(self) -> bool:
        return not self.models
