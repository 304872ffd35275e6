"""Terminal tables that fit the console's width: serials and dates are never cut.

A table is a list of ``Col``: each says how much it matters (``rank``: 0 is kept
longest), whether it may wrap (words fold onto more lines, never mid-word unless one
word is wider than the column) and the cells of each row. ``fit`` leaves out the
least useful columns until the table's natural width fits; where even the columns
that are always kept (``keep``) do not fit on one line, the ones that may wrap fold.
Columns left out are named under the table, with where to see them all (``--format
csv``), so that a narrow terminal never hides that something is missing.
"""

from __future__ import annotations

from dataclasses import dataclass, field

from rich.console import Console
from rich.measure import Measurement
from rich.table import Table

from logbook import fmt


#: Characters a folded column keeps at least (when its text is longer): below that a
#: sentence runs down the page a word a line.
FOLD_ROOM = 20


@dataclass
class Col:
    header: str
    rank: int  # 0: the most useful; the highest rank is left out first
    wrap: bool = False  # may fold onto more lines (words whole); else never cut
    keep: bool = False  # never left out (it folds instead, when it may)
    justify: str = "left"
    cells: list[str] = field(default_factory=list)


def _table(cols: list[Col], title, caption) -> Table:
    table = Table(box=None, header_style="bold", pad_edge=False, title=title, title_justify="left",
                  caption=caption, caption_justify="left")
    for col in cols:
        table.add_column(col.header, no_wrap=not col.wrap, justify=col.justify, overflow="fold")
    for row in zip(*(col.cells for col in cols)):
        table.add_row(*fmt.cells(*row))
    return table


def fit(console: Console, cols: list[Col], *, title=None, more: str = "--format csv has them all") -> tuple[Table, list[str]]:
    """The table of ``cols`` that fits ``console.width``, and the headers left out.

    Columns are left out, least useful first, until the rest fits with only the kept
    columns that may wrap folded; if even every column that may wrap folded does not
    fit, more are left out (never the first)."""
    width = console.width
    roomy = console.options.update_width(1 << 16)  # measured unclamped: what each needs, not what is left
    sizes = {}
    for col in cols:
        m = Measurement.get(console, roomy, _table([col], None, None))
        sizes[id(col)] = (m.minimum, m.maximum)

    def folded(c) -> int:  # a folded column keeps room for a few words a line (FOLD_ROOM), never less than its longest word
        low, high = sizes[id(c)]
        return max(low, min(high, FOLD_ROOM))

    def need(cs, fold) -> int:
        return sum(folded(c) if c.wrap and fold(c) else sizes[id(c)][1] for c in cs) + 2 * (len(cs) - 1)

    shown = list(cols)
    by_use = sorted(cols, key=lambda c: -c.rank)
    for col in by_use:  # the least useful first, while the rest would not fit with the kept ones folded
        if need(shown, lambda c: c.keep) <= width:
            break
        if not col.keep:
            shown.remove(col)
    for col in by_use:  # every column folded is not enough: leave out kept ones too (never the first)
        if need(shown, lambda c: True) <= width or len(shown) == 1:
            break
        if col is not cols[0] and col in shown:
            shown.remove(col)
    left_out = [c.header for c in cols if c not in shown]
    caption = f"(left out at {width} columns: {', '.join(left_out)}; {more})" if left_out else None
    return _table(shown, title, caption), left_out
