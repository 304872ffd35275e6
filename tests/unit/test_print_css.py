"""What the printed plan and round sheet rely on, checked on the HTML itself (the PDF check
on A4 and Letter with headless Chromium is tests/bench/print_check.py, docs/printing.md):
an @page rule, serials, dates and codes kept whole, headings kept with their content,
plain words and units in headers, chances as percentages."""

from __future__ import annotations

import re

from logbook.exports.common import keep_whole, percent
from tests.unit.test_exports import build_report
from logbook.exports.html import render_html


def test_keep_whole_wraps_every_word_with_a_hyphen_or_slash():
    out = keep_whole("22,514 h on 2026-11-22; pump D-15264 at 18/16/13, ok")
    assert re.findall(r'<span class="k">([^<]*)</span>', out) == ["2026-11-22;", "D-15264", "18/16/13,"]
    assert re.sub(r"</?span[^>]*>", "", out) == "22,514 h on 2026-11-22; pump D-15264 at 18/16/13, ok"  # text unchanged


def test_percent_reads_a_chance_as_a_percentage():
    assert percent(0.255) == "25.5" and percent(1.0, 0) == "100" and percent(None) == ""


def test_plan_html_prints_with_page_rules_and_whole_words():
    page = render_html(build_report(charts=False))
    assert "@page" in page and "thead { display: table-header-group; }" in page
    assert re.search(r"h1, h2, h3 \{ break-after: avoid; \}", page)
    assert ".k { white-space: nowrap; }" in page
    cells = re.findall(r"<td([^>]*)>(\d{4}-\d{2}-\d{2}|[A-Z]{1,3}-?\d+)</td>", page)
    assert cells and all('class="' in attrs and "k" in attrs for attrs, _ in cells)  # dates and serials never break
    headers = re.findall(r"<th>([^<]*)</th>", page)
    assert not [h for h in headers if "_" in h], headers  # no raw keys such as b10_90%_bounds
    assert "chance crossed by month end (%)" in headers and "B10 life (h)" in headers


def test_round_sheet_prints_several_pumps_a_page_with_tall_cells():
    from logbook.exports.round_sheet import _CSS

    assert "@page" in _CSS and "td.fill{height:9mm" in _CSS and "section.pump{break-inside:avoid" in _CSS
    assert "h2{" in _CSS and "break-after:avoid" in _CSS
