"""logbook backup DEST: a consistent copy of the database, safe while others write."""

from __future__ import annotations

from pathlib import Path


def register(sub) -> None:
    p = sub.add_parser(
        "backup",
        help="copy the database to DEST with SQLite's online backup (consistent while others keep writing)",
        description="The database is checked first (quick_check) and the copy is checked (integrity_check) "
        "before it takes DEST's place, so a damaged database or a failed copy never replaces a good backup. "
        "A new copy is readable and writable by owner and group only. An existing DEST is kept unless "
        "--force is given. DEST may not be the database or its -wal, -shm or -journal file.",
    )
    p.add_argument("dest", type=Path, metavar="DEST")
    p.add_argument("--force", action="store_true", help="replace DEST if it exists (only once a good copy is made)")
    p.set_defaults(func=run)


def run(args, ctx) -> int:
    with ctx.open_store() as store:
        result = store.backup(args.dest, force=args.force)
    c = result.counts
    ctx.console.print(
        f"backed up {ctx.db_path} to {result.path}: {c['pumps']} pumps, {c['readings']} readings, {c['events']} events, "
        f"{c['audit']} audit rows; integrity {result.integrity}",
        markup=False,
    )
    return 0 if result.integrity == "ok" else 1
