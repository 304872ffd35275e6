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

from rich.cells import cell_len
from rich.console import Console
from rich.measure import Measurement
from rich.segment import Segment
from rich.table import Table
from rich.text import Text

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
    room: int = 0  # when it folds, the characters a line keeps at least (0: FOLD_ROOM; never below its longest word)


class PlainTable(Table):
    """A rich ``Table`` of plain text cells (``fmt.cells``) that is measured and laid out on
    the cells' strings: the same widths as rich's (its own width rules run on the same
    measurements) and the same lines, without a renderable per cell (a 10,000-row table of
    rich cells costs more than the forecast behind it). Any other table goes rich's own way;
    tests/unit/test_tables.py holds the two to the same text."""

    def _plain_size(self, column) -> tuple[int, int] | None:
        """(longest word, longest line) of the column's header and cells, or None when a cell
        is not plain text (kept per column while its cells stay the same)."""
        cache = self.__dict__.setdefault("_sizes", {})
        key = (column._index, len(column._cells), self.show_header)
        if key not in cache:
            cells = [column.header, *column._cells] if self.show_header else list(column._cells)
            texts = []
            for cell in cells:
                if isinstance(cell, Text):
                    plain = not (cell.style or cell.spans or cell.justify or cell.overflow or cell.no_wrap)
                    texts.append(cell.plain if plain else None)
                else:
                    texts.append(cell if isinstance(cell, str) and not self._markup(cell) else None)
            cache[key] = None if None in texts else text_size(texts)
        return cache[key]

    @staticmethod
    def _markup(text: str) -> bool:
        return "[" in text or "\t" in text

    def _measure_column(self, console, options, column) -> Measurement:
        size = self._plain_size(column) if column.width is None and not self.show_footer else None
        if size is None:
            return super()._measure_column(console, options, column)
        most = options.max_width
        if most < 1:
            return Measurement(0, 0)
        pad = self._get_padding_width(column._index)
        if most - pad < 1:  # as rich's Padding measures a cell with no room
            low = high = most
        else:
            low, high = min(size[0] + pad, most), min(size[1] + pad, most)
        measurement = Measurement(low, high).with_maximum(most)
        return measurement.clamp(None if column.min_width is None else column.min_width + pad,
                                 None if column.max_width is None else column.max_width + pad)

    def _render(self, console, options, widths):
        plain = (self.box is None and not self.show_footer and not self.show_lines and not self.leading
                 and not self.row_styles and self.style in ("", "none", None) and not any(row.style for row in self.rows)
                 and all(self._plain_size(c) is not None and not c.style and c.vertical == "top" for c in self.columns)
                 and tuple(self.padding) == (0, 1, 0, 1) and not self.collapse_padding)
        last = len(self.columns) - 1
        pads = [(0 if i == 0 and not self.pad_edge else 1, 0 if i == last and not self.pad_edge else 1)
                for i in range(len(self.columns))]
        # a table squeezed below its columns' padding is cropped by rich in its own way
        plain = plain and sum(widths) <= options.max_width and all(w > a + b for w, (a, b) in zip(widths, pads))
        if not plain:
            yield from super()._render(console, options, widths)
            return
        header_style = console.get_style(self.header_style or "")
        rows = [list(col._cells) for col in self.columns]
        if self.show_header:
            styles = [header_style + console.get_style(c.header_style) for c in self.columns]
            lines = self._row(console, [c.header for c in self.columns], widths, pads, "bottom")
            for line in lines:
                for text, style in zip(line, styles):
                    yield Segment(text, style)
                yield Segment.line()
        for cells in zip(*rows):
            for line in self._row(console, cells, widths, pads, "top"):
                yield Segment("".join(line))
                yield Segment.line()

    def _row(self, console, cells, widths, pads, vertical) -> list[list[str]]:
        """The lines of one row: each a list of every cell's text, padded to its column."""
        out = []
        for cell, width, (left, right), column in zip(cells, widths, pads, self.columns):
            room = width - left - right
            text = cell.plain if isinstance(cell, Text) else cell
            if text.isascii() and len(text) <= room and text.isprintable():
                shown = [text.rstrip().rjust(room) if column.justify == "right" else text.ljust(room)]
            else:  # rich folds it (or the text is not one plain line): rich's own wrapping
                wrapped = (cell if isinstance(cell, Text) else Text(text)).wrap(
                    console, max(room, 1), justify=column.justify, overflow=column.overflow, no_wrap=column.no_wrap)
                shown = [line.plain + " " * (room - cell_len(line.plain)) for line in wrapped] or [" " * room]
            out.append([" " * left + line + " " * right for line in shown])
        height = max(len(c) for c in out)
        for c, width in zip(out, widths):
            blank = [" " * width] * (height - len(c))
            c[:] = (blank + c) if vertical == "bottom" else (c + blank)
        return [list(line) for line in zip(*out)]


def text_size(texts) -> tuple[int, int]:
    """(longest word, longest line) of plain texts, in terminal cells: what rich's ``Text``
    measures as its minimum and maximum width."""
    low = high = 0
    for text in texts:
        if text.isascii() and "\n" not in text and "\r" not in text:
            longest = len(text)
            word = max(map(len, text.split()), default=longest)
        else:
            lines = text.splitlines()
            longest = max(map(cell_len, lines), default=0)
            word = max(map(cell_len, text.split()), default=longest)
        low, high = max(low, word), max(high, longest)
    return low, high


def _table(cols: list[Col], title, caption) -> Table:
    table = PlainTable(box=None, header_style="bold", pad_edge=False, title=title, title_justify="left",
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
        if PlainTable._markup(col.header):
            m = Measurement.get(console, roomy, _table([col], None, None))
            sizes[id(col)] = (m.minimum, m.maximum)
        else:  # what that measurement gives, on the strings (test_tables)
            sizes[id(col)] = text_size([col.header, *(fmt.visible(v) for v in col.cells)])

    def folded(c) -> int:  # a folded column keeps room for a few words a line (FOLD_ROOM), never less than its longest word
        low, high = sizes[id(c)]
        return max(low, min(high, c.room or FOLD_ROOM))

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
    table = _table(shown, title, caption)
    if need(shown, lambda c: False) > width >= need(shown, lambda c: True):
        # the folding columns narrowed here, never below their longest word (rich's own collapse would cut
        # one: a date inside a change, a serial inside a reason), the widest first
        widths = [sizes[id(c)][1] for c in shown]
        floors = [folded(c) if c.wrap else widths[i] for i, c in enumerate(shown)]
        excess = need(shown, lambda c: False) - width
        while excess > 0:
            i = max((j for j in range(len(shown)) if widths[j] > floors[j]), key=lambda j: widths[j])
            widths[i] -= 1
            excess -= 1
        for column, c, w in zip(table.columns, shown, widths):
            if c.wrap:
                column.width = w
    return table, left_out
