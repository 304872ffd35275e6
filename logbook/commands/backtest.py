"""logbook backtest: what the forecast would have said at past dates, and what happened next.

Rolling-origin evaluation (``logbook.analysis.backtest``): at each origin the fleet as
the logbook knew it that day is forecast, and scored on the later record. Text at the
terminal, or md, html (with its calibration plot), json (docs/backtest.md) or csv to a
file or stdout. A progress bar appears only when stderr is a terminal.
"""

from __future__ import annotations

import re
from datetime import date
from pathlib import Path

from logbook.model import Problem

FORMATS = ("text", "md", "html", "json", "csv")
SUFFIX_FORMATS = {".md": "md", ".html": "html", ".htm": "html", ".json": "json", ".csv": "csv", ".txt": "text"}
_EVERY = re.compile(r"^([0-9]+)-?(day|days|month|months)$")


def register(sub) -> None:
    p = sub.add_parser(
        "backtest",
        help="how past forecasts did: forecast at past dates with what was known then, scored on what came later",
        description="Rolling-origin evaluation of the forecast on this fleet's own history (docs/backtest.md).",
    )
    p.add_argument("--from", dest="first", default=None, metavar="YYYY-MM-DD",
                   help="first origin (default: 6 months after the first reading)")
    p.add_argument("--to", dest="last", default=None, metavar="YYYY-MM-DD",
                   help="last origin (default: a month before today)")
    p.add_argument("--every", default="1-months", metavar="N-days|N-months",
                   help="time between origins, e.g. 14-days or 3-months (default 1-months)")
    p.add_argument("--site", default=None, help="score only the pumps at this site (the forecast pools the whole fleet)")
    p.add_argument("--model", default=None, help="score only the pumps of this model")
    p.add_argument("--no-calibration", action="store_true", help="score the raw bands (as forecast --no-calibration)")
    p.add_argument("--format", choices=FORMATS, default=None, help="output format (default: from the --out suffix, else text)")
    p.add_argument("--out", default="-", metavar="FILE", help="file to write, or - for stdout (default -)")
    p.set_defaults(func=run)


def parse_every(text: str) -> tuple[int, str] | None:
    """'14-days' -> (14, 'days'); '3-months' -> (3, 'months'); None when not of that form or zero."""
    m = _EVERY.match(text.strip().lower()) if text.isascii() else None
    if m is None or int(m[1]) < 1:
        return None
    return int(m[1]), "days" if m[2].startswith("day") else "months"


def _day(text: str | None, option: str, problems: list[Problem]) -> date | None:
    from logbook.validate import iso_date

    if text is None:
        return None
    value = iso_date(text)
    if value is None:
        problems.append(Problem(option, text, "a date written YYYY-MM-DD, e.g. 2025-03-01"))
    return value


def _format(args) -> str:
    if args.format:
        return args.format
    if args.out != "-":
        return SUFFIX_FORMATS.get(Path(args.out).suffix.lower(), "text")
    return "text"


def run(args, ctx) -> int:
    from logbook.outfile import OutputError, OutputRefused, resolve, write_bytes

    problems: list[Problem] = []
    first, last = _day(args.first, "--from", problems), _day(args.last, "--to", problems)
    every = parse_every(args.every)
    if every is None:
        problems.append(Problem("--every", args.every, "N-days or N-months with N a whole number of 1 or more, e.g. 1-months"))
    if first is not None and last is not None and first > last:
        problems.append(Problem("--from", args.first, f"a day on or before --to ({args.last})"))
    if last is not None and last > ctx.today:
        problems.append(Problem("--to", args.last, f"today ({ctx.today.isoformat()}) or earlier"))
    if args.out != "-":
        try:
            resolve(args.out, protect=[ctx.db_path], label="--out")
        except OutputRefused as exc:
            problems.append(Problem("--out", args.out, exc.why))
    if problems:
        return _bad(ctx, problems)
    with ctx.open_store() as store:
        now = store.fleet()
        history, known = store.fleet_history()
    from logbook.commands.pumps import filter_problems

    problems = filter_problems(now, site=args.site, model=args.model)
    if not now.readings:
        problems.append(Problem("readings", "none", "a backtest needs readings on record (logbook record, logbook import)"))
    if problems:
        return _bad(ctx, problems)
    from logbook.analysis.backtest import default_span, origin_dates, run_backtest

    span = default_span(now, ctx.today)
    start, end = first or span[0], last or span[1]
    origins = origin_dates(start, end, *every)
    if not origins:
        return _bad(ctx, [no_origins(now, first, last, start, end)])
    from logbook.commands.progress import Steps

    fmt = _format(args)
    with Steps(ctx.err, total=len(origins) + 1) as steps:
        result = run_backtest(now, history, known, origins, site=args.site, model=args.model,
                              calibration=not args.no_calibration,
                              step=lambda day: steps.step(f"forecasting as of {day.isoformat()}"))
        steps.step(f"writing {fmt}")
    if fmt == "text" and args.out == "-":
        print_text(result, ctx.console)
        return 0
    if fmt == "text":
        from io import StringIO

        from rich.console import Console

        buffer = StringIO()
        print_text(result, Console(file=buffer, width=100, color_system=None, highlight=False))
        data = buffer.getvalue().encode()
    else:
        from logbook.exports.backtest_report import render

        data = render(result, fmt)
    try:
        write_bytes(args.out, data, protect=[ctx.db_path, now.source], label="--out")
    except OutputError as exc:
        ctx.err.print(f"logbook backtest: {exc}", markup=False, soft_wrap=True)
        return 2 if isinstance(exc, OutputRefused) else 1
    if args.out != "-" and ctx.err.is_terminal:
        ctx.err.print(f"wrote {args.out}: {len(result.origins)} origins", markup=False, soft_wrap=True)
    return 0


