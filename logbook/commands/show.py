"""logbook show SERIAL: one pump's fitments, events, readings and forecast."""

from __future__ import annotations

from rich.table import Table
from rich.text import Text

from logbook import fmt
from logbook.analysis.results import OUTCOME_WORDS
from logbook.model import ALL_KINDS


def register(sub) -> None:
    p = sub.add_parser("show", help="show one pump: where it sat, events, readings and forecast")
    p.add_argument("serial")
    p.add_argument("--all-readings", action="store_true", help="include corrected (superseded) and removed readings")
    p.set_defaults(func=run)


def run(args, ctx) -> int:
    from logbook.analysis.fleet import forecast_in_fleet

    with ctx.open_store() as store:
        pumps = store.pumps()
        if args.serial not in pumps:
            ctx.err.print(f"logbook show: serial {args.serial!r} is not a known pump", markup=False)
            return 2
        fleet = store.fleet()
        history = fleet.history(args.serial)
        all_readings = store.readings(args.serial, include_superseded=True) if args.all_readings else history.readings
    forecast = forecast_in_fleet(fleet, args.serial, ctx.today)
    u, c = ctx.units, ctx.console
    m = history.model
    c.print(Text.assemble(fmt.text(args.serial, style="bold"), fmt.text(
        f"  model {m.code} ({m.displacement_cc:g} cm3/rev, {fmt.pressure(m.rated_pressure_bar, u)} rated)  status: {forecast.status}")))
    t = Table(title="fitted in", box=None, title_justify="left", header_style="bold")
    for col in ("machine", "position", "from", "until", "meter at fit", "pump h at fit"):
        t.add_column(col)
    for f in history.fitments:
        t.add_row(*fmt.cells(f.machine, f.position, fmt.day(f.fitted_on), fmt.day(f.removed_on) if f.removed_on else "now",
                             fmt.hours(f.machine_hours_at_fit), fmt.hours(f.pump_hours_at_fit)))
    c.print(t)
    if history.events:
        t = Table(title="events", box=None, title_justify="left", header_style="bold")
        for col in ("date", "event", "machine", "hours", "note"):
            t.add_column(col)
        for e in history.events:
            t.add_row(*fmt.cells(fmt.day(e.happened_on), e.kind.value, e.machine or "", fmt.hours(e.hours), e.note))
        c.print(t)
    t = Table(title="readings (as measured)", box=None, title_justify="left", header_style="bold")
    for col in ("id", "date", "machine", "meter", "case drain", "servo", "drift", "oil", "test p", "by"):
        t.add_column(col)
    for r in all_readings:
        t.add_row(*fmt.cells(
            str(r.id) + (" (corrected)" if r.superseded_by else " (removed)" if r.removed_reason else ""), fmt.day(r.taken_on), r.machine or "", fmt.hours(r.machine_hours),
            fmt.value(ALL_KINDS[0], r.case_drain_lpm, u), fmt.value(ALL_KINDS[1], r.servo_pressure_bar, u),
            fmt.value(ALL_KINDS[2], r.neutral_drift_bar, u), fmt.temperature(r.oil_temp_c, u), fmt.pressure(r.test_pressure_bar, u),
            r.technician or r.entered_by,
        ))
    c.print(t)
    t = Table(title="forecast (normalized to reference conditions)", box=None, title_justify="left", header_style="bold")
    for col in ("reading", "latest", "limit", "path", "P10", "P50", "P90", "outcome", "flags"):
        t.add_column(col)
    for kf in forecast.kinds:
        t.add_row(*fmt.cells(
            kf.kind.label, fmt.value(kf.kind, kf.latest_value, u), fmt.value(kf.kind, kf.limit.value, u) if kf.limit else "-",
            kf.path, fmt.day(kf.p10_date), fmt.day(kf.p50_date), fmt.day(kf.p90_date), OUTCOME_WORDS[kf.outcome],
            ", ".join(sorted(kf.flags)).replace("_", " "),
        ))
    c.print(t)
    checked = max((kf.calibrated_on for kf in forecast.kinds), default=0)
    c.print("P10 / P50 / P90: dates by which the pump's true condition (not one noisy reading) is past the limit "
            "with 10 / 50 / 90 % chance, weighing several wear paths (path: the heaviest)"
            + (f"; the band's width was checked on up to {checked} later readings of its model's fleet." if checked
               else "; too little fleet history to check the band's width on later readings."),
            markup=False, highlight=False)
    return 0
