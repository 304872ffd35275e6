"""Command line: parse arguments, open the store, dispatch to a command module.

Each command lives in ``logbook/commands/<name>.py`` with ``register(subparsers)``
(adding a parser whose default ``func`` is its ``run(args, ctx) -> int``).
"""

from __future__ import annotations

import argparse
import importlib
import os
import re
import sys
from dataclasses import dataclass, field
from datetime import date
from pathlib import Path
from sqlite3 import DatabaseError as SQLiteError  # as logbook.store names it (not imported here)

from rich.console import Console

from logbook.units import UnitPrefs

COMMAND_MODULES = (
    "init",
    "demo",
    "pumps",
    "show",
    "record",
    "event",
    "importing",
    "model",
    "forecast",
    "round",
    "history",
    "backup",
    "check",
    "correct",
    "remove",
    "costs",
    "backtest",
    "export",
)


def default_db_path() -> Path:
    """``$LOGBOOK_DB``, else logbook.db in the user's data directory."""
    env = os.environ.get("LOGBOOK_DB")
    if env:
        return Path(env)
    from platformdirs import user_data_dir

    return Path(user_data_dir("logbook", appauthor=False)) / "logbook.db"


class TextConsole(Console):
    """The commands' console: a plain string it prints (a message, a table cell) shows its
    control characters as escapes (``fmt.visible``), so that a file name or a name quoted
    in a message cannot drive the terminal. Text that may hold markup-like brackets goes
    in as ``fmt.text`` (never read as markup) or with ``markup=False``."""

    def render_str(self, text: str, **kwargs):
        if not text.isprintable():
            from logbook.fmt import visible  # not before a command needs it (the fleet view starts light)

            text = "\n".join(visible(line) for line in text.split("\n"))
        return super().render_str(text, **kwargs)


def _stdout_width() -> int | None:
    """The terminal's width, or $COLUMNS when set (rich reads it); 160 for a pipe or file."""
    columns = os.environ.get("COLUMNS", "")
    return None if sys.stdout.isatty() or columns.isdigit() else 160


@dataclass
class Context:
    """What every command gets: where the database is, who is acting, today, output."""

    db_path: Path
    user: str | None
    today: date
    units: UnitPrefs
    as_of: date | None = None  # --as-of: read the fleet as the logbook knew it on this day (logbook.asof)
    console: Console = field(default_factory=lambda: TextConsole(highlight=False, width=_stdout_width()))
    # Not a terminal (cron, a log file): lines are never broken (a log line stays one line).
    err: Console = field(default_factory=lambda: TextConsole(stderr=True, highlight=False, soft_wrap=not sys.stderr.isatty()))
    stores: list = field(default_factory=list)  # every store opened, to tell what was saved when a run stops

    def open_store(self, *, create: bool = False):
        from logbook.store import Store

        store = Store(self.db_path, create=create, user=self.user)
        self.stores.append(store)
        return store

    def read_fleet(self, store):
        """The fleet the read commands work on: everything now, or with --as-of what stood on that day."""
        return store.fleet() if self.as_of is None else store.fleet_as_of(self.as_of)

    def as_of_note(self, store, fleet) -> str | None:
        """With --as-of, when the fleet of that day (``fleet``) holds no reading: that nothing (or
        no reading) was recorded by then, and the first day that has one; else None."""
        if self.as_of is None or len(fleet.readings):
            return None
        whole = store.fleet()
        day = self.as_of.isoformat()
        readings = [r.taken_on for r in whole.readings]
        first_reading = f"the first reading is dated {min(readings).isoformat()}" if readings else "no reading is recorded"
        if fleet.fitments or fleet.events:
            return f"--as-of {day}: no reading was recorded by then; {first_reading}"
        dated = sorted([*((f.fitted_on, "a pump fitted") for f in whole.fitments),
                        *((e.happened_on, f"an event ({e.kind.value})") for e in whole.events)])
        if not dated and not readings:
            return f"--as-of {day}: nothing is recorded in this logbook yet"
        if not dated or (readings and min(readings) <= dated[0][0]):
            return f"--as-of {day}: nothing was recorded by then; {first_reading}"
        on, what = dated[0]
        return f"--as-of {day}: nothing was recorded by then; the first record is {what} on {on.isoformat()}, {first_reading}"


