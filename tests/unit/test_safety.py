"""The safety list: one structured source (title, a warning first, the other items, the
deferral), shown in every round-sheet format; the csv sheet carries it as comment rows
the importer skips (line numbers stay the file's own); the warning sign means safety only.

The hazards checked below are common shop safety practice for hydraulic testing (no one
published source); the checks are on words, not on computed values.
"""

from __future__ import annotations

import csv
import html
import io
from dataclasses import replace
from datetime import date

import pytest

from logbook import rounds
from logbook.analysis import status
from logbook.cautions import RUNNING_MACHINE, SAFETY
from logbook.csvread import COLUMNS, read_columns, read_table
from logbook.exports import round_sheet
from tests.unit.test_rounds import MODEL, _fleet

TODAY = date(2026, 3, 20)


def _sheet():
    fleet = _fleet(replace(MODEL, reading_interval_days=30))
    tests = rounds.plan_round(fleet, None, TODAY, within_days=30)
    return round_sheet.build_sheet(fleet, None, tests, site="North Yard", made_on=TODAY, test_by=TODAY)


# -- the list itself ---------------------------------------------------------------------
def test_the_list_is_headed_safety_with_the_warning_first_and_the_deferral_last():
    assert SAFETY.title == "Safety"
    lines = SAFETY.lines()
    assert lines[0] == f"⚠ WARNING: {SAFETY.warning}" and lines[-1] == SAFETY.deferral
    assert lines[1:-1] == SAFETY.items and RUNNING_MACHINE in SAFETY.items
    assert "injection injury" in SAFETY.warning and "Never feel for leaks by hand" in SAFETY.warning
    text = SAFETY.text().splitlines()
    assert text[0] == "Safety" and text[1] == lines[0] and text[-1] == SAFETY.deferral
    assert text[2:-1] == [f"- {item}" for item in SAFETY.items]


@pytest.mark.parametrize("words", [
    "rated for the full pressure",  # gauges, hoses, fittings and the flow meter
    "every circuit",  # not only accumulators ...
    "lower attachments", "cycle the controls", "accumulators",
    "eye protection and gloves",
    "test speed and pressure", "rotating parts",
    "block the case drain line with the flow meter", "shaft seal",
])
def test_the_items_name_the_hazards_of_these_tests(words):
    assert any(words in item for item in SAFETY.items), words


@pytest.mark.parametrize("words", ["maker's service manual", "local codes", "licensed or certified practice",
                                   "not a safety device"])
def test_the_deferral_line_defers_to_the_maker_codes_and_qualified_practice(words):
    assert words in SAFETY.deferral


def test_the_warning_sign_means_safety_only():
    assert status.STEP_CHANGE.startswith("↯ ")
    symbols = [word.split()[0] for word in status.STATUS_ORDER]
    assert SAFETY.sign not in symbols and len(set(symbols)) == len(symbols)
    from pathlib import Path

    package = Path(__file__).resolve().parents[2] / "logbook"
    elsewhere = [f"{path.name}:{n}" for path in package.rglob("*.py") if path.name != "cautions.py"
                 for n, line in enumerate(path.read_text(encoding="utf-8").splitlines(), 1)
                 if SAFETY.sign in line.split("#", 1)[0]]
    assert elsewhere == []  # screens and messages show it only through logbook.cautions


# -- round sheets --------------------------------------------------------------------------
@pytest.mark.parametrize("fmt", ["md", "html", "csv"])
def test_every_round_sheet_starts_with_the_safety_list_in_its_structure(fmt):
    text = round_sheet.render(_sheet(), fmt).decode()
    shown = (lambda s: html.escape(s)) if fmt == "html" else (lambda s: s)
    first_pump = text.index("P-1")
    title = text.index(shown(SAFETY.title))
    at = [text.index(shown(line)) for line in (SAFETY.warning, *SAFETY.items, SAFETY.deferral)]
    assert title < at[0] and at == sorted(at) and at[-1] < first_pump
    label = text.index("WARNING", title)
    assert title < label < at[0]  # the warning is marked as such, before its words


def test_md_and_html_keep_the_warning_apart_from_the_items():
    md = round_sheet.render_md(_sheet())
    assert f"**⚠ WARNING:** {SAFETY.warning}" in md and f"- {SAFETY.items[0]}" in md
    assert f"- {SAFETY.warning}" not in md
    page = round_sheet.render_html(_sheet())
    assert f'<p class="warning"><strong>⚠ WARNING:</strong> {html.escape(SAFETY.warning)}</p>' in page
    assert f"<li>{html.escape(SAFETY.items[0])}</li>" in page


