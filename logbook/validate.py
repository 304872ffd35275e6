"""Field domains and input checks (pure: no SQL, no UI).

Every check returns ``Problem`` objects that name the field, the value as given,
its unit and what is allowed. The store runs these before it writes anything.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from datetime import date

from logbook import units
from logbook.model import EventKind, Problem, PumpModel, Reading, echo
from logbook.units import Quantity

#: ISO 3448 viscosity grades (mid-point kinematic viscosity at 40 C in cSt).
ISO_VG_GRADES = (2, 3, 5, 7, 10, 15, 22, 32, 46, 68, 100, 150, 220, 320, 460, 680, 1000, 1500)

EARLIEST_DATE = date(1970, 1, 1)


@dataclass(frozen=True)
class FieldSpec:
    """A numeric field: canonical range and the quantity its unit belongs to."""

    name: str
    quantity: Quantity
    minimum: float
    maximum: float
    integer: bool = False
    help: str = ""

    def describe_range(self, unit: str | None = None) -> str:
        unit = unit or self.quantity.canonical
        lo = units.from_canonical(self.minimum, unit)
        hi = units.from_canonical(self.maximum, unit)
        u = f" {unit}" if unit else ""
        return f"a number from {_plain(lo)} to {_plain(hi)}{u}"


def _plain(x: float) -> str:
    """A bound as a person writes it: 500000 and 1,000,000,000 rather than 5e+05 and 1e+09."""
    return f"{x:,.12g}" if abs(x) >= 1e6 else f"{x:g}"


# Plausible domains of every numeric field (canonical units). Wide enough for any
# mobile or industrial piston pump, narrow enough to catch a slipped decimal point
# or a value typed into the wrong box (common practice, no published source).
READING_FIELDS: dict[str, FieldSpec] = {
    "machine_hours": FieldSpec("machine_hours", units.HOURS, 0, 500_000, help="machine hour meter"),
    "case_drain": FieldSpec("case_drain", units.FLOW, 0, 400, help="case drain flow"),
    "servo_pressure": FieldSpec("servo_pressure", units.PRESSURE, 0, 120, help="servo (control) pressure"),
    "neutral_drift": FieldSpec("neutral_drift", units.PRESSURE, -150, 150, help="A-B pressure at neutral, signed"),
    "charge_pressure": FieldSpec("charge_pressure", units.PRESSURE, 0, 120, help="charge pressure"),
    "oil_temp": FieldSpec("oil_temp", units.TEMPERATURE, -30, 120, help="oil temperature during the test"),
    "test_pressure": FieldSpec("test_pressure", units.PRESSURE, 5, 700, help="system pressure during the case drain test"),
    "test_speed": FieldSpec("test_speed", units.SPEED, 100, 6000, help="pump speed during the test"),
    "oil_vi": FieldSpec("oil_vi", units.NONE, 0, 400, help="viscosity index"),
    # measured kinematic viscosity of the reading's oil (an oil analysis, ASTM D445): 2 cSt is the
    # lowest ASTM D341's plain Walther form holds to, 3,520 the top of ISO VG 3200 (+10 %)
    "nu40_cst": FieldSpec("nu40_cst", units.VISCOSITY, 2, 3520,
                          help="measured oil viscosity at 40 C, cSt = mm2/s (used instead of the grade's midpoint)"),
    "nu100_cst": FieldSpec("nu100_cst", units.VISCOSITY, 2, 500,
                           help="measured oil viscosity at 100 C, cSt = mm2/s (with the 40 C value; else from the VI)"),
}

MODEL_FIELDS: dict[str, FieldSpec] = {
    "displacement": FieldSpec("displacement", units.DISPLACEMENT, 1, 3000),
    "rated_pressure": FieldSpec("rated_pressure", units.PRESSURE, 20, 700),
    "max_speed": FieldSpec("max_speed", units.SPEED, 100, 6000),
    "ref_temp": FieldSpec("ref_temp", units.TEMPERATURE, 0, 110),
    "ref_pressure": FieldSpec("ref_pressure", units.PRESSURE, 5, 700),
    "oil_vi": FieldSpec("oil_vi", units.NONE, 0, 400),
    "test_speed": FieldSpec("test_speed", units.SPEED, 100, 6000),
    "test_temp_min": FieldSpec("test_temp_min", units.TEMPERATURE, -30, 120),
    "test_temp_max": FieldSpec("test_temp_max", units.TEMPERATURE, -30, 120),
    "reading_interval_hours": FieldSpec("reading_interval_hours", units.HOURS, 1, 100_000),
    "reading_interval_days": FieldSpec("reading_interval_days", units.DAYS, 1, 3650, integer=True),
    "case_drain_limit": FieldSpec("case_drain_limit", units.FLOW, 0.01, 400),
    "servo_pressure_limit": FieldSpec("servo_pressure_limit", units.PRESSURE, 0.1, 120),
    "neutral_drift_limit": FieldSpec("neutral_drift_limit", units.PRESSURE, 0.01, 150),
}

HOURS_FIELDS: dict[str, FieldSpec] = {
    "hours": FieldSpec("hours", units.HOURS, 0, 500_000),
    "to_hours": FieldSpec("to_hours", units.HOURS, 0, 500_000),
    "machine_hours_at_fit": FieldSpec("machine_hours_at_fit", units.HOURS, 0, 500_000),
    "pump_hours_at_fit": FieldSpec("pump_hours_at_fit", units.HOURS, 0, 500_000),
}

#: Money (the user's currency) and downtime hours; wide bounds, zero allowed.
COST_FIELDS: dict[str, FieldSpec] = {
    "planned": FieldSpec("--planned", units.NONE, 0, 1e9, help="planned overhaul or exchange cost"),
    "failure": FieldSpec("--failure", units.NONE, 0, 1e9, help="in-service failure cost"),
    "per_hour": FieldSpec("--per-hour", units.NONE, 0, 1e7, help="downtime cost per hour"),
    "planned_hours": FieldSpec("--planned-hours", units.HOURS, 0, 10_000, help="downtime of a planned job"),
    "failure_hours": FieldSpec("--failure-hours", units.HOURS, 0, 10_000, help="downtime of a failure"),
}

#: On-screen labels of the entry forms' fields, used in every message a form shows.
FIELD_LABELS = {
    "date": "Date", "machine_hours": "Hour meter", "case_drain": "Case drain", "servo_pressure": "Servo pressure",
    "neutral_drift": "Neutral drift", "oil_temp": "Oil temperature", "test_pressure": "Test pressure",
    "test_speed": "Test speed", "oil_grade": "Oil ISO VG", "oil_vi": "Oil VI", "charge_pressure": "Charge pressure",
    "iso4406": "ISO 4406", "technician": "Technician", "note": "Note", "hours": "Hour meter",
    "to_machine": "To machine", "to_position": "To position", "to_hours": "Target meter", "serial": "Pump serial",
    "case_drain/servo_pressure/neutral_drift": "Case drain, servo pressure or neutral drift",
    "nu40_cst": "Viscosity 40 C", "nu100_cst": "Viscosity 100 C",
}

_NAME_RE = re.compile(r"^[A-Za-z0-9][A-Za-z0-9 ._/#-]{0,39}$")
_ISO4406_RE = re.compile(r"^([0-9]{1,2}|-|\*)/([0-9]{1,2})/([0-9]{1,2})$")  # ASCII digits only
#: YYYY-MM-DD and nothing else: date.fromisoformat (3.11) also takes 20260203 and 2026-W05-2.
_DATE_RE = re.compile(r"[0-9]{4}-[0-9]{2}-[0-9]{2}")
_WHOLE_RE = re.compile(r"[0-9]+")
#: Longest free text (technician, note, reason), as in one CSV cell.
MAX_TEXT = 500


def number_form(spec: FieldSpec, *, in_file: bool = False) -> str:
    """How a number of ``spec`` is written, with examples that fit the field: an hour meter
    '22950 or 22950.5', a signed field '2.4 or -1.5', a count of days '30'. Typed (``in_file``
    False: the command line, the forms) a decimal comma and thousands separators are read
    (``parse_quantity``); a CSV file takes a decimal point only, and says so."""
    if spec.integer:
        return "the digits 0-9, e.g. 30"
    if spec.name in THOUSANDS_FIRST or spec.quantity is units.HOURS:
        if in_file:
            return ("the digits 0-9 and a decimal point, e.g. 22950 or 22950.5 "
                    "(a thousands separator is not allowed in a CSV file)")
        return "the digits 0-9 and a decimal point or comma, e.g. 22950, 22,950 or 22950.5"
    examples = "2.4 or -1.5" if spec.minimum < 0 else "4.2"
    if in_file:
        sign = "an optional minus sign, " if spec.minimum < 0 else ""
        return f"the digits 0-9, {sign}a decimal point (a decimal comma is not allowed in a CSV file), e.g. {examples}"
    typed = "-1.5, -1,5 or 2.4" if spec.minimum < 0 else "4.2 or 4,2"
    return f"the digits 0-9{', a minus sign' if spec.minimum < 0 else ''} and a decimal point or comma, e.g. {typed}"


def parse_number(spec: FieldSpec, text: str | float | None, unit: str | None = None, *,
                 in_file: bool = False) -> tuple[float | None, Problem | None]:
    """Parse and range-check a number given in ``unit`` (digits and a decimal point: a CSV
    cell, ``in_file``, or what ``parse_quantity`` made of a typed number); returns
    (canonical value, problem)."""
    if text is None or (isinstance(text, str) and text.strip() == ""):
        return None, None
    unit_id = unit if unit is not None else spec.quantity.canonical
    shown_unit = unit_id
    if isinstance(text, str) and not units.is_number(text.strip()):
        raw = text.strip()
        readings, _ = number_readings(raw, spec, unit_id) if in_file and "," in raw else ([], "")
        if readings:  # 22,950 or 28,9: a number, though not as a CSV file holds one (suggested, not taken)
            what = ("a thousands separator" if readings[0] == raw.replace(",", "") else
                    "a decimal comma" if readings[0] == raw.replace(",", ".") else "a decimal comma or thousands separators")
            return None, Problem(spec.name, text, f"must be {spec.describe_range(unit_id)} written without {what} "
                                 f"(not allowed in a CSV file); did you mean {readings[0]}?", shown_unit)
        return None, Problem(spec.name, text, f"must be {spec.describe_range(unit_id)}, written with "
                             f"{number_form(spec, in_file=in_file)}", shown_unit)
    try:
        value = float(text.strip() if isinstance(text, str) else text)
    except (TypeError, ValueError):
        return None, Problem(spec.name, text, f"must be {spec.describe_range(unit_id)}", shown_unit)
    if not math.isfinite(value):
        return None, Problem(spec.name, text, f"must be {spec.describe_range(unit_id)}", shown_unit)
    if spec.integer and value != int(value):
        return None, Problem(spec.name, text, "must be a whole number", shown_unit)
    canonical = units.to_canonical(value, unit_id)
    # rounding room at each bound, relative to that bound (a range of 0 to 1e9 must not let -1 in)
    if canonical < spec.minimum - 1e-9 * max(1.0, abs(spec.minimum)) \
            or canonical > spec.maximum + 1e-9 * max(1.0, abs(spec.maximum)):
        return None, Problem(spec.name, text, f"must be {spec.describe_range(unit_id)}", shown_unit)
    return canonical, None


#: Fields a person types with thousands separators (the app prints them so: 22,950 h):
#: a comma followed by three digits is a thousands separator there, never a decimal comma.
THOUSANDS_FIRST = frozenset({"machine_hours", "hours", "to_hours", "machine_hours_at_fit", "pump_hours_at_fit"})

_GROUPED = re.compile(r"[-+]?[0-9]{1,3}(?:,[0-9]{3})+(?:\.[0-9]+)?")  # 22,950 or 1,234,567.5
_GROUPED_DOT = re.compile(r"[-+]?[0-9]{1,3}(?:\.[0-9]{3})+,[0-9]+")  # 1.234,5 (comma decimal, dot groups)
_DECIMAL_COMMA = re.compile(r"[-+]?[0-9]*,[0-9]+")  # 28,9
_NUMBER_TEXT = re.compile(r"([-+]?[0-9.,]*[0-9][0-9.,]*(?:[eE][-+]?[0-9]+)?)\s*((?:[^\W\d_]|°|/).*)?")


def number_readings(text: str, spec: FieldSpec, unit: str) -> tuple[list[str], str]:
    """The plain numbers (NUMBER form) ``text`` can mean, and why when there are two.
    '28,9' -> ['28.9']; '22,950' -> ['22950'] for an hour meter (THOUSANDS_FIRST), and for
    other fields the reading that is in the field's range; '1.234,5' -> ['1234.5']."""
    if units.is_number(text):
        return [text], ""
    if _GROUPED_DOT.fullmatch(text):
        return [text.replace(".", "").replace(",", ".")], ""
    grouped = _GROUPED.fullmatch(text) is not None
    decimal = _DECIMAL_COMMA.fullmatch(text) is not None
    if grouped and decimal:  # one comma and three digits after it: 1,800 or 1.8?
        if spec.name in THOUSANDS_FIRST:
            return [text.replace(",", "")], ""
        both = [text.replace(",", ""), text.replace(",", ".")]
        fits = [t for t in both if spec.minimum <= units.to_canonical(float(t), unit) <= spec.maximum]
        if len(fits) == 1:
            return fits, ""
        return [], f"could be {both[0]} or {both[1]}: write it without the comma, or with a decimal point"
    if grouped:
        return [text.replace(",", "")], ""
    if decimal:
        return [text.replace(",", ".")], ""
    return [], ""


