"""User text is data: whatever a technician, a note, a reason, an ``--as`` name, a file
name, a serial or a site holds (square brackets, markup-like tags, formula prefixes,
control characters, very long text), every command that shows it prints it as it was
entered, with control characters written as their escapes, and never crashes.

The entry paths are the store's methods, ``logbook record``, ``event``, ``correct``,
``remove`` and ``import``; the outputs ``show``, ``history`` and ``pumps``."""

from __future__ import annotations

import csv
import io
import re
import shutil
from datetime import date

import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from rich.console import Console

from logbook.cli import Context, build_parser, main
from logbook.fmt import visible
from logbook.model import Event, EventKind, Reading
from logbook.store import Store
from logbook.units import UnitPrefs
from tests.store.conftest import MACHINES, MODELS, PUMPS, READINGS, TODAY, load

DAY = TODAY.isoformat()
#: Any character a terminal would act on instead of showing (what ``visible`` escapes).
RAW_CONTROL = re.compile("[\x00-\x09\x0b-\x1f\x7f-\x9f\u2028\u2029\u202a-\u202e\u2066-\u2069]")

#: The cases of the issue, and a few more of the same kind.
NASTY = ["[/]", "x[/b]", "Ann [night shift]", "[link=https://example.invalid]click[/link]", "[bold red]Ben",
         "=HYPERLINK(\"https://example.invalid\",\"x\")", "-2+3+cmd|' /C calc'!A0", "@SUM(1)", "a | b `c` *d* _e_",
         "tab\there", "del\x7f csi\x9b2J rlo\u202eevil", "$x$ <b>&amp;</b> \\[x\\]"]

_PIECES = ["[", "]", "[/]", "x[/b]", "[b]", "[/b]", "[link=https://example.invalid]", "[/link]", "[bold red]",
           "[@click=app.quit]", "\\", "|", "`", "*", "_", "#", "<", ">", "&", '"', "'", "$", "$x$", "=", "+", "-", "@",
           "=HYPERLINK(\"https://example.invalid\")", "\t", "\x7f", "\x9b", "\x85", "\u202e", "\u2066", "\u2028", "é",
           "日本", "🔧", " ", "a", "Ann", "night shift"]
#: Characters the store accepts in free text: anything but the C0 controls (tab aside)
#: and surrogates (not encodable).
_CHARS = st.characters(exclude_categories=("Cs",), exclude_characters="".join(map(chr, range(32))) + "\x00")


def _free_text(max_pieces: int = 12):
    short = st.lists(st.sampled_from(_PIECES) | st.text(_CHARS, min_size=1, max_size=4), min_size=1,
                     max_size=max_pieces).map("".join)
    long = st.tuples(st.sampled_from(_PIECES[:10]), st.integers(60, 140)).map(lambda t: (t[0] + "Zz")[:4] * t[1])
    return (short | long).map(lambda s: s.strip()[:500]).filter(bool)


#: Technician, note, reason: one line of at most 500 characters, no C0 control character
#: but the tab (the store's own rule, kept); ends trimmed (the reason is stored trimmed).
FREE_TEXT = _free_text()
#: A name given with --as: 1-64 characters on one line, no tab (the store's rule).
NAME = _free_text(6).map(lambda s: s.replace("\t", " ")[:64].strip()).filter(bool)


@pytest.fixture(scope="module")
def master(tmp_path_factory):
    path = tmp_path_factory.mktemp("user-text") / "t.db"
    with Store(path, user="tester") as s:
        for table, data in (("models", MODELS), ("machines", MACHINES), ("pumps", PUMPS), ("readings", READINGS)):
            load(s, table, data)
    return path


def fresh(master, folder):
    folder.mkdir(parents=True, exist_ok=True)
    path = folder / "t.db"
    for suffix in ("", "-wal", "-shm"):
        path.with_name(path.name + suffix).unlink(missing_ok=True)
    shutil.copy(master, path)
    return path


def output(db, *argv: str) -> str:
    """A command's standard output on a console wide enough that no cell wraps (the
    comparison is of whole texts); any exception fails the test."""
    args = build_parser().parse_args(["--db", str(db), "--today", DAY, *argv])
    out = io.StringIO()
    ctx = Context(db_path=db, user=args.user, today=TODAY, units=UnitPrefs(),
                  console=Console(file=out, width=20_000, highlight=False),
                  err=Console(file=io.StringIO(), width=20_000, highlight=False))
    assert args.func(args, ctx) == 0
    return out.getvalue()


def shows(out: str, *texts: str) -> None:
    """Each text is in the output as typed (control characters as their escapes), and
    nothing in the output could drive a terminal."""
    for t in texts:
        assert visible(t) in out, (t, out[-2000:])
    assert not RAW_CONTROL.search(out.replace("\n", "")), repr(RAW_CONTROL.search(out.replace("\n", "")))


