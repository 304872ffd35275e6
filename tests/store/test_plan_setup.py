"""Plan settings stored in the database (audited), used by `logbook forecast` (cron) and the
TUI alike; command-line flags override them for one run."""

from __future__ import annotations

import json

import pytest

from logbook.cli import main
from logbook.model import InputRejected
from logbook.plan_setup import PlanSetup
from logbook.store import Store
from tests.store.test_cli import TODAY, demo, demo_master  # noqa: F401  (the demo fleet fixtures)


def test_defaults_until_set_then_stored_and_audited(store):
    assert store.plan_setup() == PlanSetup()
    setup = PlanSetup(horizon_months=9, capacity_per_month=3, site_capacity={"North Yard": 1},
                      exchange_on_hand={"TX-90": 2}, turnaround_months=2)
    store.set_plan_setup(setup)
    assert store.plan_setup() == setup
    row = next(iter(store.db.query("SELECT * FROM audit WHERE table_name = 'settings' AND row_key = 'plan'")))
    assert row["action"] == "set" and row["who"] == "tester"
    assert json.loads(row["before_json"]) == PlanSetup().as_dict()
    assert json.loads(row["after_json"]) == setup.as_dict()


@pytest.mark.parametrize("setup, field", [
    (PlanSetup(horizon_months=0), "horizon"),
    (PlanSetup(horizon_months=61), "horizon"),
    (PlanSetup(capacity_per_month=-1), "capacity"),
    (PlanSetup(turnaround_months=25), "turnaround"),
    (PlanSetup(site_capacity={"Nowhere": 1}), "site capacity"),
    (PlanSetup(exchange_on_hand={"ZZ-1": 1}), "exchange pumps"),
    (PlanSetup(exchange_on_hand={"TX-90": -2}), "exchange TX-90"),
    (PlanSetup(capacity_per_month=2.5), "capacity"),
])
def test_bad_settings_are_refused_naming_the_field_and_nothing_is_written(store, setup, field):
    before = store.db.execute("SELECT count(*) FROM audit").fetchone()[0]
    with pytest.raises(InputRejected) as err:
        store.set_plan_setup(setup)
    assert any(p.field == field for p in err.value.problems), [str(p) for p in err.value.problems]
    assert store.plan_setup() == PlanSetup()
    assert store.db.execute("SELECT count(*) FROM audit").fetchone()[0] == before


def test_override_changes_only_what_is_given():
    stored = PlanSetup(horizon_months=9, capacity_per_month=3, site_capacity={"A": 1, "B": 2}, exchange_on_hand={"M": 1})
    once = stored.override(capacity=5, site_capacity={"B": 4})
    assert once.capacity_per_month == 5 and once.site_capacity == {"A": 1, "B": 4}
    assert once.horizon_months == 9 and once.exchange_on_hand == {"M": 1} and once.turnaround_months == 1
    assert stored.override() == stored


def test_words_state_every_assumption():
    words = PlanSetup(horizon_months=12, capacity_per_month=1, site_capacity={"North Yard": 1},
                      exchange_on_hand={"TX-90": 2}, turnaround_months=1).words()
    assert words == ("shop capacity 1 job a month; per site North Yard 1; exchange pumps TX-90 2; "
                     "turnaround 1 month; horizon 12 months")
    assert PlanSetup().words().startswith("shop capacity no limit; exchange pumps no limit set")
    assert PlanSetup(exchange_on_hand={"TX-90": 0}).words(("TX-90", "TX-45")).startswith(
        "shop capacity no limit; exchange pumps TX-90 none on hand, other models no limit set")


def _plan(capsys, db, *args) -> dict:
    assert main(["--db", str(db), "--today", TODAY, "forecast", "--format", "json", *args]) == 0
    return json.loads(capsys.readouterr().out)["plan"]


def test_forecast_uses_the_stored_settings_and_flags_override_one_run(demo, capsys):
    with Store(demo, user="planner") as s:
        s.set_plan_setup(PlanSetup(horizon_months=9, capacity_per_month=2, site_capacity={"Greyfen Quarry": 1},
                                   exchange_on_hand={"TQ-90": 1}))
    plan = _plan(capsys, demo)
    assert (plan["horizon_months"], plan["capacity_per_month"], plan["site_capacity"], plan["exchange_on_hand"]) == (
        9, 2, {"Greyfen Quarry": 1}, {"TQ-90": 1})
    assert all(n <= 2 for n in plan["shop_load"].values())  # the stored capacity binds the plan
    plan = _plan(capsys, demo, "--capacity", "4", "--horizon", "6", "--site-capacity", "Lowmarsh Pit=2")
    assert (plan["horizon_months"], plan["capacity_per_month"]) == (6, 4)
    assert plan["site_capacity"] == {"Greyfen Quarry": 1, "Lowmarsh Pit": 2}
    with Store(demo) as s:  # the override was for one run
        assert s.plan_setup().capacity_per_month == 2 and s.plan_setup().horizon_months == 9
    _plan(capsys, demo, "--capacity", "4", "--save-settings")
    with Store(demo) as s:
        assert s.plan_setup().capacity_per_month == 4 and s.plan_setup().site_capacity == {"Greyfen Quarry": 1}
