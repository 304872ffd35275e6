"""logbook init: create an empty database (or migrate an existing one)."""

from __future__ import annotations


def register(sub) -> None:
    p = sub.add_parser("init", help="create an empty logbook database at --db (or migrate an older one)")
    p.set_defaults(func=run)


def run(args, ctx) -> int:
    existed = ctx.db_path.exists()
    with ctx.open_store(create=True) as store:
        store.ready_to_write()  # a damaged or read-only file is refused here, as any write to it would be
        counts = store.counts()
        version = store.schema_version()
    state = "opened existing" if existed else "created"
    checked = "; quick check ok" if existed else ""
    ctx.console.print(f"{state} {ctx.db_path} (schema {version}{checked}; {counts['pumps']} pumps, "
                      f"{counts['readings']} readings)", markup=False)
    return 0
