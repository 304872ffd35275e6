"""logbook forecast: the monthly overhaul plan and fleet forecast as csv, md, html or json.

Non-interactive: reads the database, writes one file (or stdout) and exits 0; bad
arguments exit 2 and a missing or unreadable database exits 1, each with a message
on stderr. A progress display appears only when stderr is a terminal.
"""

from __future__ import annotations

import dataclasses
from pathlib import Path

from logbook.commands.progress import Steps as _Steps  # the progress line (also backtest's)
from logbook.model import InputRejected, Problem
from logbook.validate import whole_number

SUFFIX_FORMATS = {".csv": "csv", ".md": "md", ".html": "html", ".htm": "html", ".json": "json"}


def register(sub) -> None:
    p = sub.add_parser(
        "forecast",
        help="the monthly overhaul plan: which pumps to take out in which month, and why",
        description="Forecasts every pump, levels the pumps that are due against shop capacity and exchange "
        "pumps, and writes the plan with the fleet forecast and fleet life figures. Safe to run from cron.",
    )
    p.add_argument("--month", default=None, metavar="YYYY-MM", help="first month of the plan (default: this month)")
    p.add_argument("--horizon", type=int, default=None, metavar="N",
                   help="months to plan (default: the stored plan settings, else 6)")
    p.add_argument("--capacity", type=int, default=None, metavar="N",
                   help="shop jobs per month, all sites (default: the stored plan settings, else no limit)")
    p.add_argument("--site-capacity", action="append", default=[], metavar="SITE=N",
                   help="shop jobs per month at one site (repeatable; other sites keep their stored value)")
    p.add_argument("--exchange", action="append", default=[], metavar="MODEL=N",
                   help="exchange pumps on hand for a model (repeatable; other models keep their stored value)")
    p.add_argument("--turnaround", type=int, default=None, metavar="N",
                   help="months before a removed pump is back as an exchange pump (default: stored, else 1)")
    p.add_argument("--save-settings", action="store_true",
                   help="store these plan settings (audited) for later runs and the plan screen of the TUI")
    p.add_argument("--format", choices=("text", "csv", "md", "html", "json"), default=None,
                   help="output format (default: from the --out suffix; to a terminal text, the plan's months as "
                   "tables that fit it; else md)")
    p.add_argument("--out", default="-", metavar="FILE", help="file to write, or - for stdout (default -)")
    p.add_argument("--no-costs", action="store_true",
                   help="place pumps by the greedy pass even when costs are set (logbook costs), for comparison")
    p.add_argument("--allow-late", action="store_true",
                   help="with costs: the least-cost plan may put a pump after the month of its P10 date")
    p.add_argument("--no-calibration", action="store_true",
                   help="raw bands: leave out the spread factors learnt from the fleet's later readings (docs/forecast.md)")
    p.add_argument("--no-charts", action="store_true", help="html: leave out the trend charts")
    p.add_argument("--max-charts", type=int, default=200, metavar="N",
                   help="html: chart at most the first N planned pumps (default 200)")
    p.set_defaults(func=run)


def _pairs(values: list[str], option: str, known: set[str] | None, what: str) -> tuple[dict[str, int], list[Problem]]:
    """Parse repeated NAME=N options; problems name the option, the value and what is allowed."""
    out: dict[str, int] = {}
    problems = []
    for text in values:
        name, sep, number = text.partition("=")
        name = name.strip()
        count = whole_number(number.strip())
        if not sep or not name or count is None or count < 0:
            problems.append(Problem(option, text, f"NAME=N with N a whole number of 0 or more, e.g. {option} X=2"))
        elif known is not None and name not in known:
            allowed = ", ".join(sorted(known)) or "none recorded"
            from logbook.validate import did_you_mean

            problems.append(Problem(option, text, f"{what} must be one of: {allowed}{did_you_mean(name, known)}"))
        else:
            out[name] = count
    return out, problems


def _format(args, ctx=None) -> str:
    if args.format:
        return args.format
    if args.out in (None, "-") and ctx is not None and ctx.console.is_terminal:
        return "text"
    if args.out != "-":
        return SUFFIX_FORMATS.get(Path(args.out).suffix.lower(), "md")
    return "md"


def _check_args(args) -> list[Problem]:
    problems = []
    if args.capacity is not None and args.capacity < 0:
        problems.append(Problem("--capacity", args.capacity, "zero or more shop jobs per month"))
    if args.horizon is not None and not 1 <= args.horizon <= 60:
        problems.append(Problem("--horizon", args.horizon, "1 to 60 months"))
    if args.max_charts < 0:
        problems.append(Problem("--max-charts", args.max_charts, "zero or more charts"))
    if args.turnaround is not None and not 0 <= args.turnaround <= 24:
        problems.append(Problem("--turnaround", args.turnaround, "0 to 24 months"))
    return problems


