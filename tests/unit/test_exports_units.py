"""Exports in the units chosen (``logbook --units us``): every value and unit of the readings in
psi and gpm, in csv, md, html and json; the same plan, converted, as in metric units."""

from __future__ import annotations

import csv
import dataclasses
import io
import json
import re

import pytest
from scipy import constants

from logbook.exports import render
from logbook.exports.common import PLAN_COLUMNS, reason, retest_reason
from logbook.model import Kind
from logbook.units import UnitPrefs

try:
    from test_exports import build_report
except ImportError:  # when tests/ is a package
    from .test_exports import build_report

# Reference: scipy.constants (NIST SP 811 values): psi in a bar, US gallons per minute in a litre per minute
PSI = constants.bar / constants.psi
GPM = constants.litre / constants.gallon
FACTOR = {"L/min": GPM, "bar": PSI}
US_UNIT = {"L/min": "gpm", "bar": "psi"}


@pytest.fixture(scope="module")
def reports():
    metric = build_report()
    return metric, dataclasses.replace(metric, units=UnitPrefs.us())


def _csv_rows(data: bytes) -> list[dict]:
    text = data.decode("utf-8-sig")
    body = [line for line in text.splitlines() if not line.startswith("#")]
    return list(csv.DictReader(io.StringIO("\n".join(body))))


def test_csv_values_and_units_converted(reports):
    metric, us = reports
    m_rows, u_rows = _csv_rows(render(metric, "csv")), _csv_rows(render(us, "csv"))
    headers = dict(PLAN_COLUMNS)
    assert len(m_rows) == len(u_rows) > 0
    for m, u in zip(m_rows, u_rows):
        unit = m[headers["unit"]]
        assert u[headers["unit"]] == US_UNIT[unit]
        for key in ("latest", "limit"):
            if m[headers[key]]:
                # both printed to 2 decimals: within the rounding of either
                assert float(u[headers[key]]) == pytest.approx(float(m[headers[key]]) * FACTOR[unit], abs=0.005 * PSI)
        assert u[headers["p10_date"]] == m[headers["p10_date"]]  # dates and hours do not change
        assert u[headers["p10_hours"]] == m[headers["p10_hours"]]
        assert " L/min" not in u[headers["reason"]] and " bar" not in u[headers["reason"]]
    text = render(us, "csv").decode("utf-8-sig")
    assert "case drain above 2.11 gpm" in text  # 8.00 L/min = 2.113 US gpm
    assert "servo pressure below 261.07 psi" in text  # 18.00 bar = 261.07 psi
    assert "# units,\"flow gpm, pressure psi" in text


def test_json_values_units_and_the_units_key(reports):
    metric, us = reports
    m, u = json.loads(render(metric, "json")), json.loads(render(us, "json"))
    assert u["units"] == {"flow": "gpm", "pressure": "psi", "temperature": "F", "hours": "h"}
    assert m["units"] == {"flow": "L/min", "pressure": "bar", "temperature": "C", "hours": "h"}
    for a, b in zip(m["plan"]["lines"] + m["forecasts"], u["plan"]["lines"] + u["forecasts"]):
        assert b["unit"] == US_UNIT[a["unit"]]
        for key in ("latest_value", "limit", "latest_raw", "rate_per_1000h"):
            if a.get(key) is not None:
                assert b[key] == pytest.approx(a[key] * FACTOR[a["unit"]], rel=1e-3, abs=1e-3)
        assert b["p10_date"] == a["p10_date"] and b["p50_hours"] == a["p50_hours"]
    limits = u["provenance"]["limits"]["AX90"]
    drain = next(x for x in limits if x["kind"] == "case_drain")
    assert drain["unit"] == "gpm" and drain["value"] == pytest.approx(8.0 * GPM)


def test_md_and_html_show_the_chosen_units(reports):
    metric, us = reports
    for fmt in ("md", "html"):
        text = render(us, fmt).decode("utf-8")
        assert "servo pressure below 261.07 psi" in text and "case drain above 2.11 gpm" in text
        if fmt == "md":
            assert "L/min" not in text and not re.search(r"\d bar", text)
        plain = render(metric, fmt).decode("utf-8")
        assert "servo pressure below 18.00 bar" in plain
    page = render(us, "html").decode("utf-8")
    assert "servo pressure [psi]" in page  # the chart's axis
    assert not re.search(r"\d L/min|\d\.\d\d bar", page)  # no metric value left in the page


def test_reason_in_us_units_is_the_metric_sentence_converted(reports):
    metric, _ = reports
    for line in metric.plan.lines:
        assert reason(line, UnitPrefs()) == line.reason  # metric: the plan's own words
        words = reason(line, UnitPrefs.us())
        if line.latest_value is not None and line.limit_value is not None:
            unit = US_UNIT[line.kind.unit]
            value = line.latest_value * FACTOR[line.kind.unit]
            assert f" at {value:.2f} {unit} against a limit of " in words
            assert words.split(":", 1)[1] == line.reason.split(":", 1)[1]  # dates and hours as they were


def test_retest_reason_in_us_units():
    from datetime import date

    from logbook.analysis.results import Outcome
    from logbook.plan import Retest

    r = Retest("S1", "AX90", "U1", "north", Kind.SERVO_PRESSURE, 20.0, date(2026, 3, 1), Outcome.CROSSING)
    assert retest_reason(r, UnitPrefs()) == r.reason
    assert f"({20.0 * PSI:.2f} psi on 2026-03-01)" in retest_reason(r, UnitPrefs.us())
    assert retest_reason(r, UnitPrefs.us()).replace(f"{20.0 * PSI:.2f} psi", "20.00 bar") == r.reason
