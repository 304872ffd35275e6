"""The one way user text is shown (``fmt.visible``, ``fmt.text``, ``fmt.cells``) and the
exports' escaping: text as typed, never read as markup, control characters as escapes;
Markdown cells stay cells, HTML parses back to the text, JSON keeps it exactly."""

from __future__ import annotations

import pytest

import csv
import io
import json
import re
from html.parser import HTMLParser

from hypothesis import assume, given, settings
from hypothesis import strategies as st
from rich.console import Console
from rich.table import Table

from logbook import fmt
from logbook.csvread import unquote_formula
from logbook.exports import Provenance, Report, render
from logbook.exports.md import esc
from logbook.plan import PlanSettings, make_plan

try:
    from forecast_builders import TODAY, fleet, kind_forecast, pump_forecast
except ImportError:  # when tests/ is a package
    from .forecast_builders import TODAY, fleet, kind_forecast, pump_forecast

RAW_CONTROL = re.compile("[\x00-\x09\x0b-\x1f\x7f-\x9f\u2028\u2029\u202a-\u202e\u2066-\u2069]")


def test_visible_escapes_control_characters_and_keeps_everything_else():
    assert fmt.visible("Ann [night shift] x[/b] [/] é 日本 🔧 $x$ =1+2") == "Ann [night shift] x[/b] [/] é 日本 🔧 $x$ =1+2"
    # Python's own escapes (repr) for ESC, CR, NUL, tab, newline, DEL, CSI (C1), the
    # right-to-left override and the line separator (Unicode Standard Annex #9 and #14).
    assert fmt.visible("a\x1b[31mb\rc\x00d\te\nf\x7fg\x9bh\u202ei\u2028j") == (
        "a\\x1b[31mb\\rc\\x00d\\te\\nf\\x7fg\\x9bh\\u202ei\\u2028j")
    assert fmt.visible(None) == "" and fmt.visible(12) == "12"
    assert fmt.visible(fmt.visible("\x1b")) == "\\x1b"  # what is shown is shown as it is


def _printed(renderable, *, terminal: bool) -> str:
    out = io.StringIO()
    Console(file=out, width=200, force_terminal=terminal, color_system="truecolor" if terminal else None).print(renderable)
    return out.getvalue()


def test_text_is_never_read_as_markup_and_opens_no_link():
    typed = "[link=https://example.invalid]click[/link] x[/b] [/] Ann [night shift] [bold red]y"
    assert _printed(fmt.text(typed), terminal=False) == typed + "\n"
    on_terminal = _printed(fmt.text(typed), terminal=True)
    assert "\x1b]8;" not in on_terminal  # no OSC 8 hyperlink (the sequence terminals open links with)
    assert typed in on_terminal
    table = Table()
    table.add_column("who")
    table.add_column("note")
    table.add_row(*fmt.cells("Ann [night shift]", "tab\there\x1b[2J"))
    shown = _printed(table, terminal=False)
    assert "Ann [night shift]" in shown and "tab\\there\\x1b[2J" in shown and not RAW_CONTROL.search(shown)
    assert str(fmt.text("a", "b[/]")) == "a\nb[/]"  # one argument a line


# -- the exports -----------------------------------------------------------------------------


def _report(serial: str, site: str, machine: str, database: str, charts: bool) -> Report:
    pumps = [
        pump_forecast(serial, [kind_forecast(serial, p10_days=40, with_fit=True)], site=site, machine=machine),
        pump_forecast("A1", [kind_forecast("A1", p10_days=400)]),
    ]
    forecast = fleet(pumps)
    plan = make_plan(forecast, PlanSettings(TODAY.replace(day=1), capacity_per_month=1))
    return Report(forecast, plan, (), Provenance.from_models(database, TODAY, {}), charts=charts)


def _md_cells(line: str) -> list[str]:
    return [re.sub(r"\\(.)", r"\1", c.strip()) for c in re.split(r"(?<!\\)\|", line.strip())[1:-1]]


class _Text(HTMLParser):
    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.data = []

    def handle_data(self, data):
        self.data.append(data)


def check_exports(serial: str, site: str, machine: str, database: str, charts: bool = False) -> None:
    report = _report(serial, site, machine, database, charts)
    out = {kind: render(report, kind).decode("utf-8") for kind in ("md", "html", "json", "csv")}
    for kind in ("md", "html"):
        assert not RAW_CONTROL.search(out[kind].replace("\n", "")), kind
    # Markdown: every table row has its table's number of cells, and a cell reads back as typed.
    tables = [[_md_cells(line) for line in block.splitlines() if line.startswith("|")]
              for block in out["md"].split("\n\n") if block.startswith("|")]
    assert len(tables) >= 3 and all(len({len(row) for row in rows}) == 1 for rows in tables)
    header, *pumps = tables[-1]  # all pumps: serial, model, machine, site, ...
    assert [row[:4] for row in pumps if row[1] == "AX90" and row[0] != "A1"] == [
        [fmt.visible(serial), "AX90", fmt.visible(machine), fmt.visible(site)]]
    assert f"- Database: {esc(database)}" in out["md"]
    # HTML: parsed back, the page's text holds each value as typed.
    page = _Text()
    page.feed(out["html"])
    text = "".join(page.data)
    for value in (serial, site, machine, database):
        assert fmt.visible(value) in text
    # JSON keeps the text exactly; CSV too, behind the one formula guard.
    doc = json.loads(out["json"])
    assert doc["provenance"]["database"] == database
    row = next(r for r in doc["forecasts"] if r["serial"] == serial)
    assert (row["site"], row["machine"]) == (site, machine)
    rows = list(csv.reader(io.StringIO(out["csv"].lstrip("\ufeff"))))
    assert [unquote_formula(c) for c in rows[0]] == ["# database", database]
    assert any(serial in [unquote_formula(c) for c in row] for row in rows)


def test_exports_show_markup_pipes_and_control_characters_as_typed():
    check_exports("x[/b]|y`z`*a* $x$", "Ann [night shift] | <b>&amp;", "M\n2\x1b[31m", "/data/[link=x]|`q`\x07.db",
                  charts=True)  # a chart's title holds the serial: text, not a formula


_ANY = st.text(st.characters(exclude_categories=("Cs",), exclude_characters="\x00"), min_size=1, max_size=30)
_PIECES = st.sampled_from(["[/]", "x[/b]", "[link=https://example.invalid]", "|", "\\", "`", "*", "_", "#", "<", ">", "&",
                           "\n", "\r", "\t", "\x1b[2J", "\x9b", "\u202e", "=", "+", "-", "@", "$x$", "é", "日本"])
_VALUE = st.lists(_PIECES | _ANY, min_size=1, max_size=6).map("".join).filter(lambda s: s.strip() == s and s)


@pytest.mark.slow
@settings(max_examples=50, deadline=None)
@given(serial=_VALUE, site=_VALUE, machine=_VALUE, database=_VALUE)
def test_any_text_in_an_export_reads_back_as_typed(serial, site, machine, database):
    assume(serial != "A1")  # the other pump of the report
    check_exports(serial, site, machine, database)