def whole_number(text: str) -> int:
    """argparse type of every integer option: ASCII digits 0-9 and an optional minus, as
    ``validate.whole_number`` reads them (int() would take 4_2 and Unicode digits)."""
    from logbook.validate import whole_number as parse

    value = parse(text)
    if value is None:
        from logbook.model import echo

        raise argparse.ArgumentTypeError(f"{echo(text)} is not a whole number: write it with the digits 0-9, e.g. 6")
    return value


def iso_day(text: str) -> date:
    """argparse type of a date option: YYYY-MM-DD exactly (``validate.iso_date``)."""
    from logbook.validate import iso_date

    value = iso_date(text)
    if value is None:
        from logbook.model import echo

        raise argparse.ArgumentTypeError(f"{echo(text)} is not a date written YYYY-MM-DD, e.g. 2026-03-14")
    return value


_LONG_RUN = re.compile(r"\S{70,}")
#: A minus, an optional decimal point or comma, then a digit: a negative number as typed (units.py,
#: validate.parse_quantity read the rest), not an option.
NEGATIVE_VALUE = re.compile(r"^-[.,]?[0-9]")


class Parser(argparse.ArgumentParser):
    """The program's argument parser, also for every command (``add_subparsers`` makes
    its subparsers of the parser's own class):

    - no abbreviated options: ``--servo-pressur`` is an error, not ``--servo-pressure``
      (a typo would otherwise land in whichever option it happens to begin);
    - ``type=int`` means ``whole_number`` (int() reads "4_2" as 42, and Unicode digits);
    - a word that starts with a minus and a digit is a value, never an option: ``-2,5``,
      ``-1,234.5``, ``-2.5bar`` and ``-.5`` as well as ``-2.5`` (argparse alone takes only
      ``-2`` and ``-2.5``; no option of the program starts with a digit);
    - a long value quoted in an error message is cut as ``model.echo`` cuts it."""

    def __init__(self, *args, **kwargs):
        kwargs["allow_abbrev"] = False
        super().__init__(*args, **kwargs)
        self._negative_number_matcher = NEGATIVE_VALUE  # read by argparse's _parse_optional
        self.register("type", int, whole_number)  # argparse looks each type up here (groups share it)

    def error(self, message: str):
        from logbook.model import ECHO_LIMIT

        def cut(m: re.Match) -> str:
            return f"{m[0][:ECHO_LIMIT]}... ({len(m[0])} characters)"

        super().error(_LONG_RUN.sub(cut, message))


def build_parser() -> argparse.ArgumentParser:
    parser = Parser(
        prog="logbook",
        description="Maintenance logbook for servo-controlled axial piston pumps: readings, wear trends, overhaul plans. "
        "Run without a command to open the fleet view.",
    )
    _add_global_options(parser, suppress=False)
    parser.add_argument("--version", action="version", version=f"logbook {_version()}")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for name in COMMAND_MODULES:
        try:
            module = importlib.import_module(f"logbook.commands.{name}")
        except ModuleNotFoundError as exc:
            if exc.name == f"logbook.commands.{name}":
                continue  # not written yet
            raise
        module.register(sub)
    # Global options are accepted after the command too: `logbook demo --db X`.
    for command_parser in sub.choices.values():
        _add_global_options(command_parser, suppress=True)
    return parser


def _version() -> str:
    from logbook import __version__

    return __version__


def _add_global_options(parser: argparse.ArgumentParser, *, suppress: bool) -> None:
    def default(value):
        return argparse.SUPPRESS if suppress else value

    parser.add_argument("--db", type=Path, default=default(None),
                        help="database file (default: $LOGBOOK_DB or the user data directory)")
    parser.add_argument("--as", dest="user", default=default(None), metavar="NAME",
                        help="record changes under this name (default: your login)")
    parser.add_argument("--units", choices=("metric", "us"), default=default(os.environ.get("LOGBOOK_UNITS", "metric")),
                        help="units to show and to read bare numbers in: metric (bar, L/min, C) or us (psi, gpm, F)")
    parser.add_argument("--today", type=iso_day, default=default(None), help=argparse.SUPPRESS)
    parser.add_argument("--as-of", dest="as_of", type=iso_day, default=default(None), metavar="YYYY-MM-DD",
                        help="forecast, pumps, show, round and the fleet view see only what the logbook "
                        "knew on this day (readings and events dated on or before it, corrections and removals "
                        "entered by then); read-only")


