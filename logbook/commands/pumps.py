"""logbook pumps: the fleet list, most urgent first."""

from __future__ import annotations

from rich.table import Table

from logbook import fmt
from logbook.model import Problem


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
        table.add_row(*fmt.cells(
            p.serial,
            f"{p.machine or 'shelf'}/{p.position or '-'}",
            p.model,
            fmt.hours(p.hours_since_overhaul),
            fmt.nearest_limit(w, ctx.units),
            fmt.day(w.p10_date) if w else "-",
            fmt.day(w.p50_date) if w else "-",
            p.status,
            *([tests[p.serial].words(ctx.today) if p.serial in tests else "-"] if tests is not None else []),
        ))
    return table


def filter_problems(fleet, *, site=None, model=None, status=None) -> list[Problem]:
    """A filter that can match no pump in any fleet state is a typo: name it and list what
    there is (sites of the recorded machines, the recorded models, the status words)."""
    from logbook.analysis.status import STATUS_ORDER

    problems = []
    sites = sorted({m.site for m in fleet.machines.values()})
    if site is not None and site not in sites:
        problems.append(Problem("--site", site, "no such site; sites: " + (", ".join(sites) or "none recorded")))
    if model is not None and model not in fleet.models:
        problems.append(Problem("--model", model, "no such model; models: " + (", ".join(sorted(fleet.models)) or "none recorded")))
    if status is not None and not any(status.lower() in word.lower() for word in STATUS_ORDER):
        problems.append(Problem("--status", status, "no status contains this text; statuses: " + ", ".join(STATUS_ORDER)))
    return problems


def run(args, ctx) -> int:
    from logbook.analysis.fleet import forecast_fleet
    from logbook.rounds import next_tests

    with ctx.open_store() as store:
        fleet = store.fleet()
    problems = filter_problems(fleet, site=args.site, model=args.model, status=args.status)
    if problems:
        for problem in problems:
            ctx.err.print(f"logbook pumps: {problem}", markup=False, soft_wrap=True)
        return 2
    forecast = forecast_fleet(fleet, today=ctx.today)
    tests = next_tests(fleet, forecast, ctx.today)
    ctx.console.print(fleet_table(forecast, ctx, site=args.site, model=args.model, status=args.status, limit=args.limit,
                                  tests=tests, due_only=args.due))
    return 0
