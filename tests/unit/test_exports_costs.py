"""Exports of a plan placed at least expected cost: every format carries the money."""

from __future__ import annotations

import csv
import io
import json

import pytest

from logbook.costing import ModelEconomy, PlanCosts, PumpCosts
from logbook.economics import JobCosts, optimal_age
from logbook.exports import Report, render
from logbook.plan import make_plan
from tests.unit.test_exports import MADE_ON, build_report


@pytest.fixture(scope="module")
def costed():
    base = build_report(charts=False)
    costs = PlanCosts("EUR", {p.serial: PumpCosts(JobCosts(4000.0, 18000.0), 0.5) for p in base.forecast.pumps})
    plan = make_plan(base.forecast, base.plan.settings, costs)
    eco = {"AX90": ModelEconomy("AX90", 4000.0, 18000.0, 2.5, 9000.0, optimal_age(2.5, 9000.0, JobCosts(4000.0, 18000.0)), "")}
    return Report(base.forecast, plan, base.life, base.provenance, charts=False, economies=eco)


def test_json_carries_what_anyone_needs_to_recompute_the_optimum(costed):
    data = json.loads(render(costed, "json"))
    money = data["costs"]
    assert money["currency"] == "EUR" and money["placement"] == "least expected cost"
    (model,) = money["models"]
    again = optimal_age(model["weibull_shape"], model["weibull_scale_hours"],
                        JobCosts(model["planned_cost"], model["failure_cost"]))
    assert model["optimal_age_hours"] == pytest.approx(again.age_hours, abs=0.1)
    assert set(money["policies"]) == {"run_to_failure", "at_p10", "cost_optimal"}
    for line in data["plan"]["lines"]:
        if line["work"] == "shop":
            assert line["expected_cost"] is not None
            assert "expected_cost_month_earlier" in line and "expected_cost_month_later" in line


def test_csv_md_and_html_show_the_costs(costed):
    text = render(costed, "csv").decode("utf-8-sig")
    body = [line for line in text.splitlines() if not line.startswith(("#", '"#'))]  # the safety comment rows
    rows = list(csv.DictReader(io.StringIO("\n".join(body))))
    shop = [r for r in rows if r.get("plan") == "shop"]
    assert shop and all(r["expected cost"] for r in shop)
    md = render(costed, "md").decode("utf-8")
    assert "What jobs cost (EUR)" in md and "expected cost: least expected cost within capacity" in md
    assert "If failures cost half or twice as much" in md
    html = render(costed, "html").decode("utf-8")
    assert 'id="costs"' in html and 'id="sensitivity"' in html and "EUR" in html
    assert MADE_ON.isoformat() in html
