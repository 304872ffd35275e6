"""Exports: each format parses back, carries provenance and the safety list, and is byte-identical."""

from __future__ import annotations

import csv
import io
import json
import re
import subprocess
import sys
from datetime import date
from html.parser import HTMLParser
from pathlib import Path

import pytest

from logbook.analysis.life import life_figures
from logbook.cautions import SAFETY
from logbook.exports import FORMATS, Provenance, Report, render
from logbook.exports.common import PLAN_COLUMNS
from logbook.csvread import quote_formula
from logbook.model import ALL_KINDS, Kind, PumpModel
from logbook.plan import PlanSettings, make_plan

try:
    from forecast_builders import LIMITS, TODAY, fleet, kind_forecast, pump_forecast
except ImportError:  # when tests/ is a package
    from .forecast_builders import LIMITS, TODAY, fleet, kind_forecast, pump_forecast

MADE_ON = date(2026, 3, 11)
NASTY = '=HYPERLINK("http://x","y")'


def build_report(charts: bool = True) -> Report:
    pumps = [
        pump_forecast("A1", [kind_forecast("A1", p10_days=40, with_fit=True)]),
        pump_forecast(NASTY, [kind_forecast(NASTY, past=True, with_fit=True)], site="-South|x"),
        pump_forecast("B<2>&", [kind_forecast("B<2>&", Kind.SERVO_PRESSURE, p10_days=80, with_fit=True,
                                              flags=frozenset({"pooled", "outlier_dropped"}))]),
        pump_forecast("D4", [kind_forecast("D4", Kind.NEUTRAL_DRIFT, p10_days=50)], site="@West"),
        pump_forecast("C3"),
    ]
    forecast = fleet(pumps)
    plan = make_plan(forecast, PlanSettings(date(2026, 4, 1), capacity_per_month=1))
    nist = [54, 187, 216, 240, 244, 335, 361, 373, 375, 386] + [500] * 10
    life = (
        life_figures("AX90", nist, [True] * 10 + [False] * 10, ages_hours=[100, 200], horizon_hours=[500, 500]),
        life_figures("KV40", [100.0], [True]),
    )
    model = PumpModel("AX90", "", 90, 400, 2200, 50, 250, 46, 100, 1800, 40, 60, None, None, tuple(LIMITS.values()))
    provenance = Provenance.from_models("/data/fleet|`x`.db", MADE_ON, {"AX90": model, "KV40": model})
    return Report(forecast, plan, life, provenance, charts=charts)


@pytest.fixture(scope="module")
def report():
    return build_report()


@pytest.fixture(scope="module")
def outputs(report):
    return {fmt: render(report, fmt) for fmt in FORMATS}


def provenance_present(text: str, database: str = "/data/fleet|`x`.db") -> None:
    assert database in text
    assert MADE_ON.isoformat() in text
    assert "case drain above 8.00 L/min" in text and "servo pressure below 18.00 bar" in text
    safety_present(text)


def safety_present(text: str) -> None:
    """The safety list in its structure: title, the warning first and marked, items, deferral."""
    firsts = [line.split(".")[0].split(":")[0] for line in (SAFETY.warning, *SAFETY.items, SAFETY.deferral)]
    at = [text.index(first) for first in firsts]
    assert at == sorted(at), "the warning first, then the items, then the deferral"
    assert text.rindex(SAFETY.title, 0, at[0]) < text.rindex(f"{SAFETY.warning_label}:", 0, at[0]) < at[0]


@pytest.mark.parametrize("fmt", FORMATS)
def test_byte_identical_across_runs(report, outputs, fmt):
    assert render(build_report(), fmt) == outputs[fmt]


@pytest.mark.slow
def test_html_identical_in_a_fresh_process(outputs):
    # Matplotlib's SVG ids come from a hash salt: a new interpreter must give the same bytes.
    code = (
        "import sys; sys.path.insert(0, %r); sys.path.insert(0, %r)\n"
        "from test_exports import build_report\n"
        "from logbook.exports import render\n"
        "sys.stdout.buffer.write(render(build_report(), 'html'))\n"
    ) % (str(Path(__file__).parent), str(Path(__file__).parent))
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, check=True).stdout
    assert out == outputs["html"]


def test_only_the_given_date_is_written(outputs):
    today = date.today().isoformat()
    if today not in (MADE_ON.isoformat(), TODAY.isoformat()):
        for data in outputs.values():
            assert today.encode() not in data


