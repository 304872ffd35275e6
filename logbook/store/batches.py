"""What every batch check shares: its outcome (``Checked``), line numbers on its
problems, how values are shown in messages, the free-text rule, and telling a row
that repeats a stored reading or event from a new one."""

from __future__ import annotations

import dataclasses
import sqlite3
from typing import Callable, Sequence

from logbook.model import Problem

MAX_TEXT = 500


@dataclasses.dataclass
class Checked:
    """The outcome of checking a batch: what to write, what was already there, what is wrong."""

    problems: list[Problem]
    items: list
    present: int = 0
    notes: list[str] = dataclasses.field(default_factory=list)  # per line: present rows worth a word


def _row_id(cursor: sqlite3.Cursor) -> int:
    """The id of the row an INSERT just wrote (SQLite sets it for every insert)."""
    assert cursor.lastrowid is not None
    return cursor.lastrowid


def _line(lines: Sequence[int] | None, i: int) -> int | None:
    return lines[i] if lines is not None else None


def _with_line(problems: list[Problem], line: int | None) -> list[Problem]:
    for p in problems:
        p.line = line
    return problems


def _shown(value: object) -> str:
    """A stored or given value in a message: numbers plain, text quoted, nothing as 'blank'."""
    if value is None or value == "":
        return "blank"
    return f"{value:g}" if isinstance(value, float) else repr(value) if isinstance(value, str) else str(value)


def _text_problems(technician: str, note: str) -> list[Problem]:
    """Free text: one line of at most MAX_TEXT characters (as in a CSV cell)."""
    return [
        Problem(name, text[:40], f"must be one line of at most {MAX_TEXT} characters")
        for name, text in (("technician", technician), ("note", note))
        if text and (len(text) > MAX_TEXT or any(ord(ch) < 32 and ch != "\t" for ch in text))
    ]


# A stored reading or event that a new row may repeat, kept as the tuple it is read in (big files
# bring one for every stored row of their pumps): (key..., id, values..., technician, note, machine, kept).
# ``values`` make its identity with the key: measured values (readings), where it went (events);
# technician and note are free text; ``kept`` is None while current, else "corrected" or "removed".
#: Where the id sits in that tuple.
_ID_AT = {"readings": 3, "events": 0}


def _same_record(stored: Sequence[tuple], at: int, values: tuple, texts: tuple[str, str], machine: str | None
                 ) -> tuple | None:
    """The stored record a new row repeats (same key and values, and the machine if the row names one):
    a current one with the same text first, then a kept original with the same text, then one whose text differs."""
    same = [s for s in stored if s[at + 1:-4] == values and machine in (None, s[-2])]
    if len(same) == 1:
        return same[0]
    return min(same, key=lambda s: (s[-4:-2] != texts, s[-1] is not None), default=None)


def _where(line: int | None, text: str) -> str:
    return f"line {line}: {text}" if line is not None else text


def _text_hint(notes: list[str], how: str) -> str:
    """For one record typed in again: how its text differs from the stored one ('' when it does not)."""
    return f" ({notes[0].removeprefix('already present; ').removesuffix(' - not changed')}; {how})" if notes else ""


def _repeats(kept_since: Callable[[str, int, str], str], table: str, stored: Sequence[tuple], values: tuple,
             texts: tuple[str, str], machine: str | None, line: int | None, given: str, notes: list[str]) -> bool:
    """Whether a new row repeats a stored record (then it is already present); adds to ``notes``
    what to tell about it: a kept original (``kept_since`` words since when), a technician or note
    that differs."""
    s = _same_record(stored, _ID_AT[table], values, texts, machine)
    if s is None:
        return False
    kept = s[-1]
    if kept is not None or s[-4:-2] != texts:
        diffs = [f"{name} differs: stored {old!r}, {given} {new!r}"
                 for name, old, new in zip(("technician", "note"), s[-4:-2], texts) if old != new]
        text = "already present" + (f" ({kept_since(table, s[_ID_AT[table]], kept)})" if kept else "")
        text += "".join(f"; {d}" for d in diffs)
        text += " - " + ", ".join(what for what, why in (("not added again", kept), ("not changed", diffs)) if why)
        notes.append(_where(line, text))
    return True