def _check_out(args, ctx) -> list[Problem]:
    """The --out target is looked at before any work: never the database or its sidecar
    files, never a folder (``logbook.outfile``)."""
    from logbook.outfile import OutputRefused, resolve

    try:
        resolve(args.out, protect=[ctx.db_path], label="--out")
    except OutputRefused as exc:
        return [Problem("--out", args.out, exc.why)]
    return []


#: Months a plan may start before and after this month: a later start is beyond any
#: forecast's reach, an earlier one plans for the past (a typo such as 1969-01 or 2062-04).
MONTHS_BACK, MONTHS_AHEAD = 24, 120


def _month_in_range(start, this_month, text: str) -> list[Problem]:
    from logbook.plan import add_months, month_label

    first, last = add_months(this_month, -MONTHS_BACK), add_months(this_month, MONTHS_AHEAD)
    if first <= start <= last:
        return []
    return [Problem("--month", text, f"a month from {month_label(first)} to {month_label(last)} "
                    f"({MONTHS_BACK // 12} years before to {MONTHS_AHEAD // 12} years after this month)")]


def run(args, ctx) -> int:
    from logbook.plan import add_months, month_start, parse_month

    fmt = _format(args, ctx)
    problems = _check_args(args) + _check_out(args, ctx)
    if fmt == "text" and args.out not in (None, "-"):
        problems.append(Problem("--format", "text", "is for the terminal: write a file as csv, md, html or json"))
    start = month_start(ctx.today)
    if args.month is not None and not args.month.isascii():  # parse_month's isdigit() takes Unicode digits
        problems.append(Problem("--month", args.month, "a month written YYYY-MM with the digits 0-9, e.g. 2026-04"))
    elif args.month is not None:
        try:
            start = parse_month(args.month, "--month")
        except InputRejected as exc:
            problems += exc.problems
        else:
            problems += _month_in_range(start, month_start(ctx.today), args.month)
    if problems:
        return _bad(ctx, problems)

    with _Steps(ctx.err, total=6) as steps:
        steps.step("reading the database")
        with ctx.open_store() as store:
            fleet = ctx.read_fleet(store)
            empty = ctx.as_of_note(store, fleet)  # --as-of before the first record: said in the report's notes
            book = store.costs()
            stored = store.plan_setup()  # the plan settings stored (audited); flags override them for this run
            sites = {m.site for m in fleet.machines.values()}
            site_capacity, bad_sites = _pairs(args.site_capacity, "--site-capacity", sites, "the site")
            exchange, bad_models = _pairs(args.exchange, "--exchange", set(fleet.models), "the model")
            if bad_sites or bad_models:
                return _bad(ctx, bad_sites + bad_models)
            setup = stored.override(horizon=args.horizon, capacity=args.capacity, site_capacity=site_capacity,
                                    exchange=exchange, turnaround=args.turnaround)
            try:
                settings = setup.settings(start)
            except InputRejected as exc:
                return _bad(ctx, exc.problems)
            if args.save_settings:
                store.set_plan_setup(setup)

        from logbook.analysis.fleet import forecast_fleet
        from logbook.analysis.life import fleet_life
        from logbook.exports import Provenance, Report, render
        from logbook.plan import make_plan

        steps.step(f"forecasting {len(fleet.pumps)} pumps")
        forecast = forecast_fleet(fleet, ctx.today, calibration=not args.no_calibration)
        steps.step("fitting fleet life")
        horizon_days = (add_months(start, settings.horizon_months) - ctx.today).days
        life = fleet_life(fleet, forecast, horizon_days=max(horizon_days, 1))
        steps.step("planning")
        from logbook.costing import model_economies, pump_costs

        economies = model_economies(book, life)
        costs = None if args.no_costs else pump_costs(book, forecast, economies)
        if costs is not None and args.allow_late:
            costs = dataclasses.replace(costs, allow_late=True)
        plan = make_plan(forecast, settings, costs)
        steps.step(f"writing {fmt}")
        provenance = Provenance.from_models(str(fleet.source or ctx.db_path), ctx.today, fleet.models)
        from logbook.analysis.backtest import calibration_notes

        notes = calibration_notes(forecast, calibrated=not args.no_calibration)
        if ctx.as_of is not None:
            notes = (f"as of {ctx.as_of.isoformat()}: only what the logbook knew that day (logbook --as-of)",
                     *([empty.removeprefix(f"--as-of {ctx.as_of.isoformat()}: ")] if empty else []), *notes)
        report = Report(forecast, plan, life, provenance, charts=not args.no_charts, max_charts=args.max_charts,
                        economies=economies, notes=notes, units=ctx.units)
        if fmt != "text":
            data = render(report, fmt)
            steps.step("saving")
            from logbook.outfile import OutputError, OutputRefused, write_bytes

            try:  # stdout, a device or pipe written through, or a file replaced atomically
                write_bytes(args.out, data, protect=[ctx.db_path, fleet.source], label="--out")
            except OutputError as exc:
                ctx.err.print(f"logbook forecast: {exc}", markup=False, soft_wrap=True)
                return 2 if isinstance(exc, OutputRefused) else 1
    if fmt == "text":  # after the progress line is cleared
        _print_text(ctx, report, notes, setup.words(tuple(fleet.models)))
        return 0
    if args.out != "-" and ctx.err.is_terminal:
        ctx.err.print(
            f"wrote {args.out}: {len(plan.lines)} planned, {len(plan.unplaced)} do not fit", markup=False, soft_wrap=True
        )
    return 0