def parse_quantity(spec: FieldSpec, text: str | None, default_unit: str) -> tuple[float | None, Problem | None]:
    """A number as a person types it, in ``default_unit`` unless a unit follows it
    ('1.8gpm', '265 psi', '122F', '20lpm', '22,950 h'), with a decimal comma ('28,9') or
    thousands separators ('22,950', '1,234.5', '1.234,5') where unambiguous; returns the
    canonical value. The problem names the field's unit as shown and what is allowed."""
    if text is None or text.strip() == "":
        return None, None
    raw = text.strip()
    allowed_units = units.allowed_units(spec.quantity)
    example = {"pressure": ", 250psi", "flow": ", 1.1gpm", "temperature": ", 122F"}.get(spec.quantity.name, "")
    if spec.name in THOUSANDS_FIRST or spec.quantity is units.HOURS:
        form = "e.g. 22950, 22,950 or 22950.5"
    elif spec.minimum < 0:
        form = f"e.g. 2.4, -1.5 or -1,5{example}"
    else:
        form = f"e.g. 4.2, 4,2{example}"
    m = _NUMBER_TEXT.fullmatch(raw)
    if m is None:
        return None, Problem(spec.name, text, f"must be {spec.describe_range(default_unit)} ({form})", default_unit)
    number, unit_text = m.group(1), (m.group(2) or "").strip()
    unit = units.resolve_unit(spec.quantity, unit_text) if unit_text else default_unit
    if unit is None:
        zero = "; a zero is 0, not the letter O" if "o" in unit_text.lower() else ""
        return None, Problem(spec.name, text, f"must be {spec.describe_range(default_unit)}: {unit_text!r} is not a unit "
                             f"of {spec.quantity.name} (allowed: {allowed_units or 'no unit'}{zero})", default_unit)
    readings, why = number_readings(number, spec, unit)
    if not readings:
        return None, Problem(spec.name, text, why or f"must be {spec.describe_range(unit)} ({form})", unit)
    value, problem = parse_number(spec, readings[0], unit)
    if problem is not None:
        problem = Problem(spec.name, text, problem.allowed, problem.unit)
    return value, problem


