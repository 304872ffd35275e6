"""logbook pumps: the fleet list, most urgent first."""

from __future__ import annotations

from rich.table import Table

from logbook import fmt


def register(sub) -> None:
    p = sub.add_parser("pumps", help="list pumps in service with their forecast, most urgent first")
    p.add_argument("--site", default=None)
    p.add_argument("--model", default=None)
    p.add_argument("--status", default=None, help="only pumps whose status contains this text")
    p.add_argument("--due", action="store_true", help="only pumps whose next reading is due (by interval or forecast)")
    p.add_argument("--limit", type=int, default=None, help="show at most N pumps")
    p.set_defaults(func=run)


def fleet_table(forecast, ctx, *, site=None, model=None, status=None, limit=None, tests=None, due_only=False) -> Table:
    """The fleet as a table; ``tests`` (serial -> rounds.NextTest) adds the next-reading column."""
    from logbook.analysis.status import urgency_key

    table = Table(box=None, header_style="bold", pad_edge=False)
    cols = ["serial", "machine/pos", "model", "h since ovh", "nearest limit", "P10", "P50", "status"]
    if tests is not None:
        cols.append("next reading")
    for col in cols:
        table.add_column(col, no_wrap=True)
    rows = [p for p in forecast.pumps if (site is None or p.site == site) and (model is None or p.model == model)
            and (status is None or status.lower() in p.status.lower())
            and (not due_only or (tests is not None and p.serial in tests and tests[p.serial].is_due(ctx.today)))]
    rows.sort(key=urgency_key)  # the engine's one most-urgent-first order
    for p in rows[:limit]:
        w = p.worst
        table.add_row(
            p.serial,
            f"{p.machine or 'shelf'}/{p.position or '-'}",
            p.model,
            fmt.hours(p.hours_since_overhaul),
            fmt.nearest_limit(w, ctx.units),
            fmt.day(w.p10_date) if w else "-",
            fmt.day(w.p50_date) if w else "-",
            p.status,
            *([tests[p.serial].words(ctx.today) if p.serial in tests else "-"] if tests is not None else []),
        )
    return table


def run(args, ctx) -> int:
    from logbook.analysis.fleet import forecast_fleet
    from logbook.rounds import next_tests

    with ctx.open_store() as store:
        fleet = store.fleet()
    forecast = forecast_fleet(fleet, today=ctx.today)
    tests = next_tests(fleet, forecast, ctx.today)
    ctx.console.print(fleet_table(forecast, ctx, site=args.site, model=args.model, status=args.status, limit=args.limit,
                                  tests=tests, due_only=args.due))
    return 0
