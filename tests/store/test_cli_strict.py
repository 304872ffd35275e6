"""The command line takes input strictly and keeps text verbatim (issue 10, item 7):
no abbreviated options, numbers only in the digits 0-9, dates only as YYYY-MM-DD,
long values cut in messages, free text stored as typed on every path, and a filter
that names nothing is refused with the valid choices listed."""

from __future__ import annotations

import argparse

import pytest

from logbook.cli import build_parser, main
from logbook.imports import import_bytes
from logbook.store import Store
from tests.store.conftest import TODAY

DAY = TODAY.isoformat()
NOTES = [
    '=HYPERLINK("http://example.invalid","click")',  # OWASP "CSV Injection" examples
    "-2+3+cmd|' /C calc'!A0",
    "- seals checked",
    "@SUM(A1:A9)",
    "+1 turn on the adjuster",
]


@pytest.fixture
def db(store):
    """The small invented fleet of conftest (site North Yard, model TX-90, pumps S-100...)."""
    store.close()
    return store.path


def _cli(db, *args):
    return main(["--db", str(db), "--today", DAY, *args])


def _exit(db, *args) -> int:
    """main() for arguments argparse itself refuses (it exits via SystemExit)."""
    try:
        return _cli(db, *args)
    except SystemExit as exc:
        return exc.code


def _count(db, what="readings"):
    with Store(db) as s:
        return s.counts()[what]


def _subparsers(parser: argparse.ArgumentParser):
    for action in parser._actions:
        if isinstance(action, argparse._SubParsersAction):
            yield from action.choices.values()


def test_no_parser_accepts_abbreviated_options():
    parser = build_parser()
    parsers = [parser, *_subparsers(parser)]
    assert len(parsers) > 10 and all(p.allow_abbrev is False for p in parsers)
    # argparse's own int() reads "4_2" and Unicode digits: no option is left with it
    assert not [a.dest for p in parsers for a in p._actions if p._registry_get("type", a.type, a.type) is int]


def test_an_abbreviated_option_is_an_error_and_writes_nothing(db, capsys):
    before = _count(db)
    code = _exit(db, "record", "S-100", "--date", DAY, "--hours", "2000", "--servo-pressur", "24")
    assert code == 2 and "--servo-pressur" in capsys.readouterr().err
    assert _exit(db, "pumps", "--si", "North Yard") == 2
    assert _count(db) == before


@pytest.mark.parametrize("value", ["4_2", "\u0664\u0662", "\uff14\uff12", "\u096a\u0968"])
def test_integer_options_take_ascii_digits_only(db, capsys, value):
    assert int(value) == 42  # what argparse's type=int made of it
    assert _exit(db, "pumps", "--limit", value) == 2
    assert "whole number" in capsys.readouterr().err
    assert _exit(db, "history", "S-100", "--last", value) == 2
    assert _exit(db, "remove", "reading", value, "--reason", "typo") == 2


@pytest.mark.parametrize(
    "option,value",
    [
        ("--hours", "2_000"),  # float() reads 2000
        ("--hours", "\u0662\u0660\u0660\u0660"),  # 2000 in Arabic-Indic digits
        ("--servo-pressure", "\uff12\uff14"),  # 24 in full-width digits
        ("--servo-pressure", "\u0968\u096a bar"),  # 24 bar in Devanagari digits
        ("--servo-pressure", "2_4psi"),
        ("--iso4406", "\u0661\u0668/\u0661\u0666/\u0661\u0663"),
        ("--oil-grade", "4_6"),
        ("--date", "20261201"),  # ISO 8601 basic format, taken by date.fromisoformat on 3.11
    ],
)
def test_record_refuses_lenient_numbers_and_dates(db, capsys, option, value):
    before = _count(db)
    args = {"--date": DAY, "--hours": "2000", "--servo-pressure": "24"} | {option: value}
    code = _cli(db, "record", "S-100", *[x for kv in args.items() for x in kv])
    assert code == 2 and value in capsys.readouterr().err
    assert _count(db) == before


def test_event_and_correct_refuse_lenient_numbers(db):
    before = _count(db, "events")
    assert _cli(db, "event", "neutral_reset", "S-100", "--date", DAY, "--hours", "2_000") == 2
    assert _cli(db, "event", "neutral_reset", "S-100", "--date", "20261201", "--hours", "2000") == 2
    assert _count(db, "events") == before
    with Store(db) as s:
        rid = s.readings("S-100")[-1].id
    assert _cli(db, "correct", str(rid), "--servo-pressure", "2_4", "--reason", "typo") == 2
    assert _count(db) == 3


