"""logbook show SERIAL: one pump's fitments, events, readings and forecast."""

from __future__ import annotations

from rich.text import Text

from logbook import fmt
from logbook.analysis.results import outcome_words
from logbook.model import ALL_KINDS


def register(sub) -> None:
    p = sub.add_parser("show", help="show one pump: where it sat, events, readings and forecast")
    p.add_argument("serial")
    p.add_argument("--all-readings", action="store_true", help="include corrected (superseded) and removed readings")
    p.add_argument("--format", choices=("text", "csv", "json"), default="text",
                   help="text (tables that fit the terminal, default), csv (the readings) or json (everything; docs/json.md)")
    p.set_defaults(func=run)


def run(args, ctx) -> int:
    from logbook.analysis.fleet import forecast_in_fleet

    with ctx.open_store() as store:
        pumps = store.pumps()
        if args.serial not in pumps:
            from logbook.commands.names import unknown_pump

            ctx.err.print(f"logbook show: {unknown_pump(args.serial, pumps)}", markup=False)
            return 2
        fleet = ctx.read_fleet(store)
        note = ctx.as_of_note(store, fleet)
        history = fleet.history(args.serial)
        all_readings = store.readings(args.serial, include_superseded=True) if args.all_readings else history.readings
        if ctx.as_of is not None and args.all_readings:  # as listed on the day: later corrections not yet made
            from logbook.asof import readings_known_on

            all_readings = readings_known_on(all_readings, store.fleet_history()[1], ctx.as_of)
    if note:  # --as-of before the first record: said before the (empty) tables
        ctx.err.print(f"logbook show: {note}", markup=False, soft_wrap=True)
    forecast = forecast_in_fleet(fleet, args.serial, ctx.today)
    if args.format != "text":
        from logbook.exports import listings

        if args.format == "json":
            text = listings.to_json(listings.show_json(history, all_readings, forecast, ctx.today, ctx.units))
        else:
            text = listings.to_csv(*listings.show_csv_rows(all_readings, ctx.units))
        ctx.console.file.write(text)
        return 0
    from logbook.commands.tables import Col, fit

    u, c = ctx.units, ctx.console
    m = history.model
    c.print(Text.assemble(fmt.text(args.serial, style="bold"), fmt.text(
        f"  model {m.code} ({m.displacement_cc:g} cm3/rev, {fmt.pressure(m.rated_pressure_bar, u)} rated)  status: {forecast.status}")))
    cols = [Col("machine", 0), Col("position", 1), Col("from", 2), Col("until", 3), Col("meter at fit", 5, justify="right"),
            Col("pump h at fit", 4, justify="right")]
    for f in history.fitments:
        _add(cols, f.machine, f.position, fmt.day(f.fitted_on), fmt.day(f.removed_on) if f.removed_on else "now",
             fmt.hours(f.machine_hours_at_fit), fmt.hours(f.pump_hours_at_fit))
    c.print(fit(c, cols, title="fitted in", more="--format json has them all")[0])
    if history.events:
        cols = [Col("date", 0), Col("event", 1), Col("machine", 3), Col("hours", 4, justify="right"),
                Col("note", 2, wrap=True, keep=True)]
        for e in history.events:
            words = e.kind.value.replace("_", " ") + (f", {e.serial_in} went in" if e.serial_in else "")
            _add(cols, fmt.day(e.happened_on), words, e.machine or "", fmt.hours(e.hours), e.note)
        c.print(fit(c, cols, title="events", more="--format json has them all")[0])
    flow, pressure = u.flow, u.pressure
    cols = [Col("id", 1, justify="right"), Col("date", 0), Col("machine", 9), Col("meter h", 2, justify="right"),
            Col(f"drain {flow}", 3, justify="right"), Col(f"servo {pressure}", 4, justify="right"),
            Col(f"drift {pressure}", 5, justify="right"), Col(f"oil {u.temperature}", 6, justify="right"),
            Col(f"test {pressure}", 7, justify="right"), Col("by", 8)]
    for r in all_readings:
        state = " corrected" if r.superseded_by else " removed" if r.removed_reason else ""
        _add(cols, f"{r.id}{state}", fmt.day(r.taken_on), r.machine or "", f"{r.machine_hours:,.0f}",
             fmt.value(ALL_KINDS[0], r.case_drain_lpm, u, with_unit=False),
             fmt.value(ALL_KINDS[1], r.servo_pressure_bar, u, with_unit=False),
             fmt.value(ALL_KINDS[2], r.neutral_drift_bar, u, with_unit=False),
             _bare(fmt.temperature(r.oil_temp_c, u)), _bare(fmt.pressure(r.test_pressure_bar, u)),
             r.technician or r.entered_by)
    c.print(fit(c, cols, title="readings (as measured)", more="--format csv has them all")[0])
    cols = [Col("reading", 0), Col("latest", 3, justify="right", keep=True),
            Col("limit", 4, justify="right", keep=True), Col("path", 8),
            Col("P10", 1), Col("P50", 2), Col("P90", 6), Col("outcome", 5, wrap=True, keep=True),
            Col("flags", 7, wrap=True)]
    for kf in forecast.kinds:
        _add(cols, kf.kind.label, fmt.value(kf.kind, kf.latest_value, u), fmt.value(kf.kind, kf.limit.value, u) if kf.limit else "-",
             kf.path, fmt.day(kf.p10_date), fmt.day(kf.p50_date), fmt.day(kf.p90_date), outcome_words(kf),
             ", ".join(sorted(kf.flags)).replace("_", " "))
    c.print(fit(c, cols, title="forecast (normalized to reference conditions)", more="--format json has them all")[0])
    from logbook.analysis.backtest import kind_calibration_words
    from logbook.analysis.fleet import DEFAULT_HORIZON_HOURS

    checked = max((kf.calibrated_on for kf in forecast.kinds), default=0)
    c.print("P10 / P50 / P90: dates by which the pump's true condition (not one noisy reading) is past the limit "
            "with 10 / 50 / 90 % chance, weighing several wear paths (path: the heaviest); bands "
            + kind_calibration_words(checked, m.code) + f"; the horizon: {DEFAULT_HORIZON_HOURS:,.0f} operating hours "
            "ahead (a date beyond it is '-').", markup=False, highlight=False)
    if forecast.utilisation_basis:  # parked or run by season: which hours the dates assume
        c.print(f"{forecast.machine} {forecast.utilisation_basis}.", markup=False, highlight=False)
    for kf in forecast.kinds:
        for why in kf.not_used:
            c.print(f"{kf.kind.label} reading of {why} - not used in the trend", markup=False, highlight=False)
    return 0


def _add(cols, *values) -> None:
    for col, v in zip(cols, values):
        col.cells.append(v)


def _bare(shown: str) -> str:
    """'55 C' -> '55' (the unit is in the column's header)."""
    return shown.split(" ")[0]
