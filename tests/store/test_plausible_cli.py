"""Plausibility on the command line: `record` and `correct` stop at a value that looks
wrong and name --confirm; with it the value is saved and `logbook check` reports the
stored hour-meter jump; an import lists such readings per line."""

from __future__ import annotations

from logbook.cli import main
from logbook.store import Store
from tests.store.test_cli import TODAY, demo, demo_master  # noqa: F401  (the demo fleet fixtures)


def latest(path):
    """The pump whose machine's latest meter record is a reading of that pump, and that reading."""
    with Store(path) as store:
        readings = store.readings()
    last = max(readings, key=lambda r: (r.taken_on, r.id))
    return last


def test_record_stops_at_an_hour_meter_jump_and_names_the_flag(demo, capsys):
    last = latest(demo)
    with Store(demo) as store:
        before = store.counts()["readings"]
    argv = ["--db", str(demo), "--today", TODAY, "record", last.serial, "--date", TODAY,
            "--hours", "99999", "--servo-pressure", f"{last.servo_pressure_bar or 25:g}"]
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert "Not recorded" in err and "--confirm" in err
    assert "Hour meter 99,999 h" in err and "more than 24 h a day" in err
    assert "machine_hours" not in err  # the label, not the internal name
    with Store(demo) as store:
        assert store.counts()["readings"] == before
    assert main([*argv, "--confirm"]) == 0
    with Store(demo) as store:
        assert store.counts()["readings"] == before + 1
    capsys.readouterr()
    assert main(["--db", str(demo), "--today", TODAY, "check"]) == 1
    err = capsys.readouterr().err
    assert "jumps implausibly" in err and f"{last.machine}: 99999 h on {TODAY}" in err


def test_a_plausible_reading_goes_through_without_the_flag(demo, capsys):
    last = latest(demo)
    argv = ["--db", str(demo), "--today", TODAY, "record", last.serial, "--date", TODAY,
            "--hours", f"{last.machine_hours + 8:g}", "--servo-pressure", f"{last.servo_pressure_bar or 25:g}"]
    assert main(argv) == 0, capsys.readouterr().err


def test_correct_stops_at_oil_outside_the_test_window(demo, capsys):
    last = latest(demo)
    with Store(demo) as store:
        model = store.models()[store.pumps()[last.serial].model]
    hot = model.test_temp_max_c + 15
    argv = ["--db", str(demo), "--today", TODAY, "correct", str(last.id), "--reason", "typo", "--oil-temp", f"{hot:g}"]
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert "Not corrected" in err and "Oil temperature" in err and "outside the test window" in err and "--confirm" in err
    with Store(demo) as store:
        assert store.reading(last.id).superseded_by is None
    assert main([*argv, "--confirm"]) == 0
    with Store(demo) as store:
        assert store.reading(last.id).superseded_by is not None


def test_the_demo_fleet_has_no_implausible_hour_meter(demo, capsys):
    assert main(["--db", str(demo), "--today", TODAY, "check"]) == 0, capsys.readouterr().err


def test_an_import_lists_the_readings_that_look_wrong_per_line(demo, tmp_path, capsys):
    last = latest(demo)
    servo = last.servo_pressure_bar or 25.0
    csv = tmp_path / "readings.csv"
    csv.write_text(
        "serial,date,machine_hours,servo_pressure\n"
        f"{last.serial},{TODAY},{last.machine_hours + 6:g},{servo:g}\n"  # plausible
        f"{last.serial},{TODAY},{last.machine_hours + 60000:g},{servo:g}\n",  # a digit too many
        encoding="utf-8",
    )
    # Two readings on one day: the second is the jump against the first and the stored ones.
    assert main(["--db", str(demo), "--today", TODAY, "import", "readings", str(csv)]) == 0
    out = capsys.readouterr().out
    lines = [line for line in out.splitlines() if "Hour meter" in line]
    assert len(lines) == 1 and f"line 3, {last.serial} {TODAY}: Hour meter {last.machine_hours + 60000:,.0f} h" in lines[0]


def test_event_stops_at_an_hour_meter_jump_and_names_the_flag(demo, capsys):
    last = latest(demo)
    argv = ["--db", str(demo), "--today", TODAY, "event", "overhaul", last.serial, "--date", TODAY,
            "--hours", f"{last.machine_hours + 90_000:g}"]
    with Store(demo) as store:
        before = len(store.events())
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert "Not recorded" in err and "Hour meter" in err and "--confirm" in err
    assert main([*argv, "--confirm"]) == 0
    with Store(demo) as store:
        assert len(store.events()) == before + 1
    assert main(["--db", str(demo), "--today", TODAY, "event", "oil_change", last.serial, "--date", TODAY,
                 "--hours", f"{last.machine_hours + 90_004:,.0f}"]) == 0  # 22,950 as printed; 4 h later: no question
