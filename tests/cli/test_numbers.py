"""Numbers as typed on the command line (a negative number with a decimal comma or thousands
groups is a value, not an option) and as a CSV file holds them (hints that fit the field)."""

from __future__ import annotations

import pytest

from logbook.cli import build_parser
from logbook.store import Store
from tests.store.test_cli import TODAY


@pytest.mark.parametrize("typed", ["-2,5", "-2.5", "-2,5bar", "-1,234.5", "-.5", "-,5"])
def test_a_negative_number_is_a_value_however_it_is_written(typed):
    args = build_parser().parse_args(["record", "S-1", "--date", TODAY, "--hours", "1", "--neutral-drift", typed])
    assert args.neutral_drift == typed  # kept as typed, for validate.parse_quantity to read
    args = build_parser().parse_args(["event", "move", "S-1", "--date", TODAY, "--to-hours", typed])
    assert args.to_hours == typed


def test_an_option_is_still_an_option():
    with pytest.raises(SystemExit):  # "--neutral-drift --note x": the value is missing, not "--note"
        build_parser().parse_args(["record", "S-1", "--date", TODAY, "--hours", "1", "--neutral-drift", "--note", "x"])


def _last(db, serial):
    with Store(db) as store:
        return store.readings(serial)[-1]


def test_record_saves_a_negative_drift_with_a_decimal_comma(demo, run):
    serial = "C-28412"
    last = _last(demo, serial)
    hours = f"{last.machine_hours + 40:.0f}"
    code, out, err = run(demo, "record", serial, "--date", TODAY, "--hours", hours, "--neutral-drift", "-2,5", "--confirm")
    assert code == 0, err
    saved = _last(demo, serial)
    assert saved.id != last.id and saved.neutral_drift_bar == pytest.approx(-2.5)


def test_a_negative_number_out_of_range_gets_the_fields_message_not_argparses(demo, run):
    before = _last(demo, "C-28412")
    code, _, err = run(demo, "record", "C-28412", "--date", TODAY, "--hours", "1", "--neutral-drift", "-1,234.5")
    assert code == 2
    assert "expected one argument" not in err
    assert "neutral_drift = '-1,234.5' bar: must be a number from -150 to 150 bar" in err
    code, _, err = run(demo, "event", "move", "C-28412", "--date", TODAY, "--hours", "-1,5",
                       "--to-machine", "EX-110", "--to-position", "x", "--to-hours", "1")
    assert code == 2 and "hours = '-1,5' h: must be a number from 0 to 500000 h" in err
    assert _last(demo, "C-28412") == before  # nothing written


def test_costs_read_a_decimal_comma_as_the_other_numbers_do(demo, run):
    site = "Lowmarsh Pit"
    code, out, err = run(demo, "costs", "--site", site, "--per-hour", "1.234,5", "--planned-hours", "7,5",
                         "--failure-hours", "24", columns=160)
    assert code == 0, err
    with Store(demo) as store:
        downtime = store.costs().sites[site]
    assert downtime.cost_per_hour == pytest.approx(1234.5) and downtime.planned_hours == pytest.approx(7.5)
    code, _, err = run(demo, "costs", "--site", site, "--per-hour", "1,500", "--planned-hours", "8",
                       "--failure-hours", "24")
    assert code == 2 and "could be 1500 or 1.500" in err  # both readings fit: asked, not guessed


CSV = "serial,date,machine_hours,servo_pressure,neutral_drift\n"


@pytest.mark.parametrize(("cells", "said"), [
    # an hour meter: examples an hour meter has, and no thousands separator in a file
    ('C-28412,2026-11-30,"22,950",25,1.0', "machine_hours = '22,950' h: must be a number from 0 to 500000 h written "
     "without a thousands separator (not allowed in a CSV file); did you mean 22950?"),
    ("C-28412,2026-11-30,22950x,25,1.0", "e.g. 22950 or 22950.5 (a thousands separator is not allowed in a CSV file)"),
    ('C-28412,2026-11-30,22950,"25,5",1.0', "servo_pressure = '25,5' bar: must be a number from 0 to 120 bar written "
     "without a decimal comma (not allowed in a CSV file); did you mean 25.5?"),
    ("C-28412,2026-11-30,22950,25,x", "e.g. 2.4 or -1.5"),  # a signed field: a negative example
])
def test_a_csv_number_hint_fits_the_field(demo, run, tmp_path, cells, said):
    path = tmp_path / "r.csv"
    path.write_text(CSV + cells + "\n")
    code, _, err = run(demo, "import", "readings", str(path), columns=400)
    assert code == 2 and "nothing written" in err
    assert said in err
    if "machine_hours" in said or "22950x" in cells:
        assert "-1.5" not in err  # no negative example for an hour meter