def test_the_csv_sheet_carries_the_list_as_comment_rows_before_the_header():
    rows = list(csv.reader(io.StringIO(round_sheet.render_csv(_sheet()), newline="")))
    n = len(SAFETY.lines()) + 1
    assert [r[0] for r in rows[:n]] == [f"# {SAFETY.title}"] + [f"# {line}" for line in SAFETY.lines()]
    assert rows[1] == [f"# ⚠ WARNING: {SAFETY.warning}"]
    assert rows[n] == list(COLUMNS["readings"])


def test_a_filled_csv_sheet_with_its_comment_rows_imports_back_with_the_files_line_numbers():
    text = round_sheet.render_csv(_sheet())
    lines = text.split("\r\n")
    header_at = next(i for i, line in enumerate(lines) if line.startswith("serial,"))
    head = lines[header_at].split(",")
    filled = []
    for i, line in enumerate(lines):
        cells = next(csv.reader([line])) if line else []
        if cells[:1] == ["P-2"]:
            cells[head.index("date")], cells[head.index("machine_hours")] = "2026-03-20", "1700"
            cells[head.index("servo_pressure")], cells[head.index("note")] = "25.5", "# not a comment: text"
            out = io.StringIO()
            csv.writer(out, lineterminator="").writerow(cells)
            line = out.getvalue()
        filled.append(line)
    filled.insert(header_at + 2, "# a comment row the technician added between the pumps")
    data = "\r\n".join(filled).encode()
    rows, numbers, problems, blank = read_table("readings", data, TODAY)
    assert problems == [] and blank == 1  # P-1 left empty
    (row,) = rows
    assert row["serial"] == "P-2" and row["servo_pressure"] == 25.5 and row["note"] == "# not a comment: text"
    # line numbers of the file itself: the comment rows count (1-based; P-2 after the added comment)
    assert numbers == [header_at + 4]
    assert read_columns("readings", data, TODAY) is None  # the column-wise lane leaves comments to read_table


# -- comment rows in the importer ------------------------------------------------------------
def test_header_problems_name_the_headers_own_line_after_comment_rows():
    data = b"# made by hand\n# second comment\nserial,date,machine_hours,case_drian\nP-1,2026-03-01,10,2\n"
    _, _, problems, _ = read_table("readings", data, TODAY)
    assert problems and {p.line for p in problems} == {3}
    assert any(p.value == "case_drian" for p in problems)


def test_a_bad_cell_after_comment_rows_is_reported_on_its_own_line():
    data = b"# one\nserial,date,machine_hours,case_drain\n# two\nP-1,2026-03-01,10,abc\n"
    _, _, problems, _ = read_table("readings", data, TODAY)
    assert [(p.field, p.line) for p in problems] == [("case_drain", 4)]


def test_a_hash_in_a_first_column_of_free_text_is_text_not_a_comment():
    data = b"# a real comment before the header\ndescription,unit,site\n#3 loader,K-1,Yard\n"
    rows, numbers, problems, _ = read_table("machines", data, TODAY)
    assert problems == [] and rows == [{"description": "#3 loader", "unit": "K-1", "site": "Yard"}]
    assert numbers == [3]


def test_a_file_of_comment_rows_only_is_refused_with_a_message():
    _, _, problems, _ = read_table("readings", b"# nothing but a comment\n", TODAY)
    assert [p.field for p in problems] == ["file"] and "only comment rows" in problems[0].allowed


def test_without_comment_rows_the_column_wise_lane_still_takes_a_clean_file():
    data = b"serial,date,machine_hours,case_drain\nP-1,2026-03-01,10,2\n"
    columns, numbers = read_columns("readings", data, TODAY)
    assert columns["case_drain"] == [2.0] and numbers == [2]


def test_the_readme_shows_the_same_list_in_the_same_structure():
    from pathlib import Path

    readme = (Path(__file__).resolve().parents[2] / "README.md").read_text(encoding="utf-8")
    section = readme.split("\n## Safety\n", 1)[1].split("\n## ", 1)[0]
    flat = " ".join(section.split())
    at = [flat.index(f"**{SAFETY.sign} {SAFETY.warning_label}:** {SAFETY.warning}")]
    at += [flat.index(f"- {item}") for item in SAFETY.items]
    at.append(flat.index(SAFETY.deferral))
    assert at == sorted(at)
    assert "## Cautions" not in readme
