"""Messages that name what to do: the command that records a new hour meter, the record's dates
when a backtest's --from is after it, the first record when --as-of is before it, and forecast
words that agree with the quantiles beside them."""

from __future__ import annotations

import re
from datetime import date
from types import SimpleNamespace

from logbook import validate
from logbook.analysis.results import Outcome
from logbook.analysis.results import outcome_words
from logbook.store import Store
from tests.store.test_cli import TODAY

SERIAL = "C-28412"


def test_a_meter_that_runs_backwards_names_the_command_to_type():
    problem = validate.check_hour_meter("machine_hours", date(2026, 12, 1), 10.0, (date(2026, 11, 1), 20_000.0), None)
    assert "'Hour meter replaced' first" not in problem.allowed
    assert "`logbook event meter_replaced --machine UNIT --date YYYY-MM-DD --hours OLD_LAST --to-hours NEW_FIRST`" \
        in problem.allowed
    named = validate.check_hour_meter("hours", date(2026, 12, 1), 10.0, (date(2026, 11, 1), 20_000.0), None,
                                      machine="EX-1")
    assert named.allowed.startswith("runs backwards: the machine EX-1 read 20000 h on 2026-11-01")
    assert "--machine EX-1 --date" in named.allowed


def test_record_with_a_meter_that_runs_backwards_names_the_pumps_machine(demo, run):
    with Store(demo) as store:
        (fit,) = [f for f in store.fitments(serial=SERIAL) if f.removed_on is None]
        before = store.counts()
    code, _, err = run(demo, "record", SERIAL, "--date", TODAY, "--hours", "10", "--servo-pressure", "25", columns=400)
    assert code == 2
    assert f"runs backwards: the machine {fit.machine} read" in err
    assert f"`logbook event meter_replaced --machine {fit.machine} --date YYYY-MM-DD" in err
    with Store(demo) as store:
        assert store.counts() == before


def _reading_span(db) -> tuple[str, str]:
    with Store(db) as store:
        days = [r.taken_on for r in store.readings()]
    return min(days).isoformat(), max(days).isoformat()


def test_backtest_from_after_the_record_says_so_with_its_dates(demo, run):
    first, last = _reading_span(demo)
    code, _, err = run(demo, "backtest", "--from", "2027-01-01", columns=400)
    assert code == 2
    assert "too short" not in err
    assert "--from = '2027-01-01': is after the newest reading on record" in err
    assert f"the readings run from {first} to {last}" in err


def test_backtest_from_after_the_default_to_says_which_day_that_is(demo, run):
    code, _, err = run(demo, "backtest", "--from", "2026-11-20", columns=400)
    assert code == 2
    assert "--from = '2026-11-20': is after the default --to, 2026-11-01 (30 days before today" in err


def test_as_of_before_any_record_says_so_and_gives_the_first_date(demo, run):
    with Store(demo) as store:
        fitted = min(f.fitted_on for f in store.fitments()).isoformat()
    first, _ = _reading_span(demo)
    code, out, err = run(demo, "--as-of", "2019-01-01", "pumps", columns=400)
    assert code == 0
    assert "serial" not in out  # no empty table
    assert f"--as-of 2019-01-01: nothing was recorded by then; the first record is a pump fitted on {fitted}" in err
    assert f"the first reading is dated {first}" in err
    for args in (("show", SERIAL), ("round",)):
        code, _, err = run(demo, "--as-of", "2019-01-01", *args, columns=400)
        assert code == 0 and "nothing was recorded by then" in err


def test_as_of_before_the_first_reading_says_there_was_none_yet(demo, run):
    first, _ = _reading_span(demo)
    code, out, err = run(demo, "--as-of", "2023-01-01", "pumps", columns=400)
    assert code == 0 and "no readings" in out  # the fitted pumps are listed
    assert f"--as-of 2023-01-01: no reading was recorded by then; the first reading is dated {first}" in err


def _kf(outcome, p10, p50, p90):
    return SimpleNamespace(outcome=outcome, p10_date=p10, p50_date=p50, p90_date=p90)


def test_outcome_words_agree_with_the_quantiles():
    d = date(2027, 1, 1)
    assert outcome_words(_kf(Outcome.NO_CROSSING, d, None, None)) == "P50 beyond the horizon"
    assert outcome_words(_kf(Outcome.NO_CROSSING, None, None, None)) == "no crossing in horizon"
    assert outcome_words(_kf(Outcome.CROSSING, d, d, None)) == "P90 beyond the horizon"
    assert outcome_words(_kf(Outcome.CROSSING, d, d, d)) == "crossing forecast"


def test_show_never_says_no_crossing_beside_a_p10_date(demo, run):
    # on the demo fleet as of 2026-01-01, A-67336 has P10 dates with no P50 within the horizon
    said = []
    for columns in (80, 200):
        code, out, _ = run(demo, "--as-of", "2026-01-01", "show", "A-67336", columns=columns)
        assert code == 0
        rows = [line for line in out.splitlines() if line.startswith(("case drain", "servo pressure", "neutral drift"))]
        for line in rows:
            if re.search(r"\d{4}-\d{2}-\d{2}", line):
                assert "no crossing" not in line, line
        said += rows
    assert any("P50 beyond the horizon" in line for line in said)