def say(problem: Problem, label: str | None = None) -> str:
    """A problem in the words of a form: its on-screen label, the text as typed, what is
    allowed (in the display unit), rather than the internal field name."""
    name = label or FIELD_LABELS.get(problem.field, problem.field)
    value = "(empty)" if problem.value in ("", None) else echo(problem.value)
    return f"{name} {value}: {problem.allowed}"


def parse_date(field_name: str, text: str | date | None, today: date, required: bool = True) -> tuple[date | None, Problem | None]:
    """An ISO 8601 date (YYYY-MM-DD), not in the future and not before 1970."""
    value: date | None
    if isinstance(text, date):
        value = text
    elif text is None or str(text).strip() == "":
        if required:
            return None, Problem(field_name, text or "", "is required: a date as YYYY-MM-DD")
        return None, None
    else:
        value = iso_date(str(text).strip())
        if value is None:
            return None, Problem(field_name, text, "must be a date as YYYY-MM-DD (ISO 8601), e.g. 2026-03-14")
    if value > today:
        return None, Problem(field_name, str(text), f"is in the future: dates up to today ({today.isoformat()}) are allowed")
    if value < EARLIEST_DATE:
        return None, Problem(field_name, str(text), f"must be on or after {EARLIEST_DATE.isoformat()}")
    return value, None


