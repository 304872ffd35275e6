"""logbook export TABLE: the logbook's records as the CSV files `logbook import` reads."""

from __future__ import annotations

import os
from pathlib import Path

from logbook import validate
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


def _targets(args, tables) -> tuple[dict, list[Problem]]:
    """Where each table goes (None: standard output), and what is wrong with --out, before anything is read."""
    out = None if args.out is None or str(args.out) == "-" else args.out
    if args.table == "all":
        if out is None:
            return {}, [Problem("--out", str(args.out or ""), "is required with all: the folder to write the files into")]
        if out.exists() and not out.is_dir():
            return {}, [Problem("--out", str(out), "is a file: with all, --out names a folder (made if missing)")]
        if not out.exists() and not out.parent.is_dir():
            return {}, [Problem("--out", str(out), f"its parent folder {str(out.parent)!r} does not exist")]
        targets = {t: out / f"{t}.csv" for t in tables}
    else:
        if out is not None and out.is_dir():
            return {}, [Problem("--out", str(out), "is a folder: name a file, or use all to write every table into it")]
        if out is not None and not out.parent.is_dir():
            return {}, [Problem("--out", str(out), f"its folder {str(out.parent)!r} does not exist")]
        targets = {args.table: out}
    taken = [p.name for p in targets.values() if p is not None and p.exists()]
    if taken and not args.force:
        where = str(out) if args.table == "all" else ""
        what = f"{', '.join(taken)} in {where}" if where else ", ".join(taken)
        return {}, [Problem("--out", what, "exists: kept, nothing written (--force replaces it)")]
    return targets, []


def run(args, ctx) -> int:
    from logbook.records_csv import ORDER, table_rows, to_csv

    problems = []
    if args.serial is not None and args.table not in ("readings", "events"):
        problems.append(Problem("--serial", args.serial, "is allowed with readings or events only"))
    tables = ORDER if args.table == "all" else (args.table,)
    targets, bad = _targets(args, tables)
    if problems or bad:
        raise InputRejected(problems + bad)
    with ctx.open_store() as store:
        fleet = store.fleet()
        book = store.costs() if "costs" in tables else None
    if args.serial is not None and args.serial not in fleet.pumps:
        raise InputRejected([Problem("--serial", args.serial,
                                     "is not a known pump" + validate.did_you_mean(args.serial, fleet.pumps))])
    if args.serial is not None:
        from dataclasses import replace

        fleet = replace(fleet, readings=tuple(r for r in fleet.readings if r.serial == args.serial),
                        events=tuple(e for e in fleet.events if e.serial == args.serial or e.serial_in == args.serial))
    if args.table == "all":
        args.out.mkdir(exist_ok=True)
    for table in tables:
        rows = table_rows(table, fleet, book)
        text = to_csv(table, rows)
        target = targets[table]
        if target is None:
            ctx.console.file.write(text)
            continue
        temp = target.with_name(target.name + ".part")
        try:
            temp.write_text(text, encoding="utf-8")
            os.replace(temp, target)  # whole or not at all
        except OSError as exc:
            temp.unlink(missing_ok=True)
            ctx.err.print(f"logbook export: {target}: {exc.strerror or exc}; {table} not written", markup=False)
            return 1
        ctx.err.print(f"wrote {len(rows)} {table} to {target}", markup=False)
    return 0
