"""logbook costs: the money the plan weighs (currency, job costs per model, downtime per site or
machine) and, per model, the cost-optimal overhaul age on its fleet-life Weibull."""

from __future__ import annotations

from rich.table import Table

from logbook import fmt
from logbook.model import InputRejected, Problem
from logbook.validate import COST_FIELDS, parse_quantity


def register(sub) -> None:
    p = sub.add_parser("costs", help="show or set the currency, job costs per model and downtime per site or machine "
                                     "(audited), with each model's cost-optimal overhaul age")
    p.add_argument("--currency", metavar="CODE", help="the currency all costs are in, e.g. EUR (no exchange rates)")
    who = p.add_mutually_exclusive_group()
    who.add_argument("--model", metavar="CODE", help="set this pump model's --planned and --failure cost")
    who.add_argument("--site", metavar="NAME", help="set this site's downtime (--per-hour, --planned-hours, --failure-hours)")
    who.add_argument("--machine", metavar="UNIT", help="set this machine's own downtime (wins over its site's)")
    p.add_argument("--planned", metavar="AMOUNT", help="planned overhaul or exchange: parts and shop labour")
    p.add_argument("--failure", metavar="AMOUNT", help="in-service failure: parts, secondary damage, circuit flush")
    p.add_argument("--per-hour", metavar="AMOUNT", help="downtime cost per hour of the machine standing")
    p.add_argument("--planned-hours", metavar="H", help="hours a planned job keeps the machine standing")
    p.add_argument("--failure-hours", metavar="H", help="hours a failure keeps the machine standing")
    p.set_defaults(func=run)


def _number(field: str, text: str | None) -> float | None:
    spec = COST_FIELDS[field]  # as typed: a decimal comma and thousands separators where they mean one thing
    value, problem = parse_quantity(spec, text, spec.quantity.canonical)
    if problem is not None:
        raise InputRejected([problem])
    return value


def _check_options(args) -> None:
    money = {"--planned": args.planned, "--failure": args.failure}
    downtime = {"--per-hour": args.per_hour, "--planned-hours": args.planned_hours, "--failure-hours": args.failure_hours}
    problems = []
    if args.model is None and any(v is not None for v in money.values()):
        problems.append(Problem("--model", "", "name the model whose --planned and --failure cost to set"))
    if args.site is None and args.machine is None and any(v is not None for v in downtime.values()):
        problems.append(Problem("--site or --machine", "", "name the site or machine whose downtime to set"))
    if args.model is not None:
        problems += [Problem(k, "", "is needed with --model") for k, v in money.items() if v is None]
    if args.site is not None or args.machine is not None:
        problems += [Problem(k, "", "is needed with --site or --machine") for k, v in downtime.items() if v is None]
    if problems:
        raise InputRejected(problems)


def run(args, ctx) -> int:
    _check_options(args)
    notes: list[str] = []
    with ctx.open_store() as store:
        try:
            if args.currency is not None:
                store.set_currency(args.currency)
            if args.model is not None:
                _, notes = store.set_model_costs(args.model, planned=_number("planned", args.planned),
                                                 failure=_number("failure", args.failure))
            for scope, name in (("site", args.site), ("machine", args.machine)):
                if name is not None:
                    store.set_downtime(scope, name, cost_per_hour=_number("per_hour", args.per_hour),
                                       planned_hours=_number("planned_hours", args.planned_hours),
                                       failure_hours=_number("failure_hours", args.failure_hours))
        except InputRejected as exc:  # 'did you mean Saltbrook Cut?' where only the letter case differs
            from logbook.commands.names import Known, hinted

            raise InputRejected(hinted(exc.problems, Known(store))) from None
        book = store.costs()
        fleet = store.fleet() if book.models else None
    for note in notes:
        ctx.err.print(f"note: {note}", markup=False)
    _print(ctx, book, fleet)
    return 0


def _print(ctx, book, fleet) -> None:
    cur = book.currency or "(no currency set: logbook costs --currency CODE)"
    ctx.console.print(fmt.text(f"Costs in {cur}"))
    if not book.models and not book.sites and not book.machines:
        ctx.console.print("no costs yet: logbook costs --model CODE --planned AMOUNT --failure AMOUNT", markup=False)
        return
    if book.models:
        from logbook.analysis.fleet import forecast_fleet
        from logbook.analysis.life import fleet_life
        from logbook.costing import model_economies

        # the running pumps' ages as the forecast counts them (hours today): the same fleet life as `forecast`
        economies = model_economies(book, fleet_life(fleet, forecast_fleet(fleet, today=ctx.today)))
        table = Table(box=None, header_style="bold", title="per pump model (downtime not included)", title_justify="left")
        for col in ("model", "planned", "failure", "shape", "scale h", "best age h", "per h", "run-out per h"):
            table.add_column(col, justify="left" if col == "model" else "right")
        for eco in economies.values():
            opt = eco.optimum
            table.add_row(*fmt.cells(
                eco.model, f"{eco.planned:,.0f}", f"{eco.failure:,.0f}",
                f"{eco.shape:.2f}" if eco.shape else "-", f"{eco.scale_hours:,.0f}" if eco.scale_hours else "-",
                f"{opt.age_hours:,.0f}" if opt and opt.age_hours else "-",
                f"{opt.cost_per_hour:.3f}" if opt else "-", f"{opt.run_to_failure_cost_per_hour:.3f}" if opt else "-"))
        ctx.console.print(table)
        for eco in economies.values():
            if eco.note:
                ctx.console.print(fmt.text(f"  {eco.model}: {eco.note}"))
    rows = list(book.sites.values()) + list(book.machines.values())
    if rows:
        table = Table(box=None, header_style="bold", title="downtime (a machine's own wins over its site's)",
                      title_justify="left")
        for col in ("site or machine", "per hour", "planned job h", "failure h"):
            table.add_column(col, justify="left" if col == "site or machine" else "right")
        for d in rows:
            table.add_row(*fmt.cells(f"{d.scope} {d.name}", f"{d.cost_per_hour:,.0f}", f"{d.planned_hours:g}",
                                     f"{d.failure_hours:g}"))
        ctx.console.print(table)
