"""logbook check: SQLite integrity and foreign keys, then the logbook's own rules."""

from __future__ import annotations

from itertools import groupby


def register(sub) -> None:
    p = sub.add_parser(
        "check",
        help="check the database: integrity, foreign keys, hour meters, fitments, models without limits; exit 1 on a problem",
    )
    p.set_defaults(func=run)


def run(args, ctx) -> int:
    with ctx.open_store() as store:
        findings = store.check()
        counts = store.counts() if not findings else None  # a damaged file may not read through
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
