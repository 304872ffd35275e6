"""logbook model [CODE] [--limit KIND=VALUE]: show pump models, change limits."""

from __future__ import annotations

from rich.table import Table

from logbook import fmt
from logbook.commands.record import parse_with_unit
from logbook.model import ALL_KINDS, InputRejected, Kind, Problem

_LIMIT_FIELD = {Kind.CASE_DRAIN: "case_drain", Kind.SERVO_PRESSURE: "servo_pressure", Kind.NEUTRAL_DRIFT: "neutral_drift"}


def register(sub) -> None:
    p = sub.add_parser("model", help="show pump models and their limits; change a limit (audited)")
    p.add_argument("code", nargs="?", default=None)
    p.add_argument("--limit", action="append", default=[], metavar="KIND=VALUE",
                   help="set a limit, e.g. case_drain=9.5 or servo_pressure=250psi; KIND=none removes it")
    p.set_defaults(func=run)


def run(args, ctx) -> int:
    with ctx.open_store() as store:
        if args.code is not None and args.code not in (known := store.models()):
            ctx.err.print(f"logbook model: {Problem('model', args.code, 'no such model; models: ' + ', '.join(sorted(known)))}",
                          markup=False, soft_wrap=True)
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
        models = store.models()
    table = Table(box=None, header_style="bold")
    for col in ("model", "Vg cm3/rev", "rated", "ref temp", "ref press.", "oil", *[k.label + " limit" for k in ALL_KINDS]):
        table.add_column(col)
    for m in models.values():
        if args.code and m.code != args.code:
            continue
        table.add_row(*fmt.cells(
            m.code, f"{m.displacement_cc:g}", fmt.pressure(m.rated_pressure_bar, ctx.units), fmt.temperature(m.ref_temp_c, ctx.units),
            fmt.pressure(m.ref_pressure_bar, ctx.units), f"VG {m.oil_grade} VI {m.oil_vi:g}",
            *[(("<" if lim.direction == "below" else ">") + " " + fmt.value(k, lim.value, ctx.units)) if (lim := m.limit(k)) else "-"
              for k in ALL_KINDS]),
        )
    ctx.console.print(table)
    return 0
