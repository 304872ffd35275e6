"""`logbook` with no command: the fleet view (TUI), or a summary when no terminal."""

from __future__ import annotations

import os
from collections import Counter


def print_summary(ctx) -> int:
    """Counts per status and the ten most urgent pumps."""
    from logbook.analysis.fleet import forecast_fleet
    from logbook.commands.pumps import fleet_table

    with ctx.open_store() as store:
        fleet = store.fleet()
    forecast = forecast_fleet(fleet, today=ctx.today)
    counts = Counter(p.status for p in forecast.pumps)
    ctx.console.print(f"{len(forecast.pumps)} pumps on {ctx.today.isoformat()}: "
                      + "; ".join(f"{n} {s}" for s, n in counts.most_common()), markup=False)
    ctx.console.print(fleet_table(forecast, ctx, limit=10))
    return 0


def run(args, ctx) -> int:
    if not os.isatty(1) or not os.isatty(0):
        return print_summary(ctx)
    try:
        from logbook.tui.app import make_app
    except ImportError:
        return print_summary(ctx)
    store = ctx.open_store()
    try:
        app = make_app(store, today=ctx.today, units=ctx.units)
        app.run()
    finally:
        store.close()
    return 0