def test_a_megabyte_bad_value_is_cut_in_the_message(db, capsys):
    huge = "9" * 1_000_000 + "x"
    assert _cli(db, "record", "S-100", "--date", DAY, "--hours", "2000", "--case-drain", huge) == 2
    err = " ".join(capsys.readouterr().err.split())  # the terminal console may wrap lines
    assert "(1000001 characters)" in err and len(err) < 3000
    assert _exit(db, "pumps", "--limit", huge) == 2
    err = " ".join(capsys.readouterr().err.split())
    assert "(1000001 characters)" in err and len(err) < 3000
    assert _exit(db, "forecast", "--format", huge) == 2
    assert len(capsys.readouterr().err) < 3000


@pytest.mark.parametrize("note", NOTES)
def test_free_text_is_stored_verbatim_by_record_event_correct_and_import(db, note):
    assert _cli(db, "--as", "ana", "record", "S-100", "--date", DAY, "--hours", "2000", "--servo-pressure", "24",
                "--note", note, "--technician", note) == 0
    assert _cli(db, "event", "neutral_reset", "S-100", "--date", DAY, "--hours", "2000", "--note", note) == 0
    with Store(db) as s:
        last = s.readings("S-100")[-1]
        event = [e for e in s.events() if e.serial == "S-100"][-1]
    assert (last.note, last.technician, event.note) == (note, note, note)
    assert _cli(db, "correct", str(last.id), "--note", note + " (corrected)", "--reason", note) == 0
    with Store(db, user="ana") as s:
        assert s.readings("S-100")[-1].note == note + " (corrected)"
        csv_text = ("serial,date,machine_hours,servo_pressure,technician,note\n"
                    f'S-200,{DAY},6000,26,"{note.replace(chr(34), chr(34) * 2)}","{note.replace(chr(34), chr(34) * 2)}"\n')
        report = import_bytes(s, "readings", csv_text.encode(), name="r.csv", today=TODAY)
        assert report.problems == [] and report.added == 1
        imported = s.readings("S-200")[-1]
    assert (imported.note, imported.technician) == (note, note)


def test_pumps_filters_that_name_nothing_are_refused_with_the_choices(db, capsys):
    for option, value, words in (
        ("--site", "Nowhere", ["no such site", "'Nowhere'", "North Yard"]),
        ("--model", "TQ-999", ["no such model", "'TQ-999'", "TX-90"]),
        ("--status", "bogus", ["no status", "'bogus'", "steady", "over limit"]),
    ):
        assert _cli(db, "pumps", option, value) == 2
        err = capsys.readouterr().err
        assert all(w in err for w in words), (option, err)
    assert _cli(db, "pumps", "--site", "North Yard", "--model", "TX-90") == 0
    assert "S-100" in capsys.readouterr().out
    assert _cli(db, "pumps", "--status", "over limit") == 0  # a real status word, even if no pump has it now


def test_model_names_an_unknown_code(db, capsys):
    assert _cli(db, "model", "TQ-999") == 2
    err = capsys.readouterr().err
    assert "no such model" in err and "TX-90" in err
    assert _cli(db, "model", "TQ-999", "--limit", "case_drain=3") == 2
    assert _cli(db, "model", "TX-90") == 0 and "TX-90" in capsys.readouterr().out


@pytest.mark.parametrize("month", ["1969-01", "2024-11", "2037-01", "\u0662\u0660\u0662\u0667-01"])
def test_forecast_month_out_of_range_or_in_other_digits_is_refused(db, capsys, month):
    # TODAY is 2026-12-01: a plan may start from 2024-12 (2 years back) to 2036-12 (10 years ahead)
    assert _cli(db, "forecast", "--month", month) == 2
    err = capsys.readouterr().err
    assert "--month" in err and month in err
    if month.isascii():
        assert "2024-12 to 2036-12" in err


def test_forecast_month_at_the_ends_of_the_range_is_taken(db, capsys):
    assert _cli(db, "forecast", "--month", "2024-12", "--format", "json") == 0
    assert _cli(db, "forecast", "--month", "2036-12", "--format", "json") == 0
    assert _cli(db, "forecast", "--exchange", "TX-90=\u0662") == 2  # Unicode digit count