def _next_hours(store, serial: str) -> float:
    return max(r.machine_hours for r in store.readings(serial, include_superseded=True)) + 10.0


# -- the cases found ------------------------------------------------------------------------


def test_bracket_text_in_every_field_shows_verbatim_in_show_history_and_pumps(master, tmp_path, capsys):
    db = fresh(master, tmp_path)
    base = ["--db", str(db), "--today", DAY]
    assert main([*base, "--as", "Ann [night shift]", "record", "S-100", f"--date={DAY}", "--hours=1700",
                 "--servo-pressure=25", "--technician=x[/b]", "--note=[link=https://example.invalid]n[/link]"]) == 0
    assert main([*base, "--as", "[/]", "event", "oil_change", "S-100", f"--date={DAY}", "--hours=1710",
                 "--technician=[/]", "--note=[bold]oil[/bold] [link=https://example.invalid]x[/link]"]) == 0
    with Store(db) as store:
        reading = store.readings("S-100")[-1]
        event = store.events("S-100")[-1]
    assert main([*base, "--as", "x[/b]", "correct", str(reading.id), "--reason=typo [/] in [b]the[/b] note",
                 "--note=Ann [night shift]"]) == 0
    capsys.readouterr()
    # Through main, as a user runs them: no traceback, the text whole.
    assert main([*base, "show", "S-100"]) == 0
    out = capsys.readouterr().out
    assert "[bold]oil[/bold] [link=https://example.invalid]x[/link]" in out and "x[/b]" in out
    assert "\x1b]8;" not in out  # no live terminal link (OSC 8)
    assert main([*base, "history", "S-100"]) == 0
    out = capsys.readouterr().out
    assert "Ann [night shift]" in out and "typo [/] in [b]the[/b] note" in out and "[/]" in out
    assert "note [link=https://example.invalid]n[/link] -> Ann [night shift]" in out
    assert main([*base, "pumps"]) == 0
    assert "S-100" in capsys.readouterr().out
    assert main([*base, "--as", "Ann [night shift]", "remove", "event", str(event.id), "--reason=[/] wrong pump"]) == 0
    capsys.readouterr()
    assert main([*base, "history", "S-100"]) == 0
    assert "[/] wrong pump" in capsys.readouterr().out


def test_a_rejected_import_quotes_its_file_name_as_typed(master, tmp_path, capsys):
    # Serials, units, sites are names of letters, digits, space and . _ / # - (the store's
    # rule): a bracket is refused, and the refusal names the file without reading it as markup.
    db = fresh(master, tmp_path)
    path = tmp_path / "machines [night shift] [link=x]\x1b[2J.csv"  # no '/' in a file name
    path.write_text("unit,site,description\nU-9,Yard [/b],x\n", encoding="utf-8")
    assert main(["--db", str(db), "--today", DAY, "import", "machines", str(path)]) == 2
    err = capsys.readouterr().err
    assert "\x1b" not in err
    err = " ".join(err.split())  # the terminal width wraps the message
    assert visible(str(path)) in err and "rejected, nothing written" in err and "'Yard [/b]'" in err
    with Store(db) as store:
        assert "U-9" not in store.machines()


def test_an_import_file_name_with_markup_and_escapes_shows_in_history(master, tmp_path):
    db = fresh(master, tmp_path)
    name = "r [night shift] [bold red]x\x1b[2J \x9b [@click=app.quit].csv"  # no '/' in a file name
    path = tmp_path / name
    path.write_bytes(b"serial,date,machine_hours,servo_pressure,technician,note\nS-100,2025-06-01,1600,25,x[/b],[/]\n")
    assert main(["--db", str(db), "--today", DAY, "import", "readings", str(path)]) == 0
    out = output(db, "history", "S-100")
    shows(out, name)
    shows(output(db, "show", "S-100"), "x[/b]")


def test_control_characters_the_store_refuses_are_quoted_not_sent_to_the_terminal(master, tmp_path, capsys):
    db = fresh(master, tmp_path)
    before = Store(db).counts()["readings"]
    code = main(["--db", str(db), "--today", DAY, "record", "S-100", f"--date={DAY}", "--hours=1700", "--servo-pressure=25",
                 "--note=\x1b[2J\x1b]8;;https://example.invalid\x07x"])
    err = capsys.readouterr().err
    assert code == 2 and "\\x1b[2J" in err and "\x1b" not in err
    assert Store(db).counts()["readings"] == before


# -- the properties -------------------------------------------------------------------------

PROPERTY = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture,
                                                                           HealthCheck.too_slow])


@PROPERTY
@given(name=NAME, tech=FREE_TEXT, note=FREE_TEXT, tech2=FREE_TEXT, note2=FREE_TEXT, reason=FREE_TEXT,
       event_note=FREE_TEXT, reason2=FREE_TEXT)
