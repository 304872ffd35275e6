"""logbook check: SQLite integrity and foreign keys, then the logbook's own rules."""

from __future__ import annotations

from itertools import groupby


def register(sub) -> None:
    p = sub.add_parser(
        "check",
        help="check the database: integrity, foreign keys, hour meters, fitments, models without limits; exit 1 on a problem",
    )
    p.add_argument("--format", choices=("text", "csv", "json"), default="text",
                   help="text (default), csv (one row per problem) or json (docs/json.md); the exit code is the same")
    p.set_defaults(func=run)


def run(args, ctx) -> int:
    with ctx.open_store() as store:
        findings = store.check()
        counts = store.counts() if not findings else None  # a damaged file may not read through
    if args.format != "text":
        from logbook.exports import listings

        if args.format == "json":
            text = listings.to_json(listings.check_json(str(ctx.db_path), findings, counts, ctx.today, ctx.units))
        else:
            text = listings.to_csv(("check", "problem"), [(f.check, f.message) for f in findings])
        ctx.console.file.write(text)
        return 1 if findings else 0
    if not findings:
        ctx.console.print(
            f"{ctx.db_path}: no problems found ({counts['pumps']} pumps, {counts['readings']} readings, "
            f"{counts['events']} events checked)",
            markup=False,
        )
        return 0
    ctx.err.print(f"{ctx.db_path}: {len(findings)} problem(s) found", markup=False)
    for check, items in groupby(findings, key=lambda f: f.check):
        ctx.err.print(f"[bold]{check}[/bold]")
        for f in items:
            ctx.err.print(f"  - {f.message}", markup=False)
    return 1
