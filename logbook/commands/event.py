"""logbook event KIND SERIAL ...: record an overhaul, move, neutral re-set, ..."""

from __future__ import annotations

from logbook import validate
from logbook.cautions import SAFETY
from logbook.commands.record import add_confirm, stopped_at_doubts
from logbook.model import MACHINE_EVENTS, Event, EventKind, InputRejected, Problem


def register(sub) -> None:
    p = sub.add_parser(
        "event",
        help="record an event: " + ", ".join(k.value for k in EventKind),
        description="overhaul/exchange restart every trend of the pump; exchange --serial-in S names the pump that "
        "went in: it is fitted in the same machine and position from --date (its hours count on from there) and the "
        "pump that came out is removed; neutral_reset restarts neutral drift; "
        "control_repair restarts servo pressure and neutral drift; move needs --to-machine, --to-position, --to-hours; "
        "meter_replaced takes --machine instead of a serial, --hours (old meter's last) and --to-hours (new meter's first); "
        "parked (the machine stands from --date: its pumps run no hours) and back_in_service (it runs again) take "
        "--machine instead of a serial, and --hours when the meter was read.",
    )
    p.add_argument("kind", help=", ".join(k.value for k in EventKind))
    p.add_argument("serial", nargs="?", default=None, help="pump serial (not for meter_replaced, parked, back_in_service)")
    p.add_argument("--date", required=True, help="YYYY-MM-DD")
    p.add_argument("--hours", default=None, help="machine hour meter at the event")
    p.add_argument("--machine", default=None, help="machine unit (meter_replaced, parked, back_in_service)")
    p.add_argument("--to-machine", default=None)
    p.add_argument("--to-position", default=None)
    p.add_argument("--to-hours", default=None)
    p.add_argument("--serial-in", default=None, metavar="SERIAL",
                   help="exchange: serial of the pump fitted in place of the one that came out")
    p.add_argument("--technician", default="")
    p.add_argument("--note", default="")
    add_confirm(p)
    p.set_defaults(func=run)


def machine_needed(kind: EventKind, serial: str | None, known, day) -> Problem:
    """What to say when a machine's event (meter_replaced, parked, back_in_service) has no
    --machine: that it takes one, and what the word given in its place is."""
    from logbook.commands.names import fitted_words

    takes = f"{kind.value} is an event of a machine: give its unit with --machine"
    if serial is None:
        return Problem("--machine", "", f"is required: {takes} (a machine unit: --machine UNIT)")
    pumps, machines = known.names("pumps"), known.names("machines")
    if serial in pumps:
        where = known.machine_of(serial, day)
        told = fitted_words(known, serial, day)
        if where is None:
            return Problem("serial", serial, f"is a pump serial, not a machine unit: {takes}; {told}")
        return Problem("serial", serial, f"is a pump serial, not a machine unit: {takes}; {told}: "
                       f"`logbook event {kind.value} --machine {where[0]} ...`")
    if serial in machines:
        return Problem("serial", serial, f"is a machine unit given in the place of a pump serial: {takes} "
                       f"(`logbook event {kind.value} --machine {serial} ...`)")
    hint = validate.did_you_mean(serial, machines) or validate.did_you_mean(serial, pumps)
    return Problem("serial", serial, f"is not a known pump serial or machine unit: {takes}{hint}")


def run(args, ctx) -> int:
    # first, to stderr as `logbook record` does: stdout keeps only the result
    ctx.err.print(SAFETY.text(), markup=False, highlight=False, soft_wrap=True)
    problems = []

    def take(result):
        value, problem = result
        if problem:
            problems.append(problem)
        return value

    kind = take(validate.parse_event_kind(args.kind))
    happened_on = take(validate.parse_date("date", args.date, ctx.today))
    hours = take(validate.parse_quantity(validate.HOURS_FIELDS["hours"], args.hours, "h"))
    to_hours = take(validate.parse_quantity(validate.HOURS_FIELDS["to_hours"], args.to_hours, "h"))
    serial = take(validate.parse_name("serial", args.serial, required=False))
    machine = take(validate.parse_name("machine", args.machine, required=False))
    to_machine = take(validate.parse_name("to_machine", args.to_machine, required=False))
    to_position = take(validate.parse_name("to_position", args.to_position, required=False))
    serial_in = take(validate.parse_name("serial_in", args.serial_in, required=False))
    if problems:
        raise InputRejected(problems)
    event = Event(
        id=None, kind=kind, happened_on=happened_on, serial=serial, machine=machine, hours=hours,
        to_machine=to_machine, to_position=to_position, to_hours=to_hours, technician=args.technician, note=args.note,
        serial_in=serial_in,
    )
    with ctx.open_store() as store:
        from logbook.commands.names import Known, hinted

        known = Known(store)
        report = store.add_events([event], today=ctx.today, dry_run=True)
        problems = hinted(report.problems, known, serial=serial, day=happened_on, machine=machine)
        if kind in MACHINE_EVENTS and machine is None:  # `event meter_replaced B-25530`: a machine's event
            problems = [machine_needed(kind, serial, known, happened_on), *(p for p in problems if p.field != "machine")]
        if problems:  # refusals first: a doubt is only a question
            raise InputRejected(problems)
        if stopped_at_doubts(ctx, store.event_doubts(event), args.confirm):
            return 2
        saved = store.add_event(event, today=ctx.today)
    where = f" on {saved.machine}" if saved.machine else ""
    went_in = f"; {saved.serial_in} fitted in its place" if saved.serial_in else ""
    ctx.console.print(f"recorded {saved.kind.value} {saved.serial or ''}{where} on {saved.happened_on} (event {saved.id})"
                      f"{went_in}", markup=False)
    return 0