#: Commands that read the fleet and take --as-of (the fleet view too: no command).
AS_OF_COMMANDS = frozenset({None, "forecast", "pumps", "show", "round"})


def _as_of_problem(args, real_today: date) -> str | None:
    """--as-of with a command that writes, or a day after today: what is wrong, else None."""
    as_of = getattr(args, "as_of", None)
    if as_of is None:
        return None
    if args.command not in AS_OF_COMMANDS:
        allowed = ", ".join(sorted(c for c in AS_OF_COMMANDS if c)) + " and the fleet view (no command)"
        return f"--as-of = {as_of.isoformat()}: not with `{args.command}`; allowed with {allowed}"
    if as_of > real_today:
        return f"--as-of = {as_of.isoformat()}: a day after today ({real_today.isoformat()}); allowed: today or earlier"
    return None


def _options_only(argv: list[str] | None) -> argparse.Namespace | None:
    """The global options when ``argv`` holds nothing else (no command: the fleet view),
    parsed without importing every command module; None when there is more to parse."""
    quick = Parser(prog="logbook", add_help=False, exit_on_error=False)
    _add_global_options(quick, suppress=False)
    try:
        args, rest = quick.parse_known_args(argv)
    except argparse.ArgumentError:
        return None  # the full parser says what is wrong
    if rest:
        return None
    args.command = None
    return args


def main(argv: list[str] | None = None) -> int:
    args = _options_only(argv)
    if args is None:
        args = build_parser().parse_args(argv)
    real_today = args.today or date.today()
    as_of = getattr(args, "as_of", None)
    ctx = Context(
        db_path=args.db if args.db is not None else default_db_path(),
        user=args.user,
        today=as_of or real_today,
        units=UnitPrefs.us() if args.units == "us" else UnitPrefs(),
        as_of=as_of,
    )
    problem = _as_of_problem(args, real_today)
    if problem:
        ctx.err.print(f"logbook: {problem}", markup=False, soft_wrap=True)
        return 2
    try:
        if args.command is None:
            from logbook.tui.launch import run  # not via logbook.commands: light until the frame

            return run(args, ctx)
        return int(args.func(args, ctx) or 0)
    except SQLiteError as exc:  # a read that failed (writes raise StoreError): damaged, read-only, disk full...
        from logbook.store import explain

        told, saved = explain(exc, ctx.db_path), _saved(ctx)
        ctx.err.print(f"logbook: {told}" if told else f"logbook: the database {ctx.db_path} failed: {exc}. "
                      f"{f'Before that, {saved}' if saved else 'Nothing was written'}; `logbook check` tells more.",
                      markup=False)
        return 1
    except KeyboardInterrupt:
        saved = _saved(ctx)
        ctx.err.print(f"interrupted after {saved}" if saved else "interrupted before saving: nothing was written",
                      markup=False)
        return 130
    except BrokenPipeError:
        return 0
    except Exception as exc:
        if _raised_as(exc, "logbook.model", "InputRejected"):
            ctx.err.print("[bold]Not recorded[/bold] - nothing was written:")
            for problem in exc.problems:
                ctx.err.print(f"  - {problem}", markup=False)
            return 2
        if _raised_as(exc, "logbook.store.core", "StoreError"):  # missing, locked, too new...
            ctx.err.print(f"logbook: {exc}", markup=False)
            return 1
        raise


def _saved(ctx: Context) -> str | None:
    """What this run committed, in every store it opened ("the import was saved: 3
    rows are in (r.csv)"); None when it wrote nothing."""
    saved = [commit.describe() for store in ctx.stores for commit in store.commits]
    return "; ".join(saved) or None


def _raised_as(exc: Exception, module: str, name: str) -> bool:
    """``isinstance(exc, module.name)`` without importing ``module``: an exception of it
    can only have been raised once it was imported. (The no-command path imports neither
    the model nor the store before the fleet view's first frame.)"""
    loaded = sys.modules.get(module)
    return loaded is not None and isinstance(exc, getattr(loaded, name))


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
