"""logbook record SERIAL ...: add one reading from the command line, units explicit."""

from __future__ import annotations

from logbook import fmt, units, validate
from logbook.cautions import SAFETY
from logbook.model import InputRejected, Kind, Problem, Reading
from logbook.plausible import CONFIRM_FLAG

# option -> (field spec name, quantity default unit attribute of UnitPrefs)
NUMERIC_OPTIONS = {
    "machine_hours": "machine_hours",
    "case_drain": "case_drain",
    "servo_pressure": "servo_pressure",
    "neutral_drift": "neutral_drift",
    "charge_pressure": "charge_pressure",
    "oil_temp": "oil_temp",
    "test_pressure": "test_pressure",
    "test_speed": "test_speed",
    "oil_vi": "oil_vi",
    "nu40_cst": "nu40_cst",
    "nu100_cst": "nu100_cst",
}
#: Options of the measured viscosity (their fields are named nu40_cst, nu100_cst in files and messages).
VISCOSITY_OPTIONS = {"nu40_cst": "--nu40", "nu100_cst": "--nu100"}


def default_unit(spec: validate.FieldSpec, prefs: units.UnitPrefs) -> str:
    q = spec.quantity
    if q is units.PRESSURE:
        return prefs.pressure
    if q is units.FLOW:
        return prefs.flow
    if q is units.TEMPERATURE:
        return prefs.temperature
    return q.canonical


def parse_with_unit(name: str, text: str | None, prefs: units.UnitPrefs) -> tuple[float | None, Problem | None]:
    """'4.2', '4.2gpm', '61 psi', '28,9', '22,950' -> canonical value; a bare number is in
    the user's units (validate.parse_quantity, as on the entry forms)."""
    spec = validate.READING_FIELDS[name]
    return validate.parse_quantity(spec, text, default_unit(spec, prefs))


def register(sub) -> None:
    p = sub.add_parser(
        "record",
        help="record one reading for a pump (values may carry units: 4.2gpm, 380psi, 120F)",
        description="Record one reading. Bare numbers are in the --units system (metric: bar, L/min, C). "
        "A case drain needs oil temperature, test pressure and test speed to be normalized.",
    )
    p.add_argument("serial")
    p.add_argument("--date", required=True, help="YYYY-MM-DD, not in the future")
    p.add_argument("--hours", dest="machine_hours", required=True, help="machine hour meter")
    for opt in ("case_drain", "servo_pressure", "neutral_drift", "charge_pressure", "oil_temp", "test_pressure", "test_speed", "oil_vi"):
        p.add_argument("--" + opt.replace("_", "-"), dest=opt, default=None, help=validate.READING_FIELDS[opt].help)
    for name, opt in VISCOSITY_OPTIONS.items():
        p.add_argument(opt, dest=name, default=None, help=validate.READING_FIELDS[name].help + "; e.g. 44.1 or 44.1cSt")
    p.add_argument("--oil-grade", default=None, help="ISO VG grade of the oil (default: the model's reference oil)")
    p.add_argument("--iso4406", default=None, help="cleanliness code, e.g. 18/16/13")
    p.add_argument("--technician", default="", help="who took the reading")
    p.add_argument("--note", default="")
    p.add_argument("--dry-run", action="store_true", help="check only, write nothing")
    add_confirm(p)
    p.set_defaults(func=run)


def add_confirm(p) -> None:
    p.add_argument(CONFIRM_FLAG, dest="confirm", action="store_true",
                   help="save values that look wrong (an hour meter jump, oil outside the test window, a big "
                        "step from the previous reading) after checking them")


def stopped_at_doubts(ctx, doubts, confirm: bool, verb: str = "recorded") -> bool:
    """Print the doubts and say which flag saves anyway; True when the command must stop."""
    if not doubts:
        return False
    if confirm:  # saved all the same: the warning stays on the record of the run
        ctx.err.print(f"Warning - saved with {CONFIRM_FLAG}; these values looked wrong:", markup=False)
        for doubt in doubts:
            ctx.err.print(f"  - {doubt}", markup=False)
        return False
    ctx.err.print(f"[bold]Not {verb}[/bold] - nothing was written; these values look wrong:")
    for doubt in doubts:
        ctx.err.print(f"  - {doubt}", markup=False)
    ctx.err.print(f"If they are right, run the same command again with {CONFIRM_FLAG}.", markup=False)
    return True


