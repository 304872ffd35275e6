"""A name typed in another letter case is suggested ("did you mean B-25530?"), never taken for the
known one: nothing is written. A machine's event given a pump serial says which machine to name."""

from __future__ import annotations

import pytest

from logbook import validate
from logbook.store import Store
from tests.store.test_cli import TODAY

SERIAL, MACHINE, SITE, MODEL = "C-28412", "EX-110", "Saltbrook Cut", "TQ-145"  # of the demo fleet


def _counts(db):
    with Store(db) as store:
        return store.counts()


def test_case_match_suggests_one_name_only():
    known = {"B-25530", "Saltbrook Cut", "ab-1", "AB-1"}
    assert validate.case_match("b-25530", known) == "B-25530"
    assert validate.case_match("saltbrook  cut ", known) == "Saltbrook Cut"  # spacing as well as case
    assert validate.case_match("B-25530", known) is None  # known as given: nothing to suggest
    assert validate.case_match("Ab-1", known) is None  # two names match: no guess
    assert validate.case_match("B-2553", known) is None
    assert validate.did_you_mean("b-25530", known) == "; did you mean B-25530?"
    assert validate.did_you_mean("x", known) == ""


def test_record_with_a_serial_in_lower_case_suggests_it_and_writes_nothing(demo, run):
    before = _counts(demo)
    code, _, err = run(demo, "record", SERIAL.lower(), "--date", TODAY, "--hours", "99999", "--servo-pressure", "25",
                       columns=300)
    assert code == 2
    assert f"serial = '{SERIAL.lower()}': is not a known pump serial; did you mean {SERIAL}?" in err
    assert _counts(demo) == before


@pytest.mark.parametrize(("args", "said"), [
    (("round", "--site", SITE.lower()), f"did you mean {SITE}?"),
    (("pumps", "--site", SITE.upper()), f"did you mean {SITE}?"),
    (("pumps", "--model", MODEL.lower()), f"did you mean {MODEL}?"),
    (("show", SERIAL.lower()), f"serial '{SERIAL.lower()}' is not a known pump; did you mean {SERIAL}?"),
    (("history", SERIAL.lower()), f"did you mean {SERIAL}?"),
    (("model", MODEL.lower()), f"did you mean {MODEL}?"),
    (("backtest", "--site", SITE.lower()), f"did you mean {SITE}?"),
    (("forecast", "--site-capacity", f"{SITE.lower()}=2"), f"did you mean {SITE}?"),
    (("event", "overhaul", SERIAL.lower(), "--date", TODAY, "--hours", "1"), f"did you mean {SERIAL}?"),
    (("event", "parked", "--machine", MACHINE.lower(), "--date", TODAY), f"did you mean {MACHINE}?"),
    (("costs", "--site", SITE.lower(), "--per-hour", "100", "--planned-hours", "8", "--failure-hours", "24"),
     f"did you mean {SITE}?"),
    (("costs", "--model", MODEL.lower(), "--planned", "1000", "--failure", "5000"), f"did you mean {MODEL}?"),
])
def test_every_name_the_command_line_takes_is_suggested_in_its_letter_case(demo, run, args, said):
    before = _counts(demo)
    code, _, err = run(demo, *args, columns=400)
    assert code == 2
    assert said in err
    assert _counts(demo) == before


def test_an_imported_row_with_a_serial_in_lower_case_is_suggested(demo, run, tmp_path):
    path = tmp_path / "r.csv"
    path.write_text(f"serial,date,machine_hours,servo_pressure\n{SERIAL.lower()},{TODAY},99999,25\n")
    code, _, err = run(demo, "import", "readings", str(path), columns=300)
    assert code == 2
    assert f"line 2: serial = '{SERIAL.lower()}': is not a known pump serial; did you mean {SERIAL}?" in err


def _machine_of(db, serial):
    with Store(db) as store:
        (fit,) = [f for f in store.fitments(serial=serial) if f.removed_on is None]
    return fit.machine


def test_meter_replaced_given_a_pump_serial_names_its_machine(demo, run):
    machine = _machine_of(demo, SERIAL)
    before = _counts(demo)
    code, _, err = run(demo, "event", "meter_replaced", SERIAL, "--date", TODAY, "--hours", "100", "--to-hours", "0",
                       columns=400)
    assert code == 2
    assert "machine = ''" not in err
    assert f"serial = '{SERIAL}': is a pump serial, not a machine unit: meter_replaced is an event of a machine: " \
           "give its unit with --machine" in err
    assert f"pump {SERIAL} sat in {machine} on {TODAY}" in err and f"--machine {machine}" in err
    assert _counts(demo) == before


def test_a_machine_event_without_machine_says_it_takes_one(demo, run):
    code, _, err = run(demo, "event", "parked", "--date", TODAY, columns=400)
    assert code == 2 and "--machine = '': is required: parked is an event of a machine" in err
    code, _, err = run(demo, "event", "meter_replaced", MACHINE, "--date", TODAY, "--hours", "1", "--to-hours", "0",
                       columns=400)
    assert code == 2 and "is a machine unit given in the place of a pump serial" in err
    assert f"`logbook event meter_replaced --machine {MACHINE} ...`" in err


def test_a_pump_serial_given_as_the_machine_says_where_it_sits(demo, run):
    machine = _machine_of(demo, SERIAL)
    code, _, err = run(demo, "event", "parked", "--machine", SERIAL, "--date", TODAY, columns=400)
    assert code == 2
    assert f"machine = '{SERIAL}': must be a known machine unit for parked; {SERIAL} is a pump serial" in err
    assert f"--machine {machine}" in err
