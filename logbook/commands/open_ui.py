"""The fleet summary that `logbook` with no command prints where the fleet view cannot
run (no terminal, a terminal that cannot draw, Textual missing), and `logbook demo --no-ui`.

The view itself is started by ``logbook.tui.launch``, which falls back to this summary;
this module never imports the interface (the dependency runs one way: launch -> here)."""

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
