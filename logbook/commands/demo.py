"""logbook demo: build a fresh database of the invented demo fleet and open it."""

from __future__ import annotations

import os
from pathlib import Path


def register(sub) -> None:
    p = sub.add_parser(
        "demo",
        help="build a fresh demo fleet database (invented operator) and open the fleet view",
        description="Writes the demo fleet's CSV files and imports them like any user's files. "
        "Without --db the demo lives in demo.db in the user data directory, apart from your own logbook.",
    )
    p.add_argument("--no-ui", action="store_true", help="only build the database and print a fleet summary")
    p.add_argument("--seed", type=int, default=7, help="random seed of the invented fleet (default 7)")
    p.set_defaults(func=run)


def demo_path(args) -> Path:
    if args.db is not None:
        return args.db
    from platformdirs import user_data_dir

    return Path(user_data_dir("logbook", appauthor=False)) / "demo.db"


def run(args, ctx) -> int:
    import demo_fleet
    from logbook.store import Store

    path = demo_path(args)
    if path.exists():
        with Store(path, create=False) as old:
            others = old.writers(besides="demo")
        if others:
            ctx.err.print(
                f"logbook demo: {path} holds data entered by {', '.join(others)}; not replacing it. "
                "Give another --db for the demo.", markup=False,
            )
            return 2
        for suffix in ("", "-wal", "-shm"):
            Path(str(path) + suffix).unlink(missing_ok=True)
    with Store(path, create=True, user="demo") as store:
        reports = demo_fleet.load(store, today=ctx.today, seed=args.seed)
        problems = [p for r in reports.values() for p in r.problems]
        if problems:
            for p in problems[:20]:
                ctx.err.print(f"  - {p}", markup=False)
            ctx.err.print(f"logbook demo: the demo fleet did not import cleanly ({len(problems)} problems)")
            return 1
        counts = store.counts()
    ctx.console.print(
        f"demo fleet written to {path}: {counts['models']} models, {counts['machines']} machines, "
        f"{counts['pumps']} pumps, {counts['readings']} readings, {counts['events']} events",
        markup=False,
    )
    ctx.db_path = path
    from logbook.commands.open_ui import print_summary
    from logbook.tui.launch import can_draw, run as launch

    if args.no_ui or not os.isatty(1) or not can_draw():
        return print_summary(ctx)
    return launch(args, ctx)
