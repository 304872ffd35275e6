"""logbook remove reading|event ID --reason TEXT: take a record out, keeping it for the trail."""

from __future__ import annotations


def register(sub) -> None:
    p = sub.add_parser(
        "remove",
        help="remove a reading or an event (kept and marked, with the reason, in the history)",
        description="A removed reading leaves every trend and check; a removed move gives the pump back its old "
        "place and is refused while later readings or events depend on it.",
    )
    p.add_argument("what", choices=("reading", "event"))
    p.add_argument("id", type=int, metavar="ID", help="reading or event id (see `logbook show SERIAL` / `logbook history SERIAL`)")
    p.add_argument("--reason", required=True, help="why it is removed (kept in the audit trail)")
    p.set_defaults(func=run)


def run(args, ctx) -> int:
    with ctx.open_store() as store:
        if args.what == "reading":
            r = store.remove_reading(args.id, reason=args.reason)
            ctx.console.print(f"removed reading {r.id} of {r.serial} ({r.taken_on}); it stays in `logbook history {r.serial}`",
                              markup=False)
        else:
            e = store.remove_event(args.id, reason=args.reason)
            whose = e.serial or e.machine or ""
            ctx.console.print(f"removed {e.kind.value} event {e.id} of {whose} ({e.happened_on}); kept in the history", markup=False)
    return 0
