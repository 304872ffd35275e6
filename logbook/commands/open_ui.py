"""`logbook` with no command: the fleet view (TUI), or a summary when no terminal."""

from __future__ import annotations

import os
from collections import Counter
from pathlib import Path


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
    """Start the fleet view without importing the store or the analysis: the app opens
    the store in a worker after its first frame (a missing file is reported here)."""
    if not os.isatty(1) or not os.isatty(0):
        return print_summary(ctx)
    if not Path(ctx.db_path).exists():
        ctx.open_store().close()  # raises DatabaseMissing with the store's own words
    try:
        from logbook.tui.app import make_app
        from logbook.tui.gate import StoreOpener
    except ImportError:
        return print_summary(ctx)
    app = make_app(StoreOpener(Path(ctx.db_path), ctx.user), today=ctx.today, units=ctx.units)
    try:
        app.run()
    finally:
        app.gate.close()
    return 0
