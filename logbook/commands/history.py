"""logbook history SERIAL: the audit trail of one pump (who, when, what, before -> after)."""

from __future__ import annotations

from logbook import fmt

_NOISE = {"id", "entered_at", "entered_by", "import_id"}
_KEY_FIELDS = {
    "readings": ("taken_on", "machine_hours", "case_drain_lpm", "servo_pressure_bar", "neutral_drift_bar"),
    "events": ("kind", "happened_on", "machine", "hours", "to_machine", "to_position", "to_hours", "serial_in"),
    "fitments": ("machine", "position", "fitted_on", "removed_on"),
    "pumps": ("serial", "model"),
    "models": ("code", "limits"),
}


def register(sub) -> None:
    p = sub.add_parser("history", help="show who recorded, corrected, removed or imported what for one pump, and when")
    p.add_argument("serial")
    p.add_argument("--last", type=int, default=None, metavar="N", help="only the N most recent entries")
    p.add_argument("--format", choices=("text", "csv", "json"), default="text",
                   help="text (a table that fits the terminal, default), csv or json (docs/json.md)")
    p.set_defaults(func=run)


def _value(v) -> str:
    if v is None:
        return "-"
    if isinstance(v, float):
        return f"{v:g}"
    if isinstance(v, dict) and "value" in v:
        return f"{v.get('kind', '')} {_value(v['value'])} ({v.get('direction', '')})".strip()
    if isinstance(v, list):
        return ", ".join(_value(x) for x in v) or "none"
    return str(v)


def describe(entry) -> tuple[str, str]:
    """(what, change) in words for one trail entry."""
    what = f"{entry.action} {entry.table.rstrip('s')} {entry.key}"
    before, after = entry.before or {}, entry.after or {}
    if entry.action == "import":
        n = next((v for k, v in after.items() if k.endswith("of this pump")), "?")
        return (f"import of {after.get('file')}",
                f"{n} {entry.table.removesuffix('s') if n == 1 else entry.table} (ids {after.get('ids')}, "
                f"{after.get('dates')}), sha256 {str(after.get('sha256'))[:12]}...")
    if entry.action == "insert":
        keys = _KEY_FIELDS.get(entry.table, tuple(k for k in after if k not in _NOISE))
        return what, ", ".join(f"{k} {_value(after.get(k))}" for k in keys if after.get(k) is not None)
    if entry.action == "correct":
        what = f"correct reading {entry.key} -> {after.get('id')}"
    if entry.action == "remove" and entry.table in ("readings", "events"):
        keys = _KEY_FIELDS[entry.table]
        return what, "removed: " + ", ".join(f"{k} {_value(before.get(k))}" for k in keys if before.get(k) is not None)
    changed = [k for k in sorted(set(before) | set(after)) if k not in _NOISE and before.get(k) != after.get(k)]
    if entry.action == "remove" and not after:
        return what, "deleted: " + ", ".join(f"{k} {_value(v)}" for k, v in before.items() if k not in _NOISE and v is not None)
    return what, "; ".join(f"{k} {_value(before.get(k))} -> {_value(after.get(k))}" for k in changed) or "(no field changed)"


def run(args, ctx) -> int:
    if args.last is not None and args.last < 0:  # looked at before the database is read
        ctx.err.print(f"logbook history: --last = {args.last}: allowed 0 or more entries", markup=False)
        return 2
    with ctx.open_store() as store:
        if args.serial not in (pumps := store.pumps()):
            from logbook.commands.names import unknown_pump

            ctx.err.print(f"logbook history: {unknown_pump(args.serial, pumps)}", markup=False)
            return 2
        trail = store.pump_trail(args.serial)
    if args.last is not None:
        trail = trail[-args.last:] if args.last > 0 else []
    described = [describe(entry) for entry in trail]
    if args.format != "text":
        from logbook.exports import listings

        if args.format == "json":
            text = listings.to_json(listings.history_json(args.serial, trail, described, ctx.today, ctx.units))
        else:
            text = listings.to_csv(("when (UTC)", "who", "action", "table", "key", "what", "before -> after", "reason"),
                                   [(e.at.strftime("%Y-%m-%d %H:%M:%S"), e.who, e.action, e.table, e.key, what, change,
                                     e.reason or "") for e, (what, change) in zip(trail, described)])
        ctx.console.file.write(text)
        return 0
    from logbook.commands.tables import Col, fit

    # every column kept: at 80 columns "what" and "reason" fold narrower than the change, so that the
    # reason of a correction or removal stays on screen; where even that is too wide "who" goes first
    cols = [Col("when (UTC)", 0, keep=True), Col("who", 4, wrap=True, keep=True),
            Col("what", 2, wrap=True, keep=True, room=12), Col("before -> after", 3, wrap=True, keep=True),
            Col("reason", 1, wrap=True, keep=True, room=12)]
    for entry, (what, change) in zip(trail, described):
        for col, v in zip(cols, (entry.at.strftime("%Y-%m-%d %H:%M"), entry.who, what, change, entry.reason or "")):
            col.cells.append(v)
    title = fmt.text(f"history of {args.serial}")
    title.end = "\n"  # a title ends its line (the header row follows)
    ctx.console.print(fit(ctx.console, cols, title=title)[0])
    if not trail:
        ctx.console.print("(no recorded changes)")
    return 0
