"""logbook model [CODE] [--limit KIND=VALUE] [--planned AMOUNT --failure AMOUNT]: show pump models,
change limits and job costs (the same audited store calls as the models screen and logbook costs)."""

from __future__ import annotations

from logbook import fmt
from logbook.commands.record import parse_with_unit
from logbook.model import ALL_KINDS, InputRejected, Kind, Problem
from logbook.validate import COST_FIELDS, parse_quantity

_SHORT = {Kind.CASE_DRAIN: "drain", Kind.SERVO_PRESSURE: "servo", Kind.NEUTRAL_DRIFT: "drift"}
_LIMIT_FIELD = {Kind.CASE_DRAIN: "case_drain", Kind.SERVO_PRESSURE: "servo_pressure", Kind.NEUTRAL_DRIFT: "neutral_drift"}


def register(sub) -> None:
    p = sub.add_parser("model", help="show pump models, their limits and job costs; change a limit or the costs (audited)")
    p.add_argument("code", nargs="?", default=None)
    p.add_argument("--limit", action="append", default=[], metavar="KIND=VALUE",
                   help="set a limit, e.g. case_drain=9.5 or servo_pressure=250psi; KIND=none removes it")
    p.add_argument("--planned", metavar="AMOUNT", help="with --failure: the cost of a planned overhaul or exchange "
                                                       "(parts, shop labour), in the logbook's currency")
    p.add_argument("--failure", metavar="AMOUNT", help="with --planned: the cost of an in-service failure "
                                                       "(parts, secondary damage, circuit flush)")
    p.set_defaults(func=run)


def _bare(shown: str) -> str:
    """'420.0 bar' -> '420.0' (the unit is in the column's header)."""
    return shown.split(" ")[0]


def _costs_given(args) -> tuple[float, float] | None:
    """(planned, failure) from --planned and --failure, both or neither; raises InputRejected naming the option."""
    given = {"--planned": args.planned, "--failure": args.failure}
    if all(v is None for v in given.values()):
        return None
    problems = [Problem(k, "", "is needed too: give --planned and --failure together") for k, v in given.items() if v is None]
    if args.code is None:
        problems.append(Problem("model", "", "name the model whose costs to set"))
    values = {}
    for option, key in (("--planned", "planned"), ("--failure", "failure")):
        if given[option] is not None:
            spec = COST_FIELDS[key]  # as typed: a decimal comma and thousands separators where they mean one thing
            value, problem = parse_quantity(spec, given[option], spec.quantity.canonical)
            if problem is not None:
                problems.append(problem)
            values[key] = value
    if problems:
        raise InputRejected(problems)
    return values["planned"], values["failure"]


def run(args, ctx) -> int:
    costs = _costs_given(args)  # checked before the store opens: nothing written on a bad amount
    notes: list[str] = []
    with ctx.open_store() as store:
        if args.code is not None and args.code not in (known := store.models()):
            from logbook.validate import did_you_mean

            words = "no such model; models: " + ", ".join(sorted(known)) + did_you_mean(args.code, known)
            ctx.err.print(f"logbook model: {Problem('model', args.code, words)}", markup=False, soft_wrap=True)
            return 2
        if args.limit:
            if args.code is None:
                raise InputRejected([Problem("model", "", "name the model whose limit to change")])
            for item in args.limit:
                kind_text, _, value_text = item.partition("=")
                try:
                    kind = Kind(kind_text.strip())
                except ValueError:
                    raise InputRejected([Problem("limit", item, "must be KIND=VALUE with KIND one of "
                                                 + ", ".join(k.value for k in Kind))]) from None
                if value_text.strip().lower() == "none":
                    store.set_limit(args.code, kind, None)
                    continue
                value, problem = parse_with_unit(_LIMIT_FIELD[kind], value_text, ctx.units)
                if problem or value is None:
                    raise InputRejected([problem or Problem("limit", item, "needs a value")])
                store.set_limit(args.code, kind, abs(value))
        if costs is not None:
            _, notes = store.set_model_costs(args.code, planned=costs[0], failure=costs[1])
        models = store.models()
        book = store.costs()
    for note in notes:
        ctx.err.print(f"note: {note}", markup=False, soft_wrap=True)
    from logbook.commands.tables import Col, fit

    u = ctx.units
    cols = [Col("model", 0), Col("Vg cm3/rev", 5, justify="right"), Col(f"rated {u.pressure}", 6, justify="right"),
            Col(f"ref temp {u.temperature}", 7, justify="right"), Col(f"ref press. {u.pressure}", 8, justify="right"),
            Col("oil", 9), *[Col(f"{_SHORT[k]} limit {fmt.unit_for(k, u)}", 1 + i, keep=True, justify="right")
                             for i, k in enumerate(ALL_KINDS)]]
    for m in models.values():
        if args.code and m.code != args.code:
            continue
        values = [m.code, f"{m.displacement_cc:g}", _bare(fmt.pressure(m.rated_pressure_bar, u)),
                  _bare(fmt.temperature(m.ref_temp_c, u)), _bare(fmt.pressure(m.ref_pressure_bar, u)),
                  f"VG {m.oil_grade} VI {m.oil_vi:g}",
                  *[(("<" if lim.direction == "below" else ">") + " " + fmt.value(k, lim.value, u, with_unit=False))
                    if (lim := m.limit(k)) else "-" for k in ALL_KINDS]]
        for col, v in zip(cols, values):
            col.cells.append(v)
    ctx.console.print(fit(ctx.console, cols, more="a wider terminal shows them")[0])
    cur = book.currency or "(no currency set)"
    for m in models.values():
        if (args.code is None or m.code == args.code) and (c := book.models.get(m.code)) is not None:
            ctx.console.print(fmt.text(f"{m.code} job costs: planned {c.planned:,.0f} {cur}, failure {c.failure:,.0f} {cur}"))
    return 0