def iso_date(text: str) -> date | None:
    """The date written exactly YYYY-MM-DD (ASCII digits), else None."""
    if _DATE_RE.fullmatch(text) is None:
        return None
    try:
        return date.fromisoformat(text)
    except ValueError:
        return None


def whole_number(text: str) -> int | None:
    """A whole number of ASCII digits 0-9 with an optional minus sign ('42', '-1'), else
    None: int() would also take '4_2', ' 42 ' and Unicode digits."""
    digits = text.removeprefix("-")
    if _WHOLE_RE.fullmatch(digits) is None:
        return None
    return int(text)


def parse_free_text(field_name: str, text: str) -> tuple[str | None, Problem | None]:
    """Free text (technician, note, reason) is kept exactly as typed: one line of at most
    ``MAX_TEXT`` characters; a tab is allowed, other control characters are not."""
    if len(text) > MAX_TEXT:
        return None, Problem(field_name, text, f"is longer than {MAX_TEXT} characters: one line of at most {MAX_TEXT}")
    if any(ord(ch) < 32 and ch != "\t" for ch in text):
        return None, Problem(field_name, text, "contains control characters (line breaks are not allowed): "
                             f"one line of at most {MAX_TEXT} characters")
    return text, None


def parse_name(field_name: str, text: str | None, required: bool = True) -> tuple[str | None, Problem | None]:
    """Identifiers (serials, unit numbers, model codes, sites, positions)."""
    value = (text or "").strip()
    if value == "":
        if required:
            return None, Problem(field_name, text or "", "is required")
        return None, None
    if not _NAME_RE.match(value):
        return None, Problem(
            field_name, text, "must be 1-40 characters: letters, digits, space and . _ / # - (starting with a letter or digit)"
        )
    return value, None


