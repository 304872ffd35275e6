"""logbook correct READING_ID ...: supersede a reading by a corrected copy (original kept)."""

from __future__ import annotations

from logbook import validate
import dataclasses

from logbook.commands.record import NUMERIC_OPTIONS, VISCOSITY_OPTIONS, add_confirm, parse_with_unit, stopped_at_doubts
from logbook.model import InputRejected, Problem

# option dest -> Reading field
_FIELDS = {
    "nu40_cst": "nu40_cst",
    "nu100_cst": "nu100_cst",
    "machine_hours": "machine_hours",
    "case_drain": "case_drain_lpm",
    "servo_pressure": "servo_pressure_bar",
    "neutral_drift": "neutral_drift_bar",
    "charge_pressure": "charge_pressure_bar",
    "oil_temp": "oil_temp_c",
    "test_pressure": "test_pressure_bar",
    "test_speed": "test_speed_rpm",
    "oil_vi": "oil_vi",
}
_CLEARABLE = "none"


def register(sub) -> None:
    p = sub.add_parser(
        "correct",
        help="correct a reading: a new reading supersedes it, the original is kept and both show in the history",
        description="Give only the values that change; bare numbers are in the --units system and may carry a unit "
        "(24bar, 350psi). 'none' clears an optional value. The corrected reading is checked like a new one.",
    )
    p.add_argument("reading_id", type=int, metavar="READING_ID", help="id from `logbook show SERIAL`")
    p.add_argument("--reason", required=True, help="why the reading is corrected (kept in the audit trail)")
    p.add_argument("--date", default=None, help="YYYY-MM-DD")
    p.add_argument("--hours", dest="machine_hours", default=None, help="machine hour meter")
    for opt in ("case_drain", "servo_pressure", "neutral_drift", "charge_pressure", "oil_temp", "test_pressure", "test_speed", "oil_vi"):
        p.add_argument("--" + opt.replace("_", "-"), dest=opt, default=None, help=validate.READING_FIELDS[opt].help)
    for name, opt in VISCOSITY_OPTIONS.items():
        p.add_argument(opt, dest=name, default=None, help=validate.READING_FIELDS[name].help)
    p.add_argument("--oil-grade", default=None, help="ISO VG grade")
    p.add_argument("--iso4406", default=None, help="cleanliness code, e.g. 18/16/13")
    p.add_argument("--technician", default=None)
    p.add_argument("--note", default=None)
    add_confirm(p)
    p.set_defaults(func=run)


def changes_from_args(args, ctx) -> dict:
    """The corrected fields, parsed and range-checked like `logbook record` does."""
    problems, changes = [], {}
    for name in NUMERIC_OPTIONS:
        text = getattr(args, name)
        if text is None:
            continue
        if text.strip().lower() == _CLEARABLE and name != "machine_hours":
            changes[_FIELDS[name]] = None
            continue
        value, problem = parse_with_unit(name, text, ctx.units)
        if problem:
            problems.append(problem)
        elif value is None:
            problems.append(Problem(name, text, "needs a value (or 'none' to clear it)"))
        else:
            changes[_FIELDS[name]] = value
    if args.date is not None:
        value, problem = validate.parse_date("date", args.date, ctx.today)
        if problem:
            problems.append(problem)
        else:
            changes["taken_on"] = value
    for option, field, parse in (("oil_grade", "oil_grade", validate.parse_oil_grade), ("iso4406", "iso4406", validate.parse_iso4406)):
        text = getattr(args, option)
        if text is None:
            continue
        if text.strip().lower() == _CLEARABLE:
            changes[field] = None
            continue
        value, problem = parse(text)
        if problem:
            problems.append(problem)
        else:
            changes[field] = value
    for field in ("technician", "note"):
        text = getattr(args, field)
        if text is not None:
            value, problem = validate.parse_free_text(field, text)
            if problem:
                problems.append(problem)
            else:
                changes[field] = value
    if problems:
        raise InputRejected(problems)
    if not changes:
        raise InputRejected([Problem("changes", "", "give at least one value to correct, e.g. --servo-pressure 24")])
    return changes


def run(args, ctx) -> int:
    changes = changes_from_args(args, ctx)
    with ctx.open_store() as store:
        original = store.reading(args.reading_id)
        if original is not None and original.superseded_by is None and original.removed_reason is None:
            corrected = dataclasses.replace(original, id=None, **changes)
            if stopped_at_doubts(ctx, store.reading_doubts(corrected, ctx.units, without=[original.id]),
                                 args.confirm, "corrected"):
                return 2
        try:
            saved = store.correct_reading(args.reading_id, reason=args.reason, today=ctx.today, **changes)
        except InputRejected as exc:
            if original is None:
                raise
            from logbook.commands.record import rejected

            raise rejected(exc.problems, store, dataclasses.replace(original, **changes)) from None
    ctx.console.print(
        f"reading {args.reading_id} corrected: reading {saved.id} replaces it for {saved.serial} on {saved.taken_on} "
        f"(the original is kept; see `logbook history {saved.serial}`)",
        markup=False,
    )
    return 0
