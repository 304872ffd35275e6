"""logbook pumps: the fleet list, most urgent first."""

from __future__ import annotations

import argparse

from rich.table import Table

from logbook import fmt
from logbook.model import Problem


FORMATS = ("text", "csv", "json")


def register(sub) -> None:
    p = sub.add_parser("pumps", help="list pumps in service with their forecast, most urgent first")
    p.add_argument("--site", default=None)
    p.add_argument("--model", default=None)
    p.add_argument("--status", default=None, help="only pumps whose status contains this text")
    p.add_argument("--due", action="store_true", help="only pumps whose next reading is due (by interval or forecast)")
    p.add_argument("--rows", type=int, default=None, metavar="N", help="show at most N pumps (the N most urgent)")
    p.add_argument("--limit", dest="rows", type=int, default=None, help=argparse.SUPPRESS)  # the old name of --rows
    p.add_argument("--format", choices=FORMATS, default="text",
                   help="text (a table that fits the terminal, default), csv or json (docs/json.md)")
    p.set_defaults(func=run)


def select(forecast, ctx, *, site=None, model=None, status=None, rows=None, tests=None, due_only=False) -> list:
    """The pumps a listing shows, most urgent first (the engine's one order)."""
    from logbook.analysis.status import urgency_key

    chosen = [p for p in forecast.pumps if (site is None or p.site == site) and (model is None or p.model == model)
              and (status is None or status.lower() in p.status.lower())
              and (not due_only or (tests is not None and p.serial in tests and tests[p.serial].is_due(ctx.today)))]
    chosen.sort(key=urgency_key)
    return chosen[:rows]


def fleet_table(forecast, ctx, *, site=None, model=None, status=None, limit=None, tests=None, due_only=False) -> Table:
    """The fleet as a table that fits the console; ``tests`` (serial -> rounds.NextTest) adds the
    next-reading column. At 80 columns the least useful columns are left out (named under it)."""
    from logbook.commands.tables import Col, fit

    rows = select(forecast, ctx, site=site, model=model, status=status, rows=limit, tests=tests, due_only=due_only)
    cols = [Col("serial", 0), Col("machine/pos", 3), Col("model", 4), Col("h since overhaul", 8, justify="right"),
            Col("nearest limit", 5, wrap=True), Col("P10", 2), Col("P50", 6), Col("status", 1, keep=True)]
    if tests is not None:
        cols.append(Col("next reading", 7, wrap=True))
    for p in rows:
        w = p.worst
        values = [p.serial, f"{p.machine or 'shelf'}/{p.position or '-'}", p.model, fmt.hours(p.hours_since_overhaul),
                  fmt.nearest_limit(w, ctx.units), fmt.day(w.p10_date) if w else "-", fmt.day(w.p50_date) if w else "-",
                  p.status]
        if tests is not None:
            values.append(tests[p.serial].words(ctx.today) if p.serial in tests else "-")
        for col, v in zip(cols, values):
            col.cells.append(v)
    table, _ = fit(ctx.console, cols)
    return table


def filter_problems(fleet, *, site=None, model=None, status=None) -> list[Problem]:
    """A filter that can match no pump in any fleet state is a typo: name it and list what
    there is (sites of the recorded machines, the recorded models, the status words)."""
    from logbook.analysis.status import STATUS_ORDER
    from logbook.validate import did_you_mean

    problems = []
    sites = sorted({m.site for m in fleet.machines.values()})
    if site is not None and site not in sites:
        problems.append(Problem("--site", site, "no such site; sites: " + (", ".join(sites) or "none recorded")
                                + did_you_mean(site, sites)))
    if model is not None and model not in fleet.models:
        problems.append(Problem("--model", model, "no such model; models: " + (", ".join(sorted(fleet.models)) or "none recorded")
                                + did_you_mean(model, fleet.models)))
    if status is not None and not any(status.lower() in word.lower() for word in STATUS_ORDER):
        problems.append(Problem("--status", status, "no status contains this text; statuses: " + ", ".join(STATUS_ORDER)))
    return problems


def run(args, ctx) -> int:
    if args.rows is not None and args.rows < 0:  # looked at before the fleet loads
        ctx.err.print(f"logbook pumps: --rows = {args.rows}: allowed 0 or more pumps", markup=False)
        return 2
    from logbook.analysis.fleet import forecast_fleet
    from logbook.rounds import next_tests

    with ctx.open_store() as store:
        fleet = ctx.read_fleet(store)
        problems = filter_problems(fleet, site=args.site, model=args.model, status=args.status)
        if problems:
            for problem in problems:
                ctx.err.print(f"logbook pumps: {problem}", markup=False, soft_wrap=True)
            return 2
        note = ctx.as_of_note(store, fleet)
    if note:  # --as-of before anything was recorded: said, not an empty table
        ctx.err.print(f"logbook pumps: {note}", markup=False, soft_wrap=True)
    forecast = forecast_fleet(fleet, today=ctx.today)
    tests = next_tests(fleet, forecast, ctx.today)
    if args.format == "text" and note and not forecast.pumps:
        return 0
    if args.format == "text":
        ctx.console.print(fleet_table(forecast, ctx, site=args.site, model=args.model, status=args.status,
                                      limit=args.rows, tests=tests, due_only=args.due))
        return 0
    from logbook.exports import listings

    rows = select(forecast, ctx, site=args.site, model=args.model, status=args.status, rows=args.rows, tests=tests,
                  due_only=args.due)
    if args.format == "json":
        text = listings.to_json(listings.pumps_json(rows, tests, ctx.today, ctx.units))
    else:
        text = listings.to_csv(listings.PUMP_CSV_HEADER, listings.pumps_csv_rows(rows, tests, ctx.today))
    ctx.console.file.write(text)
    return 0