def case_match(value: object, known) -> str | None:
    """The one name of ``known`` that ``value`` is but for letter case and spacing ('b-25530'
    for B-25530, 'saltbrook  cut' for Saltbrook Cut), else None (also when ``value`` is known as
    given, or two names match). A message suggests it; nothing is changed to it."""
    if not isinstance(value, str) or not value.strip():
        return None
    key = " ".join(value.split()).casefold()
    hits = [name for name in known if name != value and " ".join(name.split()).casefold() == key]
    return hits[0] if len(hits) == 1 and value not in known else None


def did_you_mean(value: object, known) -> str:
    """'; did you mean B-25530?' when ``case_match`` finds one name, else ''."""
    match = case_match(value, known)
    return f"; did you mean {match}?" if match is not None else ""


def parse_oil_grade(text: str | int | None) -> tuple[int | None, Problem | None]:
    if text is None or str(text).strip() == "":
        return None, None
    raw = str(text).strip().upper().removeprefix("ISO").strip().removeprefix("VG").strip()
    grade = whole_number(raw)
    if grade not in ISO_VG_GRADES:
        return None, Problem("oil_grade", text, "must be an ISO VG grade: " + ", ".join(str(g) for g in ISO_VG_GRADES))
    return grade, None


def parse_iso4406(text: str | None) -> tuple[str | None, Problem | None]:
    """ISO 4406 code: three scale numbers (>=4, >=6, >=14 um(c)) like 18/16/13, each
    0-28 and not increasing (a count at a larger size cannot exceed one at a smaller);
    the first may be '-' or '*' when not counted. Stored in the standard's form: scale
    numbers without leading zeros, no spaces (``12/10/08`` as a spreadsheet writes it back,
    or ``18 / 16 / 13``, is ``12/10/8``, ``18/16/13``), so that one code is one text."""
    if text is None or text.strip() == "":
        return None, None
    value = re.sub(r"\s*/\s*", "/", text.strip())
    allowed = "must be three ISO 4406 scale numbers 0-28 like 18/16/13, not increasing left to right"
    m = _ISO4406_RE.match(value)
    if not m:
        return None, Problem("iso4406", text, allowed)
    nums = [int(g) for g in m.groups() if g not in ("-", "*")]
    if any(n > 28 for n in nums) or any(a < b for a, b in zip(nums, nums[1:])):
        return None, Problem("iso4406", text, allowed)
    return "/".join(g if g in ("-", "*") else str(int(g)) for g in m.groups()), None


def parse_event_kind(text: str | None) -> tuple[EventKind | None, Problem | None]:
    value = (text or "").strip().lower().replace(" ", "_").replace("-", "_")
    try:
        return EventKind(value), None
    except ValueError:
        return None, Problem("kind", text, "must be one of: " + ", ".join(k.value for k in EventKind))


