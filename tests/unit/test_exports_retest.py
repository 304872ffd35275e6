"""A pump whose newest reading was set aside is listed to be tested again in every export format."""

from __future__ import annotations

import csv
import io
import json

from logbook.analysis.results import FLAG_JUMP
from logbook.exports import render
from logbook.exports.common import RETEST_HEADERS
from logbook.model import Kind

try:
    from test_exports import build_report
except ImportError:  # when tests/ is a package
    from .test_exports import build_report


def _with_retest():
    from dataclasses import replace

    from logbook.plan import retests_of

    report = build_report(charts=False)
    pumps = list(report.forecast.pumps)
    pf = pumps[0]
    pumps[0] = replace(pf, kinds=tuple(replace(k, flags=k.flags | {FLAG_JUMP}) if k.kind is Kind.CASE_DRAIN else k
                                       for k in pf.kinds))
    forecast = replace(report.forecast, pumps=tuple(pumps))
    plan = replace(report.plan, retests=retests_of(forecast))
    return replace(report, forecast=forecast, plan=plan), pf.serial


def test_every_format_lists_the_pump_to_test_again():
    report, serial = _with_retest()
    assert [r.serial for r in report.plan.retests] == [serial] and report.plan.retests[0].kind is Kind.CASE_DRAIN
    md = render(report, "md").decode("utf-8")
    assert "## Test again first" in md and all(h in md for h in RETEST_HEADERS)
    html = render(report, "html").decode("utf-8")
    assert 'id="test-again"' in html and serial in html.split('id="test-again"')[1]
    doc = json.loads(render(report, "json"))
    (row,) = doc["plan"]["test_again_first"]
    assert row["serial"] == serial and row["kind"] == "case_drain" and "far off its trend" in row["why"]
    text = render(report, "csv").decode("utf-8-sig")
    rows = list(csv.reader(io.StringIO(text)))
    assert any(r[0] == "# test again first" and r[1].startswith(serial) for r in rows if r)


def test_no_section_without_a_pump_to_test_again():
    report = build_report(charts=False)
    assert report.plan.retests == ()
    assert "Test again first" not in render(report, "md").decode("utf-8")
    assert json.loads(render(report, "json"))["plan"]["test_again_first"] == []
