"""At 80 columns: history keeps the reason of a correction, round keeps the site it says it lists,
and a folding column is never narrower than its longest word (a date inside it stays whole)."""

from __future__ import annotations

import re

from rich.console import Console

from logbook.commands.tables import Col, fit
from logbook.store import Store

SERIAL = "C-28412"
REASON = "typo: the servo gauge was read off the charge line, value from the worksheet"


def _fits(out: str, width: int = 80) -> None:
    long = [line for line in out.splitlines() if len(line.rstrip()) > width]
    assert not long, long[:3]


def _words(out: str, column_start: int) -> str:
    return " ".join(line[column_start:].strip() for line in out.splitlines()[2:])


def test_history_at_80_columns_keeps_the_reason_of_a_correction(demo, run):
    with Store(demo) as store:
        last = store.readings(SERIAL)[-1]
    code, _, err = run(demo, "correct", str(last.id), "--servo-pressure", f"{last.servo_pressure_bar + 0.5:.2f}",
                       "--reason", REASON, "--confirm")
    assert code == 0, err
    code, out, _ = run(demo, "history", SERIAL)
    assert code == 0
    _fits(out)
    header = out.splitlines()[1]
    assert header.split() == ["when", "(UTC)", "who", "what", "before", "->", "after", "reason"]
    assert "left out" not in out
    start = header.index("reason")
    assert " ".join(_words(out, start).split()) == REASON  # the whole reason, folded in its column
    # the dates inside the changes stay whole (2024-10-31..2026-10-28 as one word)
    change = " ".join(line[header.index("before"):start] for line in out.splitlines()[2:])
    assert re.search(r"\d{4}-\d{2}-\d{2}\.\.\d{4}-\d{2}-\d{2}", change)


def test_round_at_80_columns_keeps_the_site(demo, run):
    with Store(demo) as store:
        sites = {m.site for m in store.machines().values()}
    code, out, _ = run(demo, "round", "--all")
    assert code == 0
    _fits(out)
    lines = out.splitlines()
    at = next(i for i, line in enumerate(lines) if line.startswith("serial"))
    header = lines[at]
    assert header.split()[:3] == ["serial", "site", "machine/pos"]
    assert "left out at 80 columns" in out and "site" not in out.split("left out at 80 columns")[1].split(";")[0]
    start, end = header.index("site"), header.index("machine/pos")
    shown = " ".join(line[start:end].strip() for line in lines[at + 1:] if line.strip() and not line.startswith("("))
    for site in sites:
        assert site in " ".join(shown.split())


def test_a_folding_column_is_never_cut_below_its_longest_word():
    # rich's own collapse narrows the widest folding columns alike, below their longest word
    dates = "17 readings (ids 410..2126, 2024-10-31..2026-10-28), sha256 1744ab26fdf2..."
    cols = [Col("when", 0, keep=True, cells=["2026-12-04 20:20"]), Col("who", 4, wrap=True, keep=True, cells=["demo"]),
            Col("what", 2, wrap=True, keep=True, room=12, cells=["import of readings.csv"]),
            Col("change", 3, wrap=True, keep=True, cells=[dates]),
            Col("reason", 1, wrap=True, keep=True, room=12, cells=["a reason of a few words, folded " * 3])]
    console = Console(width=80, record=True, color_system=None)
    table, left_out = fit(console, cols)
    assert left_out == []
    console.print(table)
    text = console.export_text()
    _fits(text)
    assert "2024-10-31..2026-10-28)," in text
