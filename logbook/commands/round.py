"""logbook round: which pumps need a reading, and the round sheet to take them with."""

from __future__ import annotations

from datetime import timedelta

from rich.table import Table


FORMATS = ("text", "md", "html", "csv")


def register(sub) -> None:
    p = sub.add_parser(
        "round",
        help="pumps due for a reading (terminal list) or a round sheet for one site (md, html, csv)",
        description="Lists the pumps whose next reading falls due within DAYS days: by the model's reading "
        "interval, or earlier where the forecast is wide and near its limit, or as soon as possible where the "
        "last reading jumped (docs/rounds.md). The csv sheet has the readings-import columns: fill it in and "
        "bring it back with `logbook import readings FILE`.",
    )
    p.add_argument("--site", default=None, help="the site to walk (required for md, html and csv)")
    p.add_argument("--within", type=int, default=7, metavar="DAYS",
                   help="include pumps due within DAYS days from today (default 7; 0 = due today or overdue)")
    p.add_argument("--all", dest="everyone", action="store_true", help="include every fitted pump, due or not")
    p.add_argument("--format", choices=FORMATS, default="text", help="text (terminal list, default), md, html or csv")
    p.add_argument("--out", default=None, metavar="FILE", help="write the sheet to FILE instead of the terminal (- for stdout)")
    p.set_defaults(func=run)


def _check_args(args) -> str | None:
    """What the arguments alone can tell, before the fleet is read."""
    if args.within < 0 or args.within > 3650:
        return f"--within = {args.within}: allowed 0 to 3650 days"
    if args.format != "text" and args.site is None:
        return f"--site is required with --format {args.format}: a round sheet is for one site (`logbook round` lists the sites)"
    if args.out is not None and args.format == "text":
        return "--out needs --format md, html or csv"
    return None


def _check(args, sites: set[str]) -> str | None:
    if args.site is not None and args.site not in sites:
        from logbook.validate import did_you_mean

        return (f"--site = {args.site!r}: not a known site; known: {', '.join(sorted(sites)) or 'none'}"
                f"{did_you_mean(args.site, sites)}")
    return None


def due_table(tests, today, console) -> Table:
    """The terminal list: one row per pump, in walking order, fitting the console."""
    from logbook.commands.tables import Col, fit

    # the site is kept (a walk is by site): at 80 columns it and the next test fold
    cols = [Col("serial", 0), Col("site", 1, wrap=True, keep=True, room=9), Col("machine/pos", 2), Col("model", 6),
            Col("last reading", 5), Col("since", 7), Col("next test", 3, wrap=True, keep=True, room=16),
            Col("why", 4, wrap=True, keep=True, room=16)]
    for t in tests:
        since = "-"
        if t.days_since_reading is not None:
            since = f"{t.days_since_reading} d"
            if t.hours_since_reading is not None:
                since += f", {t.hours_since_reading:,.0f} h"
        values = (t.serial, t.site, f"{t.machine}/{t.position}", t.model,
                  t.last_reading_on.isoformat() if t.last_reading_on else "never", since, t.words(today), t.reason)
        for col, v in zip(cols, values):
            col.cells.append(v)
    return fit(console, cols, more="a wider terminal shows them")[0]


def run(args, ctx) -> int:
    from logbook.analysis.fleet import forecast_fleet
    from logbook.rounds import plan_round

    problem = _check_args(args)
    if problem:
        ctx.err.print(f"logbook round: {problem}", markup=False)
        return 2
    with ctx.open_store() as store:
        fleet = ctx.read_fleet(store)
        note = ctx.as_of_note(store, fleet)
    problem = _check(args, {m.site for m in fleet.machines.values()})
    if problem:
        ctx.err.print(f"logbook round: {problem}", markup=False)
        return 2
    from logbook.outfile import OutputError, OutputRefused, resolve, write_bytes

    target = None
    if args.out is not None:
        try:  # looked at before any work: never the database or its sidecar files (logbook.outfile)
            target = resolve(args.out, protect=[ctx.db_path, fleet.source], label="--out")
        except OutputRefused as exc:
            ctx.err.print(f"logbook round: {exc}", markup=False, soft_wrap=True)
            return 2
    if note:  # --as-of before the first record: nothing to walk to
        ctx.err.print(f"logbook round: {note}", markup=False, soft_wrap=True)
    forecast = forecast_fleet(fleet, today=ctx.today)
    tests = plan_round(fleet, forecast, ctx.today, site=args.site, within_days=args.within, everyone=args.everyone)
    if args.format == "text":
        from logbook.cautions import SAFETY

        # first, as on every round sheet (the list is the sheet of the terminal)
        # wrapped at words to the terminal (or $COLUMNS); whole lines into a file or pipe
        import os
        import sys

        fitted = sys.stdout.isatty() or os.environ.get("COLUMNS", "").isdigit()
        ctx.console.print(SAFETY.text() + "\n", markup=False, highlight=False, soft_wrap=not fitted)
        if not tests:
            where = f" at {args.site}" if args.site else ""
            ctx.console.print(f"No pump{where} is due for a reading within {args.within} days.", markup=False)
            return 0
        ctx.console.print(due_table(tests, ctx.today, ctx.console))
        return 0
    from logbook.exports.round_sheet import build_sheet, render

    sheet = build_sheet(fleet, forecast, tests, site=args.site, made_on=ctx.today,
                        test_by=ctx.today + timedelta(days=args.within), units=ctx.units)
    data = render(sheet, args.format)
    if target is None:
        ctx.console.file.write(data.decode("utf-8"))
        return 0
    try:  # stdout, a device or pipe written through, or a file replaced atomically
        write_bytes(target, data, label="--out")
    except OutputError as exc:
        ctx.err.print(f"logbook round: {exc}", markup=False, soft_wrap=True)
        return 1
    if not target.stdout:
        ctx.console.print(f"{args.out}: round sheet for {args.site}, {len(tests)} pump(s)", markup=False)
    return 0