def test_csv_parses_back_with_provenance_and_one_row_per_pump(report, outputs):
    # Parse-back with the standard library csv module; utf-8-sig strips the BOM.
    raw = outputs["csv"]
    assert raw.startswith("\ufeff".encode("utf-8"))
    text = raw.decode("utf-8-sig")
    rows = list(csv.reader(io.StringIO(text, newline="")))
    meta = [r for r in rows if r and r[0].startswith("#")]
    table = [r for r in rows if r and not r[0].startswith("#")]
    keys = {r[0] for r in meta}
    assert {"# database", "# made on", "# limits AX90", "# limits KV40", "# safety"} <= keys
    assert [r[1] for r in meta if r[0] == "# safety"] == [SAFETY.title, *SAFETY.lines()]
    assert SAFETY.lines()[0] == f"⚠ WARNING: {SAFETY.warning}"
    assert dict((r[0], r[1]) for r in meta)["# made on"] == "2026-03-11"
    assert table[0] == [h for _, h in PLAN_COLUMNS]
    body = table[1:]
    assert len(body) == len(report.plan.lines) + len(report.plan.unplaced)
    assert all(len(r) == len(PLAN_COLUMNS) for r in body)
    col = {key: i for i, (key, _) in enumerate(PLAN_COLUMNS)}
    for r in body:
        for key in ("month", "target_month"):
            assert r[col[key]] == "" or re.fullmatch(r"\d{4}-\d{2}", r[col[key]])
        for key in ("p10_date", "p50_date", "p90_date"):
            assert r[col[key]] == "" or date.fromisoformat(r[col[key]])


def test_csv_formula_injection_guard(outputs):
    # OWASP "CSV Injection": cells starting with = + - @ tab or CR get a leading single quote.
    text = outputs["csv"].decode("utf-8-sig")
    cells = [c for r in csv.reader(io.StringIO(text, newline="")) for c in r]
    assert "'" + NASTY in cells and NASTY not in cells
    assert "'-South|x" in cells and "'@West" in cells
    assert not [c for c in cells if c[:1] in ("=", "+", "-", "@", "\t", "\r")]
    for bad in ("=1+1", "+1+cmd|' /C calc'!A0", "-2+3", "@SUM(A1)", "\tx", "\rx", "- seals checked"):
        assert quote_formula(bad) == "'" + bad
    assert quote_formula("-3.20") == "-3.20" and quote_formula("North") == "North"


def test_json_parses_back_with_every_pump_and_kind(report, outputs):
    doc = json.loads(outputs["json"].decode("utf-8"))
    assert doc["provenance"]["made_on"] == "2026-03-11"
    assert doc["provenance"]["database"] == "/data/fleet|`x`.db"
    assert doc["provenance"]["safety"] == {"title": "Safety", "warning": SAFETY.warning,
                                           "items": list(SAFETY.items), "deferral": SAFETY.deferral}
    assert {lim["kind"] for lim in doc["provenance"]["limits"]["AX90"]} == {k.value for k in ALL_KINDS}
    records = doc["forecasts"]
    assert len(records) == len(report.forecast.pumps) * 3
    required = {"serial", "model", "machine", "kind", "limit", "latest_value", "path", "p10_hours", "p50_hours",
                "p90_hours", "p10_date", "p50_date", "p90_date", "status", "flags", "planned_month"}
    assert all(required <= set(r) for r in records)
    planned = {line.serial: line.month.isoformat()[:7] for line in report.plan.lines}
    for r in records:
        assert r["planned_month"] == planned.get(r["serial"])
    b = next(r for r in records if r["serial"] == "B<2>&" and r["kind"] == "servo_pressure")
    assert b["flags"] == ["outlier_dropped", "pooled"] and b["drives_plan"]
    assert len(doc["plan"]["lines"]) == len(report.plan.lines)
    assert len(doc["plan"]["does_not_fit"]) == len(report.plan.unplaced)
    assert doc["life"][0]["shape"] == pytest.approx(1.7208, abs=1e-4)  # NIST e-Handbook 8.4.1.3
    assert doc["life"][1]["shape"] is None and "at least 2" in doc["life"][1]["note"]


def _md_cells(line: str) -> list[str]:
    return [c.strip() for c in re.split(r"(?<!\\)\|", line.strip())[1:-1]]