def check_reading_against_model(reading: Reading, model: PumpModel) -> list[Problem]:
    """Checks a reading needs its pump model for: physics and the test conditions."""
    problems: list[Problem] = []
    if reading.case_drain_lpm is None and reading.servo_pressure_bar is None and reading.neutral_drift_bar is None:
        problems.append(
            Problem("case_drain/servo_pressure/neutral_drift", "", "at least one of the three readings is required")
        )
    if reading.case_drain_lpm is not None:
        for name, value in (
            ("oil_temp", reading.oil_temp_c),
            ("test_pressure", reading.test_pressure_bar),
            ("test_speed", reading.test_speed_rpm),
        ):
            if value is None:
                problems.append(Problem(name, "", "is required with a case drain reading (it is normalized to reference conditions)"))
        speed = reading.test_speed_rpm if reading.test_speed_rpm is not None else model.test_speed_rpm
        q_th = units.theoretical_flow_lpm(model.displacement_cc, speed)
        if reading.case_drain_lpm > q_th:
            problems.append(
                Problem(
                    "case_drain",
                    round(reading.case_drain_lpm, 4),
                    f"is above the pump's theoretical flow at {speed:g} rpm ({q_th:.1f} L/min for "
                    f"{model.displacement_cc:g} cm3/rev); allowed up to {q_th:.1f}",
                    "L/min",
                )
            )
    problems += check_viscosity(reading, model)
    if reading.test_speed_rpm is not None and reading.test_speed_rpm > model.max_speed_rpm * 1.15:
        problems.append(
            Problem("test_speed", reading.test_speed_rpm, f"is above the model's maximum speed {model.max_speed_rpm:g} rpm (+15 %)", "rpm")
        )
    if reading.test_pressure_bar is not None and reading.test_pressure_bar > model.rated_pressure_bar * 1.25:
        problems.append(
            Problem(
                "test_pressure",
                reading.test_pressure_bar,
                f"is above the model's rated pressure {model.rated_pressure_bar:g} bar (+25 %)",
                "bar",
            )
        )
    return problems


#: Stands for the machine's unit in ``meter_change_hint`` when the caller does not name it.
SOME_MACHINE = "UNIT"


def meter_change_hint(machine: str | None = None) -> str:
    """What to do when a meter runs backwards because it was changed: the command to type
    (and the fleet view's event), naming the machine when it is known."""
    return (f"if the hour meter was replaced, record that first: `logbook event meter_replaced --machine "
            f"{machine or SOME_MACHINE} --date YYYY-MM-DD --hours OLD_LAST --to-hours NEW_FIRST` with the old meter's "
            "last and the new meter's first reading (in the fleet view: the event 'Hour meter replaced')")


def check_hour_meter(
    field_name: str, when: date, hours: float, earlier: tuple[date, float] | None, later: tuple[date, float] | None,
    machine: str | None = None,
) -> Problem | None:
    """The hour meter may not run backwards between the nearest earlier and later
    records of the same machine (since the last meter replacement)."""
    if earlier is not None and hours < earlier[1] - 1e-9:
        which = f"machine {machine}" if machine else "machine"
        return Problem(
            field_name,
            hours,
            f"runs backwards: the {which} read {earlier[1]:g} h on {earlier[0].isoformat()}; allowed {earlier[1]:g} h or more; "
            f"{meter_change_hint(machine)}",
            "h",
        )
    if later is not None and hours > later[1] + 1e-9:
        return Problem(
            field_name,
            hours,
            f"is more than the {later[1]:g} h the machine read later, on {later[0].isoformat()}; allowed up to {later[1]:g} h",
            "h",
        )
    return None


def check_viscosity(reading: Reading, model: PumpModel) -> list[Problem]:
    """A measured viscosity must describe one oil: the 100 C value only with the 40 C one and below
    it, and with the 40 C value alone, the oil's viscosity index must reach a 100 C value (ASTM D2270)."""
    from logbook import oil

    nu40, nu100 = reading.nu40_cst, reading.nu100_cst
    if nu100 is not None and nu40 is None:
        return [Problem("nu100_cst", nu100, "needs the measured viscosity at 40 C (nu40_cst) too", "cSt")]
    if nu40 is None:
        return []
    if nu100 is not None:
        if not nu100 < nu40:
            return [Problem("nu100_cst", nu100, f"must be below the viscosity at 40 C ({nu40:g} cSt)", "cSt")]
        return []
    vi = model.oil_vi if reading.oil_vi is None else reading.oil_vi
    try:
        oil.nu100_from_vi(nu40, vi)
    except ValueError as exc:
        return [Problem("nu40_cst", nu40, f"with viscosity index {vi:g} gives no viscosity at 100 C ({exc}); "
                        "give the measured 100 C value too (nu100_cst)", "cSt")]
    return []
