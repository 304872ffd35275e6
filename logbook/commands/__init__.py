"""One module per CLI command; see logbook.cli."""

from __future__ import annotations

from rich.text import Text

from logbook import fmt
from logbook.model import ImportReport


def print_report(ctx, report: ImportReport, name: str) -> int:
    """Print an import report; exit code 0 when nothing was wrong, 2 otherwise."""
    what = "would add" if report.dry_run else "added"
    if report.problems:
        ctx.err.print(Text.assemble(fmt.text(f"{name}: "), fmt.text("rejected", style="bold"),
                                    f", nothing written - {len(report.problems)} problem(s):"))
        for p in report.problems:
            ctx.err.print(f"  - {p}", markup=False)
        return 2
    parts = [f"{what} {report.added} {report.table}"]
    if report.already_present:
        parts.append(f"{report.already_present} already present")
    if report.blank:
        parts.append(f"{report.blank} blank row(s) skipped")
    ctx.console.print(f"{name}: " + ", ".join(parts), markup=False)
    for flag in report.flagged:
        ctx.console.print(f"  second look: {flag}", markup=False)
    return 0
