"""The safety list on the command line where readings are taken: `logbook record` and
`logbook event` (every kind) print it to stderr first, so stdout holds only the result;
`logbook round` prints it first on stdout, as on every round sheet."""

from __future__ import annotations

import pytest

from logbook.cautions import SAFETY
from logbook.cli import main
from logbook.model import MACHINE_EVENTS, EventKind
from logbook.store import Store
from tests.store.test_cli import TODAY, demo, demo_master  # noqa: F401  (the demo fleet fixtures)

SERIAL = "C-28412"  # a fitted demo pump


def assert_safety_first(text: str) -> None:
    """The list whole and in order at the start of ``text``: title, warning line, items, deferral."""
    expected = SAFETY.text().splitlines()
    assert text.splitlines()[: len(expected)] == expected
    assert expected[1] == f"⚠ WARNING: {SAFETY.warning}"


def _pump(path):
    with Store(path) as store:
        fleet = store.fleet()
    last = max((r for r in fleet.readings if r.serial == SERIAL), key=lambda r: r.machine_hours)
    spare = next(f for f in fleet.fitments if f.removed_on is None and f.machine != last.machine).machine
    return last, spare


def test_record_prints_the_list_to_stderr_and_only_the_result_to_stdout(demo, capsys):
    last, _ = _pump(demo)
    args = ["--db", str(demo), "--today", TODAY, "record", SERIAL, "--date", TODAY,
            "--hours", str(last.machine_hours + 10), "--servo-pressure", "25"]
    assert main(args) == 0
    out, err = capsys.readouterr()
    assert_safety_first(err)
    assert out.startswith("recorded reading ") and SAFETY.title not in out and SAFETY.sign not in out


def test_record_shows_the_list_even_when_the_input_is_refused(demo, capsys):
    assert main(["--db", str(demo), "--today", TODAY, "record", SERIAL, "--date", TODAY, "--hours", "x"]) == 2
    out, err = capsys.readouterr()
    assert_safety_first(err)
    assert out == "" and "machine_hours" in err  # the refusal follows the list


@pytest.mark.parametrize("kind", list(EventKind))
def test_event_prints_the_list_to_stderr_for_every_kind(demo, capsys, kind):
    last, spare = _pump(demo)
    hours = str(last.machine_hours + 10)
    if kind is EventKind.METER_REPLACED:
        where, extra = [], ["--machine", last.machine, "--hours", hours, "--to-hours", "0"]
    elif kind in MACHINE_EVENTS:  # parked, back in service: events of a machine
        where, extra = [], ["--machine", last.machine, "--hours", hours]
    elif kind is EventKind.MOVE:
        where, extra = [SERIAL], ["--hours", hours, "--to-machine", spare, "--to-position", "spare-1", "--to-hours", "90000"]
    else:
        where, extra = [SERIAL], ["--hours", hours]
    assert main(["--db", str(demo), "--today", TODAY, "event", kind.value, *where, "--date", TODAY, *extra]) == 0
    out, err = capsys.readouterr()
    assert_safety_first(err)
    assert out.startswith(f"recorded {kind.value} ") and SAFETY.title not in out


def test_round_text_starts_with_the_list_then_the_pumps(demo, capsys):
    assert main(["--db", str(demo), "--today", TODAY, "round", "--within", "30"]) == 0
    out = capsys.readouterr().out
    assert_safety_first(out)
    assert out.index(SAFETY.deferral) < out.index("machine/pos")  # the table comes after the list
