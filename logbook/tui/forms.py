"""What the entry forms ask for: fields, their parsers in the user's units, and the
records built from them (pure: no Textual). Checks come from logbook.validate."""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date
from typing import Callable

from logbook import fmt, units, validate
from logbook.model import MACHINE_EVENTS, Event, EventKind, Problem, PumpHistory, Reading
from logbook.units import UnitPrefs

Parser = Callable[[str], tuple[object, Problem | None]]


@dataclass(frozen=True)
class FieldDef:
    name: str  # also the name the store uses in its problems
    label: str
    parse: Parser
    unit: str = ""
    placeholder: str = ""


def _number(spec_name: str, unit: str, *, required: str = "", specs=validate.READING_FIELDS) -> Parser:
    spec = specs[spec_name]

    def parse(text: str):
        value, problem = validate.parse_quantity(spec, text, unit)
        if problem is None and value is None and required:
            return None, Problem(spec_name, text, required, unit)
        return value, problem

    return parse


def _date(name: str, today: date) -> Parser:
    return lambda text: validate.parse_date(name, text, today)


def _name(name: str, required: bool = False) -> Parser:
    return lambda text: validate.parse_name(name, text, required=required)


def _free(text: str):
    """Free text is stored exactly as typed (spaces included), as on every other path."""
    return text, None


def _oil_grade(text: str):
    return validate.parse_oil_grade(text)


def _iso4406(text: str):
    return validate.parse_iso4406(text)


def reading_fields(prefs: UnitPrefs, today: date) -> tuple[FieldDef, ...]:
    p, f, t = prefs.pressure, prefs.flow, prefs.temperature
    return (
        FieldDef("date", "Date", _date("date", today), "", "YYYY-MM-DD"),
        FieldDef("machine_hours", "Hour meter", _number("machine_hours", "h", required="is required: the machine's hour meter now"), "h"),
        FieldDef("case_drain", "Case drain", _number("case_drain", f), f),
        FieldDef("servo_pressure", "Servo pressure", _number("servo_pressure", p), p),
        FieldDef("neutral_drift", "Neutral drift", _number("neutral_drift", p), p, "A-B, signed"),
        FieldDef("oil_temp", "Oil temperature", _number("oil_temp", t), t),
        FieldDef("test_pressure", "Test pressure", _number("test_pressure", p), p),
        FieldDef("test_speed", "Test speed", _number("test_speed", "rpm"), "rpm"),
        FieldDef("oil_grade", "Oil ISO VG", _oil_grade, "", "e.g. 46"),
        FieldDef("oil_vi", "Oil VI", _number("oil_vi", ""), ""),
        FieldDef("nu40_cst", "Viscosity 40 C", _number("nu40_cst", "cSt"), "cSt", "if measured"),
        FieldDef("nu100_cst", "Viscosity 100 C", _number("nu100_cst", "cSt"), "cSt", "if measured"),
        FieldDef("charge_pressure", "Charge pressure", _number("charge_pressure", p), p, "optional"),
        FieldDef("iso4406", "ISO 4406", _iso4406, "", "e.g. 18/16/13"),
        FieldDef("technician", "Technician", _free, ""),
        FieldDef("note", "Note", _free, ""),
    )


def _shown(canonical: float | None, unit: str) -> str:
    if canonical is None:
        return ""
    value = units.from_canonical(canonical, unit) if unit else canonical
    return f"{value:.4g}" if abs(value) < 10_000 else f"{value:.0f}"


def reading_prefill(history: PumpHistory, prefs: UnitPrefs, today: date, user: str = "") -> dict[str, str]:
    """Start values: only what is known before anything is measured: today, the model's
    test conditions (the pressure and speed its test is run at), the oil in the machine
    (the last reading's grade and VI, else the model's reference oil: a blank would
    normalize with the reference oil) and the signed-in user as technician. No measured
    value and no name comes from the last reading or the last pump of a round; the form
    marks these as prefilled until changed."""
    m = history.model
    last = history.readings[-1] if history.readings else None
    return {
        "date": today.isoformat(),
        "test_pressure": _shown(m.ref_pressure_bar, prefs.pressure),
        "test_speed": _shown(m.test_speed_rpm, ""),
        "oil_grade": str(last.oil_grade if last and last.oil_grade else m.oil_grade),
        "oil_vi": _shown(last.oil_vi if last and last.oil_vi else m.oil_vi, ""),
        # An input box shows its text raw: a name with control characters is not offered.
        "technician": user if fmt.visible(user) == user else "",
    }


def build_reading(serial: str, values: dict[str, object]) -> Reading:
    """A Reading from parsed (canonical) field values."""
    return Reading(
        id=None,
        serial=serial,
        taken_on=values["date"],
        machine_hours=values["machine_hours"],
        case_drain_lpm=values.get("case_drain"),
        servo_pressure_bar=values.get("servo_pressure"),
        neutral_drift_bar=values.get("neutral_drift"),
        charge_pressure_bar=values.get("charge_pressure"),
        oil_temp_c=values.get("oil_temp"),
        test_pressure_bar=values.get("test_pressure"),
        test_speed_rpm=values.get("test_speed"),
        oil_grade=values.get("oil_grade"),
        oil_vi=values.get("oil_vi"),
        iso4406=values.get("iso4406"),
        technician=values.get("technician") or "",
        note=values.get("note") or "",
        nu40_cst=values.get("nu40_cst"),
        nu100_cst=values.get("nu100_cst"),
    )


