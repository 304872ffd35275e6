"""Messages that carry worker results back to the interface thread."""

from __future__ import annotations

import threading
from typing import TYPE_CHECKING

from textual.message import Message

if TYPE_CHECKING:
    from logbook.model import Fleet, Problem


class DataLoaded(Message):
    """A fresh fleet snapshot and its forecast (``forecast`` is a FleetForecast; ``tests``
    maps serial to its rounds.NextTest)."""

    def __init__(self, fleet: Fleet, forecast, change_count: int, reason: str = "", tests=None) -> None:
        super().__init__()
        self.fleet = fleet
        self.forecast = forecast
        self.tests = tests if tests is not None else {}
        self.change_count = change_count
        self.reason = reason


class FleetRead(Message):
    """The fleet snapshot is read; its forecast is still being computed."""

    def __init__(self, fleet: Fleet) -> None:
        super().__init__()
        self.fleet = fleet


class PumpUpdated(Message):
    """One pump's new forecast after a save (``forecast`` is its PumpForecast, pooled as in
    the fleet view), ahead of the whole fleet's; ``basis`` is the snapshot it replaces;
    ``tests`` (serial -> rounds.NextTest) is every pump's next reading with it."""

    def __init__(self, fleet: Fleet, forecast, basis: Fleet | None, tests=None) -> None:
        super().__init__()
        self.fleet = fleet
        self.forecast = forecast
        self.basis = basis
        self.tests = tests
        self.shown = threading.Event()  # set once the interface has drawn it (or passed it over)


class DataTrouble(Message):
    """Reading the logbook failed; ``text`` says why in words."""

    def __init__(self, text: str) -> None:
        super().__init__()
        self.text = text


class ChangesSeen(Message):
    """The change poll found writes the interface has not loaded yet."""

    def __init__(self, change_count: int) -> None:
        super().__init__()
        self.change_count = change_count


class Checked(Message):
    """A dry run of a form's record against the store: the problems it found."""

    def __init__(self, token: int, problems: list[Problem], text: str = "", doubts=()) -> None:
        super().__init__()
        self.token = token
        self.problems = problems
        self.text = text  # store trouble (locked, ...) rather than problems with the input
        self.doubts = list(doubts)  # logbook.plausible.Doubt: values that look wrong (asked, not refused)


class Doubted(Message):
    """A save stopped at values that look wrong: the form asks to confirm them."""

    def __init__(self, record, doubts) -> None:
        super().__init__()
        self.record = record
        self.doubts = list(doubts)


class Saved(Message):
    """A record was written; ``record`` is what the store returned."""

    def __init__(self, record) -> None:
        super().__init__()
        self.record = record


class Rejected(Message):
    """A write was refused; nothing was written."""

    def __init__(self, problems: list[Problem], text: str = "") -> None:
        super().__init__()
        self.problems = problems
        self.text = text