def test_text_entered_through_the_store_shows_verbatim(master, tmp_path_factory, name, tech, note, tech2, note2, reason,
                                                      event_note, reason2):
    db = fresh(master, tmp_path_factory.mktemp("p"))
    with Store(db, user=name) as store:
        hours = _next_hours(store, "S-100")
        r = store.add_reading(Reading(None, "S-100", date(2025, 6, 1), hours, servo_pressure_bar=25.0, technician=tech,
                                      note=note), today=TODAY)
        new = store.correct_reading(r.id, reason=reason, today=TODAY, technician=tech2, note=note2, servo_pressure_bar=24.0)
        e = store.add_event(Event(None, EventKind.OIL_CHANGE, date(2025, 6, 2), "S-100", hours=hours + 5, technician=tech,
                                  note=event_note), today=TODAY)
        store.remove_event(e.id, reason=reason2)
        stored = [x for x in store.readings("S-100", include_superseded=True) if x.id in (r.id, new.id)]
    assert [(x.technician, x.note) for x in stored] == [(tech, note), (tech2, note2)]  # kept as entered
    shows(output(db, "show", "S-100", "--all-readings"), tech2, tech)
    changed = [t for old, new in ((tech, tech2), (note, note2)) if old != new for t in (old, new)]  # a change shows both
    shows(output(db, "history", "S-100"), name, reason, reason2, *changed)
    shows(output(db, "pumps"))


@settings(PROPERTY, max_examples=25)
@given(name=NAME, tech=FREE_TEXT, note=FREE_TEXT, reason=FREE_TEXT, note2=FREE_TEXT, reason2=FREE_TEXT)
def test_text_entered_through_the_commands_shows_verbatim(master, tmp_path_factory, name, tech, note, reason, note2,
                                                          reason2):
    db = fresh(master, tmp_path_factory.mktemp("c"))
    base = ["--db", str(db), "--today", DAY, f"--as={name}"]
    with Store(db) as store:
        hours = _next_hours(store, "S-200")
    assert main([*base, "record", "S-200", "--date=2025-06-01", f"--hours={hours:g}", "--servo-pressure=25",
                 f"--technician={tech}", f"--note={note}"]) == 0
    assert main([*base, "event", "oil_change", "S-200", "--date=2025-06-02", f"--hours={hours + 5:g}",
                 f"--technician={tech}", f"--note={note2}"]) == 0
    with Store(db) as store:
        reading = store.readings("S-200")[-1]
        event_id = store.events("S-200")[-1].id
    assert (reading.technician, reading.note) == (tech, note)
    assert main([*base, "correct", str(reading.id), f"--reason={reason}", "--servo-pressure=24"]) == 0
    assert main([*base, "remove", "event", str(event_id), f"--reason={reason2}"]) == 0
    shows(output(db, "show", "S-200"), tech)
    shows(output(db, "history", "S-200"), name, reason, reason2)


_FILE_NAME = _free_text(6).map(lambda s: s.replace("/", "|")[:50].strip()).filter(lambda s: s not in ("", ".", ".."))
#: Serials, units, sites: the store's name rule (letters, digits, space and . _ / # -,
#: starting with a letter or digit, at most 40).
_ID = st.from_regex(r"[A-Za-z0-9][A-Za-z0-9 ._/#-]{0,39}", fullmatch=True).map(str.strip)


@settings(PROPERTY, max_examples=25)
@given(file_name=_FILE_NAME, tech=FREE_TEXT, note=FREE_TEXT, serial=_ID, unit=_ID, site=_ID)
def test_text_imported_from_files_shows_verbatim(master, tmp_path_factory, file_name, tech, note, serial, unit, site):
    assume(serial not in ("S-100", "S-200", "S-300") and unit not in ("M-1", "M-2"))  # the fixed fleet's own
    folder = tmp_path_factory.mktemp("i")
    db = fresh(master, folder)
    sheets = {
        "machines": [["unit", "site", "description"], [unit, site, note]],
        "pumps": [["serial", "model", "machine", "position", "fitted_on", "machine_hours_at_fit", "pump_hours_at_fit"],
                  [serial, "TX-90", unit, "main", "2025-01-10", "100", "0"]],
        "readings": [["serial", "date", "machine_hours", "servo_pressure", "technician", "note"],
                     [serial, "2025-03-01", "400", "25", tech, note]],
    }
    for table, rows in sheets.items():
        path = folder / (f"{table} {file_name}.csv")
        buffer = io.StringIO()
        csv.writer(buffer, lineterminator="\n").writerows(rows)
        path.write_text(buffer.getvalue(), encoding="utf-8")
        assert main(["--db", str(db), "--today", DAY, "import", table, str(path)]) == 0, (table, rows)
    with Store(db) as store:
        (r,) = store.readings(serial)
    assert (r.serial, r.technician, r.note, r.machine) == (serial, tech, note, unit)
    shows(output(db, "pumps"), serial, unit)
    shows(output(db, "show", "--", serial), serial, unit, tech)
    shows(output(db, "history", "--", serial), serial, unit, f"readings {file_name}.csv")
