"""`logbook` with no command: the fleet view (TUI), or a summary when no terminal."""

from __future__ import annotations

from collections import Counter


def print_summary(ctx) -> int:
    """Counts per status and the ten most urgent pumps."""
    from logbook.analysis.fleet import forecast_fleet
    from logbook.commands.pumps import fleet_table

    with ctx.open_store() as store:
        fleet = ctx.read_fleet(store)
    forecast = forecast_fleet(fleet, today=ctx.today)
    counts = Counter(p.status for p in forecast.pumps)
    ctx.console.print(f"{len(forecast.pumps)} pumps on {ctx.today.isoformat()}: "
                      + "; ".join(f"{n} {s}" for s, n in counts.most_common()), markup=False)
    ctx.console.print(fleet_table(forecast, ctx, limit=10))
    return 0


def run(args, ctx) -> int:
    """The fleet view at a terminal, else the summary (see ``logbook.tui.launch``)."""
    from logbook.tui.launch import run as launch

    return launch(args, ctx)
