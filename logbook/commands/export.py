"""logbook export TABLE: the logbook's records as the CSV files `logbook import` reads."""

from __future__ import annotations

import os
from pathlib import Path

from logbook.model import InputRejected, Problem

TABLES = ("models", "machines", "pumps", "events", "readings", "costs")


def register(sub) -> None:
    p = sub.add_parser(
        "export",
        help="write models, machines, pumps, events, readings or costs as the CSV files import reads (all: every "
        "one into a folder)",
        description="What is current goes out, in the canonical units with every digit stored: readings as they "
        "stand after corrections (the originals and removed rows stay in the database and its history), each pump "
        "with the fitment its own row made (moves and exchanges are events), costs per model, site and machine. "
        "Importing the files of `export all` in the order models, machines, pumps, events, readings, costs into an "
        "empty database gives the same records back (docs/csv-formats.md). An existing file is kept unless --force.",
    )
    p.add_argument("table", choices=(*TABLES, "all"), metavar="TABLE", help=f"{', '.join(TABLES)} or all")
    p.add_argument("--out", type=Path, metavar="PATH", help="file to write (all: a folder); default: standard output "
                   "(one table only)")
    p.add_argument("--serial", metavar="SERIAL", help="readings and events of this pump only")
    p.add_argument("--force", action="store_true", help="replace files that exist")
    p.set_defaults(func=run)


def run(args, ctx) -> int:
    from logbook.exports.tables_csv import ORDER, table_rows, to_csv

    if args.table == "all" and args.out is None:
        raise InputRejected([Problem("--out", "", "is required with all: the folder to write the files into")])
    if args.serial is not None and args.table not in ("readings", "events"):
        raise InputRejected([Problem("--serial", args.serial, "is allowed with readings or events only")])
    tables = ORDER if args.table == "all" else (args.table,)
    targets = {t: (args.out / f"{t}.csv" if args.table == "all" else args.out) for t in tables}
    taken = [str(p) for p in targets.values() if p is not None and p.exists()]
    if taken and not args.force:
        raise InputRejected([Problem("--out", ", ".join(taken), "exists: nothing written (--force replaces it)")])
    with ctx.open_store() as store:
        fleet = store.fleet()
        book = store.costs() if "costs" in tables else None
        if args.serial is not None and args.serial not in fleet.pumps:
            raise InputRejected([Problem("--serial", args.serial, "is not a known pump serial")])
    if args.serial is not None:
        from dataclasses import replace

        fleet = replace(fleet, readings=tuple(r for r in fleet.readings if r.serial == args.serial),
                        events=tuple(e for e in fleet.events if e.serial == args.serial or e.serial_in == args.serial))
    if args.table == "all":
        args.out.mkdir(parents=True, exist_ok=True)
    for table in tables:
        rows = table_rows(table, fleet, book)
        text = to_csv(table, rows)
        if table == "costs" and book is not None and book.currency:  # not a column of the file: a comment row
            text = f"# currency {book.currency}: set it with logbook costs --currency {book.currency}\n" + text
        target = targets[table]
        if target is None:
            ctx.console.file.write(text)
            continue
        temp = target.with_name(target.name + ".part")
        temp.write_text(text, encoding="utf-8")
        os.replace(temp, target)  # whole or not at all
        ctx.err.print(f"wrote {len(rows)} {table} to {target}", markup=False)
    return 0
