"""Terminal tables (logbook.commands.tables): the fast plain-text table prints the same
text as rich's own Table (rich is the reference: its column width rules and its word
folding), at every width, with folded, right-justified and wide-character cells."""

from __future__ import annotations

import io
import random
import re

import pytest
from rich.console import Console
from rich.table import Table

from logbook import fmt
from logbook.commands.tables import Col, PlainTable, fit

WORDS = ["P-1042", "2031-07-14", "case", "drain", "88%", "servo", "27.10/18.00", "bar", "step change - inspect",
         "beyond horizon", "1,234 h", "U-07/left", "tráfico", "漢字", "x" * 31, "[b]not markup[/b]", "Ann [night]", ""]


def _cells(rng: random.Random) -> str:
    return " ".join(rng.choice(WORDS) for _ in range(rng.choice([0, 1, 1, 2, 3, 6])))


def _render(cls, rows, cols, width, *, colour=False, title=None, caption=None) -> str:
    out = io.StringIO()
    console = Console(file=out, width=width, force_terminal=colour, color_system="standard" if colour else None)
    table = cls(box=None, header_style="bold", pad_edge=False, title=title, title_justify="left",
                caption=caption, caption_justify="left")
    for header, justify, wrap in cols:
        table.add_column(header, no_wrap=not wrap, justify=justify, overflow="fold")
    for row in rows:
        table.add_row(*fmt.cells(*row))
    console.print(table)
    return out.getvalue()


@pytest.mark.parametrize("seed", range(14))
def test_the_plain_table_prints_what_richs_table_prints(seed):
    # Reference: rich.table.Table itself, the table this one stands in for.
    rng = random.Random(seed)
    cols = [(f"col {i}" + (" long header" if rng.random() < 0.3 else ""), rng.choice(["left", "left", "right"]),
             rng.random() < 0.5) for i in range(rng.randint(1, 8))]
    rows = [[_cells(rng) for _ in cols] for _ in range(rng.randint(0, 25))]
    for width in (12, 40, 80, 133, 220):
        title = "Fleet" if seed % 3 == 0 else None
        caption = "(left out at 80 columns: model; --format csv has them all)" if seed % 2 else None
        want = _render(Table, rows, cols, width, title=title, caption=caption)
        assert _render(PlainTable, rows, cols, width, title=title, caption=caption) == want, (seed, width)


def test_in_colour_the_same_text_with_a_bold_header():
    rng = random.Random(5)
    cols = [("serial", "left", False), ("hours", "right", False), ("status", "left", True)]
    rows = [[_cells(rng) for _ in cols] for _ in range(10)]
    ansi = re.compile(r"\x1b\[[0-9;]*m")
    want, got = (_render(cls, rows, cols, 60, colour=True) for cls in (Table, PlainTable))
    assert ansi.sub("", got) == ansi.sub("", want)
    assert got.startswith("\x1b[1m")  # the header in bold, as rich's


def test_fit_leaves_out_the_least_useful_column_first():
    console = Console(file=io.StringIO(), width=40)
    cols = [Col("serial", 0, cells=["P-1", "P-22"]), Col("note", 2, cells=["a long note here", "x"]),
            Col("status", 1, cells=["fine", "overdue"])]
    table, left_out = fit(console, cols)
    assert left_out == [] and isinstance(table, PlainTable)
    narrow = Console(file=io.StringIO(), width=18)
    _, left_out = fit(narrow, cols)
    assert left_out == ["note"]


@pytest.mark.parametrize("seed", range(6))
def test_text_size_is_what_rich_measures(seed):
    # Reference: rich's Measurement of a one-column Table of the same cells (what fit measured before).
    from rich.measure import Measurement

    from logbook.commands.tables import text_size

    rng = random.Random(seed)
    cells = [_cells(rng) for _ in range(20)]
    console = Console(file=io.StringIO(), width=80)
    table = Table(box=None, pad_edge=False)
    table.add_column("a header")
    for c in cells:
        table.add_row(*fmt.cells(c))
    m = Measurement.get(console, console.options.update_width(1 << 16), table)
    assert text_size(["a header", *(fmt.visible(c) for c in cells)]) == (m.minimum, m.maximum)
