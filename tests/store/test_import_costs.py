"""A costs file (logbook import costs FILE): model job costs and site or machine downtime,
every row checked first, all written in one transaction (audited) or none."""

from __future__ import annotations

from logbook.cli import main
from logbook.imports import import_bytes
from tests.store.conftest import TODAY

GOOD = b"""scope,name,planned_cost,failure_cost,downtime_cost_per_hour,planned_downtime_hours,failure_downtime_hours
model,TX-90,4000,15000,,,
site,North Yard,,,120,8,40
machine,M-2,,,300,6,30
"""


def _costs(store):
    return store.conn.execute("SELECT count(*) FROM audit WHERE table_name = 'costs'").fetchone()[0]


def test_a_costs_file_is_stored_audited_and_a_second_import_finds_it_present(store):
    report = import_bytes(store, "costs", GOOD, name="costs.csv", today=TODAY)
    assert report.problems == [] and report.added == 3
    book = store.costs()
    assert (book.models["TX-90"].planned, book.models["TX-90"].failure) == (4000.0, 15000.0)
    assert book.downtime("M-1", "North Yard").cost_per_hour == 120.0  # the site's
    assert book.downtime("M-2", "North Yard").failure_hours == 30.0  # the machine's own
    assert _costs(store) == 3
    again = import_bytes(store, "costs", GOOD, name="costs.csv", today=TODAY)
    assert again.added == 0 and again.already_present == 3 and _costs(store) == 3


def test_bad_rows_name_column_value_and_line_and_nothing_is_written(store):
    bad = (b"scope,name,planned_cost,failure_cost,downtime_cost_per_hour,planned_downtime_hours,failure_downtime_hours\n"
           b"model,TX-90,4000,15000,,,\n"          # line 2: fine on its own
           b"model,TX-99,4000,15000,,,\n"          # line 3: no such model
           b"site,North Yard,,,-5,8,40\n"          # line 4: negative cost
           b"machine,M-1,100,,300,6,30\n"          # line 5: a model column on a machine row
           b"fleet,M-1,,,1,1,1\n"                  # line 6: unknown scope
           b"model,TX-90,1,,,,\n")                 # line 7: twice, and failure_cost missing
    before = store.change_count()
    report = import_bytes(store, "costs", bad, name="costs.csv", today=TODAY)
    seen = {(p.line, p.field) for p in report.problems}
    assert {(3, "name"), (4, "downtime_cost_per_hour"), (5, "planned_cost"), (6, "scope"), (7, "name")} <= seen
    text = " ".join(str(p) for p in report.problems)
    assert "TX-99" in text and "-5" in text and "model, site, machine or currency" in text
    assert report.added == 0 and store.change_count() == before and store.costs().models == {}


def test_a_failure_no_dearer_than_the_job_is_accepted_and_its_consequence_said(store):
    data = GOOD.replace(b"4000,15000", b"4000,3000")
    report = import_bytes(store, "costs", data, name="costs.csv", today=TODAY)
    assert report.problems == [] and report.added == 3
    assert any("run to failure is cheapest" in line for line in report.flagged)


def test_import_costs_from_the_command_line(store, tmp_path, capsys):
    path = tmp_path / "costs.csv"
    path.write_bytes(GOOD)
    db = str(tmp_path / "t.db")
    store.close()
    assert main(["--db", db, "--today", TODAY.isoformat(), "import", "costs", str(path)]) == 0
    assert main(["--db", db, "costs"]) == 0
    out = capsys.readouterr().out
    assert "TX-90" in out and "North Yard" in out


def test_model_command_sets_job_costs_through_the_store(store, tmp_path, capsys):
    db = str(tmp_path / "t.db")
    store.close()
    assert main(["--db", db, "model", "TX-90", "--planned", "4000", "--failure", "15000"]) == 0
    assert "TX-90 job costs: planned 4,000" in capsys.readouterr().out
    # bad amounts and a lone option name the option and write nothing
    assert main(["--db", db, "model", "TX-90", "--planned", "-1", "--failure", "15000"]) == 2
    assert main(["--db", db, "model", "TX-90", "--failure", "9000"]) == 2
    err = capsys.readouterr().err
    assert "--planned = '-1'" in err and "--planned = '': is needed too" in err
    from logbook.store import Store

    with Store(db, create=False) as again:
        assert (again.costs().models["TX-90"].planned, again.costs().models["TX-90"].failure) == (4000.0, 15000.0)
        assert again.conn.execute("SELECT count(*) FROM audit WHERE row_key = 'model TX-90'").fetchone()[0] == 1
    assert main(["--db", db, "model", "TX-90", "--planned", "4000", "--failure", "3000"]) == 0
    assert "run to failure is cheapest" in capsys.readouterr().err


def test_a_small_negative_amount_is_refused_on_a_wide_range(store):
    # the rounding room at a bound is relative to that bound: 0 to 1e9 must not let -1 in
    from logbook.validate import COST_FIELDS, parse_number

    assert parse_number(COST_FIELDS["planned"], "-1")[1] is not None
    assert parse_number(COST_FIELDS["planned"], "0")[1] is None and parse_number(COST_FIELDS["planned"], "1e9")[1] is None
    report = import_bytes(store, "costs", GOOD.replace(b"4000,15000", b"-1,15000"), name="costs.csv", today=TODAY)
    assert [(p.line, p.field) for p in report.problems] == [(2, "planned_cost")] and report.added == 0
