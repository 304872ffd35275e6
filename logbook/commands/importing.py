"""logbook import TABLE FILE.csv: onboard a fleet from spreadsheets."""

from __future__ import annotations

from pathlib import Path

from logbook.imports import MAX_FILE_BYTES, TABLES, import_bytes


def register(sub) -> None:
    p = sub.add_parser(
        "import",
        help="import models, machines, pumps, events or readings from a CSV file (all rows or none)",
        description="Columns are documented in the README. A unit may follow a column name in brackets, "
        "e.g. 'case_drain [gpm]'. Re-importing the same rows adds nothing: a reading or event corrected or "
        "removed since stays so, and a differing technician or note is reported line by line, not changed.",
    )
    p.add_argument("table", choices=TABLES)
    p.add_argument("file", type=Path)
    p.add_argument("--dry-run", action="store_true", help="check the file and report, write nothing")
    p.set_defaults(func=run)


def run(args, ctx) -> int:
    from logbook.commands import print_report

    try:
        size = args.file.stat().st_size
        if size > MAX_FILE_BYTES:
            ctx.err.print(f"logbook import: {args.file} is {size / 1e6:.0f} MB, larger than {MAX_FILE_BYTES // (1024 * 1024)} MiB; "
                          "split it into smaller files (each is imported all-or-nothing). Nothing was written.", markup=False)
            return 2
        data = args.file.read_bytes()
    except OSError as exc:
        ctx.err.print(f"logbook import: cannot read {args.file}: {exc.strerror}", markup=False)
        return 2
    from logbook.commands.progress import Steps

    check = args.table == "readings" and not args.dry_run
    with Steps(ctx.err, total=5 if check else 2) as steps, ctx.open_store() as store:
        steps.step("reading the logbook")
        before = store.fleet() if check else None
        steps.step(f"checking and writing {args.file.name} ({size / 1e6:.1f} MB)")
        written: list = []
        report = import_bytes(store, args.table, data, name=args.file.name, today=ctx.today, dry_run=args.dry_run,
                              written=written)
        if check and report.added and not report.problems:
            from dataclasses import replace

            from logbook.plausible import fleet_doubts
            from logbook.rounds import import_second_look, new_readings

            steps.step("reading the logbook again")
            after, added = _after(before, written) or (store.fleet(), None)
            steps.step(f"second look at {report.added} new readings against their trends")
            added = new_readings(before, after) if added is None else added
            looks = import_second_look(before, after, ctx.today, added=added)
            steps.step("plausibility of the new readings")
            report = replace(report, flagged=[*report.flagged, *looks,
                                              *fleet_doubts(after, added, ctx.units, looks,
                                                            lambda: _file_lines(data, ctx.today))])
        if report.problems:  # 'did you mean B-25530?' where a name differs from a known one only in letter case
            from dataclasses import replace

            from logbook.commands.names import Known, hinted

            report = replace(report, problems=hinted(report.problems, Known(store)))
    return print_report(ctx, report, str(args.file), lists_beside=args.file)


def _after(before, written: list):
    """(the fleet after the import, the readings it added) without reading the store again:
    ``before`` and the rows the import wrote (``store.bulk.Written``), the ones after the
    others: not in the store's order (date, hours, id) as a read gives them, since nothing the
    command does with it depends on their order (the second look and the plausibility checks
    sort what they compare; tests/store/test_import_second_look.py holds their lines to those
    of a read in the store's order). None when the store did not hand them back or someone else
    wrote between the two (then the store is read again)."""
    from dataclasses import replace

    from logbook.columns import ReadingColumns

    if len(written) != 1 or not isinstance(before.readings, ReadingColumns):
        return None
    (w,) = written
    if w.changes_before != before.change_count:
        return None
    joined = ReadingColumns.joined([before.readings, w.readings])
    return replace(before, readings=joined, change_count=w.changes_after), w.readings


def _file_lines(data: bytes, today) -> dict:
    """(serial, date, machine hours) -> line number of each reading row of the file."""
    from logbook.imports import read_columns, read_table

    fast = read_columns("readings", data, today)
    if fast is not None:
        columns, lines = fast
        return dict(zip(zip(columns["serial"], columns["date"], columns["machine_hours"]), lines))
    rows, lines, _, _ = read_table("readings", data, today)
    return {(v.get("serial"), v.get("date"), v.get("machine_hours")): n for v, n in zip(rows, lines)}