def build_reading(args, ctx) -> Reading:
    problems, values = [], {}
    for name in NUMERIC_OPTIONS:
        value, problem = parse_with_unit(name, getattr(args, name), ctx.units)
        if problem:
            problems.append(problem)
        values[name] = value
    taken_on, problem = validate.parse_date("date", args.date, ctx.today)
    if problem:
        problems.append(problem)
    grade, problem = validate.parse_oil_grade(args.oil_grade)
    if problem:
        problems.append(problem)
    code, problem = validate.parse_iso4406(args.iso4406)
    if problem:
        problems.append(problem)
    serial, problem = validate.parse_name("serial", args.serial)
    if problem:
        problems.append(problem)
    if problems:
        raise InputRejected(problems)
    return Reading(
        id=None, serial=serial, taken_on=taken_on, machine_hours=values["machine_hours"],
        case_drain_lpm=values["case_drain"], servo_pressure_bar=values["servo_pressure"],
        neutral_drift_bar=values["neutral_drift"], charge_pressure_bar=values["charge_pressure"],
        oil_temp_c=values["oil_temp"], test_pressure_bar=values["test_pressure"], test_speed_rpm=values["test_speed"],
        oil_grade=grade, oil_vi=values["oil_vi"], iso4406=code, technician=args.technician, note=args.note,
        nu40_cst=values["nu40_cst"], nu100_cst=values["nu100_cst"],
    )


def rejected(problems, store, reading: Reading) -> InputRejected:
    """The store's refusal, with what the names given tell (``commands.names``): 'did you mean
    B-25530?', and the machine to name when its meter runs backwards."""
    from logbook.commands.names import Known, hinted

    return InputRejected(hinted(problems, Known(store), serial=reading.serial, day=reading.taken_on))


def run(args, ctx) -> int:
    # first, to stderr (as `logbook event`): stdout keeps only the result
    ctx.err.print(SAFETY.text(), markup=False, highlight=False, soft_wrap=True)
    reading = build_reading(args, ctx)
    with ctx.open_store() as store:
        if args.dry_run:
            report = store.add_readings([reading], today=ctx.today, dry_run=True)
            if report.problems:
                raise rejected(report.problems, store, reading)
            if stopped_at_doubts(ctx, store.reading_doubts(reading, ctx.units), args.confirm, "checked"):
                return 2
            ctx.console.print("reading is valid; nothing written (--dry-run)")
            return 0
        report = store.add_readings([reading], today=ctx.today, dry_run=True)
        if report.problems:
            raise rejected(report.problems, store, reading)  # refusals first: a doubt is only a question
        if stopped_at_doubts(ctx, store.reading_doubts(reading, ctx.units), args.confirm):
            return 2
        previous = store.readings(reading.serial)
        saved = store.add_reading(reading, today=ctx.today)
        ctx.console.print(f"recorded reading {saved.id} for {saved.serial} on {saved.taken_on} ({saved.machine})", markup=False)
        from logbook.analysis.fleet import forecast_in_fleet

        fleet = store.fleet_for_pump(saved.serial)  # what its forecast depends on, not the whole file
    forecast = forecast_in_fleet(fleet, saved.serial, ctx.today)
    before = {k: next((r.value(k) for r in reversed(previous) if r.value(k) is not None), None) for k in Kind}
    for kf in forecast.kinds:
        raw = saved.value(kf.kind)
        if raw is None:
            continue
        limit = f"limit {fmt.value(kf.kind, kf.limit.value, ctx.units)}" if kf.limit else "no limit set"
        normalized = f"normalized {fmt.value(kf.kind, kf.latest_value, ctx.units)}"
        if kf.latest_on != saved.taken_on:  # left out of the trend: the trend's newest value is another reading's
            why = next((w.split(": ", 1)[1] for w in kf.not_used if w.startswith(f"{saved.taken_on.isoformat()}: ")),
                       "not part of the trend")  # fmt: skip
            normalized = f"not used in the trend ({why})"
        ctx.console.print(
            f"  {kf.kind.label}: {fmt.value(kf.kind, raw, ctx.units)} (previous {fmt.value(kf.kind, before[kf.kind], ctx.units)}); "
            f"{normalized}, {limit}; P50 {fmt.day(kf.p50_date)}",
            markup=False,
        )
    ctx.console.print(f"  status: {forecast.status}", markup=False)
    return 0