def test_markdown_tables_are_well_formed(report, outputs):
    text = outputs["md"].decode("utf-8")
    provenance_present(text, database="/data/fleet\\|\\`x\\`.db")  # escaped, renders as the path
    blocks, current = [], []
    for line in text.splitlines():
        if line.startswith("|"):
            current.append(line)
        elif current:
            blocks.append(current)
            current = []
    if current:
        blocks.append(current)
    assert len(blocks) == 6  # summary, plan, shop load, does not fit, life, all pumps
    for block in blocks:
        widths = {len(_md_cells(line)) for line in block}
        assert len(widths) == 1, block[0]
    all_pumps = blocks[-1]
    assert len(all_pumps) == 2 + len(report.forecast.pumps)
    assert "B\\<2\\>&" in text and "-South\\|x" in text


class _Collector(HTMLParser):
    VOID = {"meta", "br", "img", "hr", "input", "link"}

    def __init__(self):
        super().__init__(convert_charrefs=True)
        self.stack, self.errors, self.text, self.ids, self.tags = [], [], [], [], []
        self.attrs = []

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        self.attrs += attrs
        self.ids += [v for k, v in attrs if k == "id"]
        if tag not in self.VOID:
            self.stack.append(tag)

    def handle_startendtag(self, tag, attrs):
        self.tags.append(tag)
        self.attrs += attrs
        self.ids += [v for k, v in attrs if k == "id"]

    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"unexpected </{tag}> with open {self.stack[-3:]}")
        else:
            self.stack.pop()

    def handle_data(self, data):
        self.text.append(data)


def test_html_parses_back_self_contained(report, outputs):
    # Parse-back with the standard library html.parser: tags nest, ids are unique.
    page = _Collector()
    page.feed(outputs["html"].decode("utf-8"))
    page.close()
    assert page.errors == [] and page.stack == []
    assert len(page.ids) == len(set(page.ids))
    text = " ".join(page.text)
    provenance_present(text)
    assert "B<2>&" in text and NASTY in text  # escaped in the markup, intact as text
    assert "script" not in page.tags and "link" not in page.tags and "img" not in page.tags
    for name, value in page.attrs:
        if name in ("src", "href", "xlink:href"):
            assert value.startswith("#"), (name, value)
    # one chart per planned pump with a fitted trend (D4 is planned but has no fit to draw)
    assert [line.serial for line in report.plan.lines] == [NASTY, "D4", "B<2>&"]
    # and the shop load per month, as a chart and as a table
    assert page.tags.count("svg") == 3 and "D4 (AX90, M-D4): neutral drift: no fitted trend to draw." in text
    assert page.tags.count("table") == 6 and "Shop jobs planned per month" in text


def test_html_without_charts_and_unknown_format():
    plain = render(build_report(charts=False), "html")
    assert b"<svg" not in plain
    with pytest.raises(ValueError, match="allowed are csv, md, html, json"):
        render(build_report(), "xlsx")


def test_html_chart_cap_says_how_many_are_shown():
    base = build_report()
    capped = Report(base.forecast, base.plan, base.life, base.provenance, max_charts=1)
    page = render(capped, "html").decode("utf-8")
    assert page.count('<figure id="chart-') == 1 and page.count("<svg") == 2  # one trend, the shop load
    assert f"Charts of the first 1 of {len(base.plan.lines)} planned pumps" in page


def test_csv_plan_status_is_plain_words(report):
    # a spreadsheet that reads the file in another character set still shows the status whole
    import dataclasses

    from logbook.analysis.status import OVER_LIMIT, OVERHAUL_DUE

    marks = {NASTY: OVER_LIMIT, "B<2>&": OVERHAUL_DUE}
    pumps = tuple(dataclasses.replace(p, status=marks.get(p.serial, p.status)) for p in report.forecast.pumps)
    marked = dataclasses.replace(report, forecast=dataclasses.replace(report.forecast, pumps=pumps))
    rows = [r for r in csv.reader(io.StringIO(render(marked, "csv").decode("utf-8-sig"))) if r and not r[0].startswith("#")]
    col, serial = rows[0].index(dict(PLAN_COLUMNS)["status"]), rows[0].index("serial")
    shown = {quote_formula(NASTY) if r[serial] == quote_formula(NASTY) else r[serial]: r[col] for r in rows[1:]}
    assert shown[quote_formula(NASTY)] == OVER_LIMIT.split(" ", 1)[1] == "over limit"
    assert shown["B<2>&"] == OVERHAUL_DUE.split(" ", 1)[1] and OVERHAUL_DUE != shown["B<2>&"]