def reason_field() -> FieldDef:
    """Why a reading is corrected or removed (kept in the audit trail): required."""
    def parse(text: str):
        if not text.strip():
            return None, Problem("reason", text, "is required: say why, for the audit trail")
        return validate.parse_free_text("reason", text)

    return FieldDef("reason", "Reason", parse, "", "why (kept in the history)")


def reading_texts(reading: Reading, prefs: UnitPrefs) -> dict[str, str]:
    """A stored reading's values as the form shows them (the user's units), to correct it."""
    p, f, t = prefs.pressure, prefs.flow, prefs.temperature
    return {
        "date": reading.taken_on.isoformat(),
        "machine_hours": f"{reading.machine_hours:g}",
        "case_drain": _shown(reading.case_drain_lpm, f),
        "servo_pressure": _shown(reading.servo_pressure_bar, p),
        "neutral_drift": _shown(reading.neutral_drift_bar, p),
        "oil_temp": _shown(reading.oil_temp_c, t),
        "test_pressure": _shown(reading.test_pressure_bar, p),
        "test_speed": _shown(reading.test_speed_rpm, ""),
        "oil_grade": str(reading.oil_grade) if reading.oil_grade else "",
        "oil_vi": _shown(reading.oil_vi, ""),
        "nu40_cst": _shown(reading.nu40_cst, ""),
        "nu100_cst": _shown(reading.nu100_cst, ""),
        "charge_pressure": _shown(reading.charge_pressure_bar, p),
        "iso4406": reading.iso4406 or "",
        "technician": reading.technician if fmt.visible(reading.technician) == reading.technician else "",
        "note": reading.note if fmt.visible(reading.note) == reading.note else "",
    }


def corrections(old: Reading, new: Reading, texts: dict[str, str], typed: dict[str, str]) -> dict[str, object]:
    """The fields a correction changes: those whose text was changed on the form (a value
    shown rounded and left alone is not rewritten by its rounding)."""
    field_of = {
        "date": "taken_on", "machine_hours": "machine_hours", "case_drain": "case_drain_lpm",
        "servo_pressure": "servo_pressure_bar", "neutral_drift": "neutral_drift_bar", "oil_temp": "oil_temp_c",
        "test_pressure": "test_pressure_bar", "test_speed": "test_speed_rpm", "oil_grade": "oil_grade",
        "oil_vi": "oil_vi", "nu40_cst": "nu40_cst", "nu100_cst": "nu100_cst", "charge_pressure": "charge_pressure_bar",
        "iso4406": "iso4406",
        "technician": "technician", "note": "note",
    }
    return {attr: getattr(new, attr) for name, attr in field_of.items()
            if typed.get(name, "") != texts.get(name, "") and getattr(new, attr) != getattr(old, attr)}


# -- events ------------------------------------------------------------------------------

EVENT_KIND_WORDS = {
    EventKind.OVERHAUL: "Overhaul (pump rebuilt)",
    EventKind.EXCHANGE: "Exchange (another unit put in its place)",
    EventKind.NEUTRAL_RESET: "Neutral re-set",
    EventKind.CONTROL_REPAIR: "Control repair",
    EventKind.OIL_CHANGE: "Oil change",
    EventKind.MOVE: "Move to another machine",
    EventKind.METER_REPLACED: "Hour meter replaced",
    EventKind.PARKED: "Machine parked (stands still)",
    EventKind.BACK_IN_SERVICE: "Machine back in service",
}

#: Fields each event kind asks for besides date, technician and note.
EVENT_FIELDS = {
    EventKind.MOVE: ("hours", "to_machine", "to_position", "to_hours"),
    EventKind.METER_REPLACED: ("hours", "to_hours"),
    EventKind.EXCHANGE: ("hours", "serial_in"),
}
DEFAULT_EVENT_FIELDS = ("hours",)


def event_fields(today: date, kind: EventKind) -> tuple[FieldDef, ...]:
    hours_label = "Old meter last" if kind is EventKind.METER_REPLACED else "Hour meter"
    to_hours_label = "New meter start" if kind is EventKind.METER_REPLACED else "Target meter"
    return (
        FieldDef("date", "Date", _date("date", today), "", "YYYY-MM-DD"),
        FieldDef("hours", hours_label, _number("hours", "h", specs=validate.HOURS_FIELDS), "h"),
        FieldDef("to_machine", "To machine", _name("to_machine"), ""),
        FieldDef("to_position", "To position", _name("to_position"), ""),
        FieldDef("to_hours", to_hours_label, _number("to_hours", "h", specs=validate.HOURS_FIELDS), "h"),
        FieldDef("serial_in", "Pump fitted in", _name("serial_in"), "", "serial, blank if not known"),
        FieldDef("technician", "Technician", _free, ""),
        FieldDef("note", "Note", _free, ""),
    )


def build_event(kind: EventKind, serial: str, machine: str | None, values: dict[str, object]) -> Event:
    wanted = set(EVENT_FIELDS.get(kind, DEFAULT_EVENT_FIELDS))
    return Event(
        id=None,
        kind=kind,
        happened_on=values["date"],
        serial=None if kind in MACHINE_EVENTS else serial,
        machine=machine,
        hours=values.get("hours") if "hours" in wanted else None,
        to_machine=values.get("to_machine") if "to_machine" in wanted else None,
        to_position=values.get("to_position") if "to_position" in wanted else None,
        to_hours=values.get("to_hours") if "to_hours" in wanted else None,
        serial_in=values.get("serial_in") if "serial_in" in wanted else None,
        technician=values.get("technician") or "",
        note=values.get("note") or "",
    )


def field_of(problem: Problem, names) -> str | None:
    """The form field a store problem is about, when the form has that field."""
    return problem.field if problem.field in names else None
