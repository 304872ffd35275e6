"""One module per CLI command; see logbook.cli."""

from __future__ import annotations

from rich.text import Text

from logbook import fmt
from logbook.model import ImportReport


#: Lines of problems or second looks an import shows on screen; the whole list goes to a file.
SHOWN = 25


def print_report(ctx, report: ImportReport, name: str, *, lists_beside=None) -> int:
    """Print an import report; exit code 0 when nothing was wrong, 2 otherwise. More than
    ``SHOWN`` problems or second looks: the first ``SHOWN`` on screen and the whole list in a
    text file beside ``lists_beside`` (the imported file), named on screen."""
    what = "would add" if report.dry_run else "added"
    if report.problems:
        ctx.err.print(Text.assemble(fmt.text(f"{name}: "), fmt.text("rejected", style="bold"),
                                    f", nothing written - {len(report.problems)} problem(s):"))
        _capped(ctx, ctx.err, [f"  - {p}" for p in report.problems], lists_beside, "problems")
        return 2
    parts = [f"{what} {report.added} {report.table}"]
    if report.already_present:
        parts.append(f"{report.already_present} already present")
    if report.blank:
        parts.append(f"{report.blank} blank row(s) skipped")
    ctx.console.print(f"{name}: " + ", ".join(parts), markup=False)
    _capped(ctx, ctx.console, [f"  second look: {flag}" for flag in report.flagged], lists_beside, "second-look")
    return 0


def _capped(ctx, console, lines: list[str], beside, what: str) -> None:
    for line in lines[:SHOWN]:
        console.print(line, markup=False, soft_wrap=not console.is_terminal)  # a file keeps a line per message
    if len(lines) <= SHOWN:
        return
    rest = len(lines) - SHOWN
    if beside is None:
        console.print(f"  ... and {rest} more", markup=False)
        return
    from pathlib import Path

    from logbook.outfile import OutputError, write_bytes

    target = Path(f"{beside}.{what}.txt")
    try:  # atomic, never over the database (logbook.outfile)
        write_bytes(target, ("\n".join(line.strip() for line in lines) + "\n").encode("utf-8"),
                    protect=[ctx.db_path], label=f"{what} list")
    except OutputError as exc:
        console.print(f"  ... and {rest} more; the whole list could not be written: {exc}", markup=False, soft_wrap=True)
        return
    console.print(f"  ... and {rest} more: all {len(lines)} are in {target}", markup=False, soft_wrap=True)
