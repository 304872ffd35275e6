"""Costs: entered once, audited, checked; the plan and the costs command read them."""

from __future__ import annotations

import math

import pytest

from logbook.cli import main
from logbook.costing import model_economies, pump_costs
from logbook.economics import JobCosts, optimal_age
from logbook.model import InputRejected
from logbook.store import Store
from tests.store.conftest import TODAY


def test_costs_are_stored_audited_and_read_back(store):
    store.set_currency("eur")
    costs, notes = store.set_model_costs("TX-90", planned=4000.0, failure=15000.0)
    assert notes == []
    store.set_downtime("site", "North Yard", cost_per_hour=120.0, planned_hours=8.0, failure_hours=40.0)
    store.set_downtime("machine", "M-2", cost_per_hour=300.0, planned_hours=6.0, failure_hours=30.0)
    book = store.costs()
    assert book.currency == "EUR"
    assert book.models["TX-90"].planned == 4000.0 and book.models["TX-90"].failure == 15000.0
    assert book.downtime("M-1", "North Yard").cost_per_hour == 120.0  # the site's
    assert book.downtime("M-2", "North Yard").cost_per_hour == 300.0  # the machine's own wins
    trail = [(r["action"], r["table_name"], r["row_key"]) for r in store.audit_trail() if r["table_name"] in ("costs", "settings")]
    assert ("set", "settings", "currency") in trail and ("set", "costs", "model TX-90") in trail
    assert ("set", "costs", "site North Yard") in trail and ("set", "costs", "machine M-2") in trail


@pytest.mark.parametrize("planned,failure,field", [(-1.0, 10.0, "planned cost"), (1.0, None, "failure cost"),
                                                   (float("nan"), 2.0, "planned cost")])
def test_bad_costs_name_the_field_and_write_nothing(store, planned, failure, field):
    before = store.change_count()
    with pytest.raises(InputRejected) as err:
        store.set_model_costs("TX-90", planned=planned, failure=failure)
    assert field in str(err.value)
    assert store.change_count() == before and store.costs().models == {}


def test_unknown_names_and_currencies_are_refused(store):
    with pytest.raises(InputRejected, match="not a known pump model"):
        store.set_model_costs("ZZ-1", planned=1.0, failure=2.0)
    with pytest.raises(InputRejected, match="North Yard"):
        store.set_downtime("site", "South Yard", cost_per_hour=1.0, planned_hours=1.0, failure_hours=1.0)
    with pytest.raises(InputRejected, match="three-letter"):
        store.set_currency("euro")


def test_a_failure_no_dearer_than_a_planned_job_is_accepted_with_its_consequence(store):
    _, notes = store.set_model_costs("TX-90", planned=5000.0, failure=4000.0)
    assert notes and "run to failure is cheapest" in notes[0]
    assert store.costs().models["TX-90"].failure == 4000.0


def test_pump_costs_add_downtime_and_the_models_cost_rate(store):
    from logbook.analysis.fleet import forecast_fleet

    store.set_model_costs("TX-90", planned=4000.0, failure=15000.0)
    store.set_downtime("site", "North Yard", cost_per_hour=100.0, planned_hours=10.0, failure_hours=50.0)
    fleet = store.fleet()
    fc = forecast_fleet(fleet, TODAY)

    class Life:  # a Weibull fleet life of the model, as analysis.life gives it
        model, fit = "TX-90", type("Fit", (), {"shape": 2.5, "scale_hours": 9000.0})()

    economies = model_economies(store.costs(), [Life])
    plan_costs = pump_costs(store.costs(), fc, economies)
    pc = plan_costs.pumps["S-100"]
    assert pc.costs.planned == 4000.0 + 1000.0 and pc.costs.failure == 15000.0 + 5000.0
    opt = economies["TX-90"].optimum
    assert opt.age_hours == pytest.approx(optimal_age(2.5, 9000.0, JobCosts(4000.0, 15000.0)).age_hours)
    assert pc.cost_per_operating_hour > 0 and math.isfinite(pc.cost_per_operating_hour)


def test_costs_command_sets_and_shows(tmp_path, capsys):
    db = tmp_path / "c.db"
    s = Store(db, user="t")
    from tests.store.conftest import MACHINES, MODELS, PUMPS, READINGS, load

    for table, data in (("models", MODELS), ("machines", MACHINES), ("pumps", PUMPS), ("readings", READINGS)):
        load(s, table, data)
    s.close()
    assert main(["--db", str(db), "costs", "--currency", "EUR", "--model", "TX-90", "--planned", "4000",
                 "--failure", "15000"]) == 0
    out = capsys.readouterr().out
    assert "Costs in EUR" in out and "TX-90" in out and "4,000" in out and "15,000" in out
    assert main(["--db", str(db), "costs", "--model", "TX-90", "--planned", "4000"]) == 2
    assert "--failure" in capsys.readouterr().err
    assert main(["--db", str(db), "costs", "--site", "North Yard", "--per-hour", "x1", "--planned-hours", "8",
                 "--failure-hours", "30"]) == 2
    assert "--per-hour" in capsys.readouterr().err
    s = Store(db, user="t")
    assert s.costs().sites == {}
    s.close()


def test_costs_and_forecast_give_one_fleet_life(tmp_path, capsys):
    # The costs table once fitted the fleet-life Weibull with running pumps censored at their last
    # reading, the forecast at their hours today: shape 5.02 against 4.895 for one model. Both now read
    # the forecast's ages, so both print the same shape, scale and cost-optimal age for every model.
    import json

    db = tmp_path / "d.db"
    assert main(["demo", "--no-ui", "--db", str(db), "--today", "2026-12-01"]) == 0
    capsys.readouterr()
    assert main(["--db", str(db), "--today", "2026-12-01", "costs"]) == 0
    table = capsys.readouterr().out
    assert main(["--db", str(db), "--today", "2026-12-01", "forecast", "--format", "json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    fitted = [m for m in doc["life"] if m.get("shape")]
    assert fitted
    for m in fitted:
        row = next(line.split() for line in table.splitlines() if line.split()[:1] == [m["model"]])
        assert row[3] == f"{m['shape']:.2f}" and row[4] == f"{m['scale_hours']:,.0f}"