def no_origins(fleet, first: date | None, last: date | None, start: date, end: date) -> Problem:
    """Why no origin lies from ``start`` to ``end`` (--from and --to as given, None for a default),
    with the record's first and last reading dates: a --from after the newest reading, after the
    default --to, or a record too short for the defaults."""
    from logbook.analysis.backtest import FIRST_AFTER_DAYS, LAST_BEFORE_DAYS

    days = [r.taken_on for r in fleet.readings]
    oldest, newest = min(days).isoformat(), max(days).isoformat()
    span = f"the readings run from {oldest} to {newest}"
    if first is not None and first.isoformat() > newest:
        upto = "" if last is not None else f", the default --to, {LAST_BEFORE_DAYS} days before today"
        return Problem("--from", first.isoformat(), f"is after the newest reading on record ({span}); "
                       f"give a --from from {oldest} to {end.isoformat()}{upto}")
    if first is not None and last is None:
        return Problem("--from", first.isoformat(), f"is after the default --to, {end.isoformat()} "
                       f"({LAST_BEFORE_DAYS} days before today, to leave later readings to score on; {span}); "
                       "give an earlier --from, or --to")
    if first is None and last is not None:
        return Problem("--to", last.isoformat(), f"is before the default --from, {start.isoformat()} "
                       f"({FIRST_AFTER_DAYS} days after the first reading; {span}); give a later --to, or --from")
    return Problem("--from", start.isoformat(), f"the record is too short for the default origins ({span}: the "
                   f"default --from is {FIRST_AFTER_DAYS} days after the first, --to {LAST_BEFORE_DAYS} days before "
                   f"today, {end.isoformat()}); give --from and --to")


def print_text(result, console) -> None:
    """The summary tables, fitted to the console (columns left out at 80 are named under each)."""
    from logbook.commands.tables import Col, fit
    from logbook.exports.backtest_report import COLUMNS, EXPLAIN, GROUP_TITLES, SHORT, cell, headline, pit_line

    console.print(headline(result), markup=False, highlight=False)
    ranks = {"readings": 1, "below_p10": 0, "above_p90": 0, "p50_error": 3, "series": 9, "crossings": 4,
             "before_p10": 6, "inside": 8, "after_p90": 7, "open": 10, "km_before_p10": 2, "km_after_p90": 5}
    groups = [("overall", {"all": result.overall})] + [(GROUP_TITLES[g], result.groups[g]) for g in result.groups]
    for title, figures in groups:
        cols = [Col("group", 0, keep=True)] + [Col(SHORT[k], ranks[k], justify="right") for k, _ in COLUMNS]
        for label, f in figures.items():
            cols[0].cells.append(label)
            for col, (k, _) in zip(cols[1:], COLUMNS):
                col.cells.append(cell(k, getattr(f, k)))
        console.print(fit(console, cols, title=title, more="--format csv has them all")[0])
    console.print(f"PIT histogram of all later readings: {pit_line(result.overall)}", markup=False, highlight=False)
    console.print(f"plan misses: {len(result.misses)}; overhauled with much life left: {len(result.early)} "
                  "(--format md or html lists them)", markup=False, highlight=False)
    for line in EXPLAIN:
        console.print(line, markup=False, highlight=False)


def _bad(ctx, problems: list[Problem]) -> int:
    ctx.err.print("logbook backtest: nothing done - check the arguments:", markup=False, soft_wrap=True)
    for problem in problems:
        ctx.err.print(f"  - {problem}", markup=False, soft_wrap=True)
    return 2