def _print_text(ctx, report, notes, assumed: str) -> None:
    """The plan for a terminal: its months, the pumps that do not fit and those to test again, as tables that
    fit the console (``commands.tables.fit``), with the cells the exports print (``exports.common.plan_row``);
    the reasons, fleet life and costs are in the other formats."""
    from logbook.commands.tables import Col, fit
    from logbook.exports.common import plan_row, pumps_by_serial
    from logbook.plan import month_label

    plan = report.plan
    s = plan.settings
    c = ctx.console
    last = s.months[-1] if s.months else s.start_month
    c.print(f"Overhaul plan {month_label(s.start_month)} to {month_label(last)} ({s.horizon_months} months), placed by "
            f"{plan.placement}; forecast of {plan.today.isoformat()}", markup=False)
    c.print(f"  assumed: {assumed}", markup=False)
    for note in (*notes, *((plan.placement_note,) if plan.placement_note else ())):
        c.print(f"  {note}", markup=False)
    pumps = pumps_by_serial(report)
    more = "logbook forecast --format md, html, csv or json has them, with each reason"

    def table(title: str, lines, cols: list[tuple[str, Col]]) -> None:
        for line in lines:
            row = plan_row(line, pumps.get(line.serial), report.units)
            for key, col in cols:
                col.cells.append(row[key] or ("-" if key != "note" else ""))  # a terminal shows "no date" as -
        c.print(fit(c, [col for _, col in cols], title=f"{title} ({len(lines)})", more=more)[0])

    table("planned", plan.lines, [
        ("month", Col("month", 0)), ("serial", Col("serial", 0, keep=True)), ("model", Col("model", 4)),
        ("site", Col("site", 5, wrap=True)), ("reading", Col("reading", 2, wrap=True)),
        ("p10_date", Col("P10", 1)), ("plan", Col("where", 3)), ("note", Col("note", 6, wrap=True))])
    if plan.unplaced:
        table("do not fit", plan.unplaced, [
            ("target_month", Col("latest month", 0)), ("serial", Col("serial", 0, keep=True)),
            ("model", Col("model", 3)), ("reading", Col("reading", 2, wrap=True)), ("p10_date", Col("P10", 1)),
            ("note", Col("why", 0, keep=True, wrap=True))])
    if plan.retests:
        cols = [Col("serial", 0, keep=True), Col("model", 2), Col("reading", 1, wrap=True), Col("why", 0, keep=True, wrap=True)]
        for r in plan.retests:
            for col, v in zip(cols, (r.serial, r.model, r.kind.label, r.reason)):
                col.cells.append(v)
        c.print(fit(c, cols, title=f"test again first ({len(plan.retests)})", more=more)[0])
    loads = ", ".join(f"{month_label(m)} {n}" for m, n in plan.shop_load.items())
    c.print(f"shop jobs per month: {loads}", markup=False)
    c.print("the whole report (reasons, fleet life, costs, charts): logbook forecast --format md|html|csv|json "
            "--out FILE", markup=False)


def _bad(ctx, problems: list[Problem]) -> int:
    ctx.err.print("logbook forecast: nothing written - check the arguments:", markup=False, soft_wrap=True)
    for problem in problems:
        ctx.err.print(f"  - {problem}", markup=False, soft_wrap=True)
    return 2
