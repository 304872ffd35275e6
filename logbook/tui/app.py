"""The logbook's terminal interface.

Run it with ``logbook`` (or ``logbook --db FILE``): the CLI hands ``make_app`` a
``StoreOpener`` so that the fleet view's first frame paints before the store and the
analysis (sqlite_utils, pandas, numpy, scipy) are imported; a thread worker then opens
the store, lists the pumps and forecasts them. Tests build it with
``make_app(store, today=..., units=...)`` over an open Store and drive it with
``App.run_test``. The app keeps the latest snapshot and forecast in ``fleet``/``forecast``,
each pump's next reading (``rounds.next_tests``, refreshed with the forecast) in ``tests``,
and bumps ``data_generation`` so that open screens redraw. After a save the saved pump's
forecast comes first (``forecast_in_fleet``), the whole fleet's after it. A poll of
``store.change_count()`` notices other users' writes.
"""

from __future__ import annotations

import bisect
from dataclasses import replace
from datetime import date
from pathlib import Path
from typing import TYPE_CHECKING

from textual import work
from textual.app import App
from textual.binding import Binding
from textual.message import Message
from textual.reactive import reactive
from textual.worker import get_current_worker

from logbook.tui.gate import StoreGate, trouble_text
from logbook.tui.messages import ChangesSeen, DataLoaded, DataTrouble, FleetRead, PumpUpdated
from logbook.units import UnitPrefs

if TYPE_CHECKING:  # the model is imported by the first load, after the first frame
    from logbook.model import Fleet, Reading

DARK_THEMES = {"textual-dark": "textual-light", "ansi-dark": "ansi-light"}
LIGHT_THEMES = {v: k for k, v in DARK_THEMES.items()}


class MoneyLoaded(Message):
    """The costs weighed on a forecast (costing.FleetMoney) and the plan the fleet view's cost
    column shows (the stored plan settings from this month on, least expected cost)."""

    def __init__(self, forecast, money, plan) -> None:
        super().__init__()
        self.forecast = forecast
        self.money = money
        self.plan = plan


class LogbookApp(App):
    """Fleet view first; pump, entry, model, plan and help screens on top of it."""

    CSS_PATH = Path(__file__).parent / "app.tcss"  # absolute: subclasses elsewhere find it too
    TITLE = "logbook"
    ENABLE_COMMAND_PALETTE = False
    BINDINGS = [
        Binding("f1", "help", "Help", key_display="F1", tooltip="this list of keys", id="app.help"),
        Binding("question_mark", "help", "Help", show=False, tooltip="this list of keys", id="app.help_question"),
        Binding("f5", "reload", "Reload", show=False, key_display="F5", tooltip="read the logbook and forecast again",
                id="app.reload"),
        Binding("t", "toggle_theme", "Theme", tooltip="switch between the light and the dark theme", id="app.theme"),
        Binding("q", "quit", "Quit", tooltip="leave logbook (not on entry forms: Esc leaves those)", id="app.quit"),
    ]

    #: Bumped each time a new fleet snapshot and forecast arrive.
    data_generation: reactive[int] = reactive(0)

    def __init__(self, store, *, today: date, units: UnitPrefs | None = None, poll_seconds: float = 3.0,
                 light: bool = False, blink: bool = True, export_dir=None, as_of: date | None = None) -> None:
        super().__init__()
        self.gate = StoreGate(store)  # an open Store, or a StoreOpener used by the first load
        self.as_of = as_of  # --as-of: the logbook as it stood on that day, read-only (logbook.asof)
        self.today = as_of or today
        self.units = units or UnitPrefs()
        self.poll_seconds = poll_seconds
        self.fleet: Fleet | None = None
        self.forecast = None  # FleetForecast once loaded
        self.tests: dict | None = None  # serial -> rounds.NextTest, computed with the forecast
        self.money = None  # costing.FleetMoney for the forecast shown, once weighed (after the forecast)
        self.month_costs: dict[str, float] = {}  # serial -> expected cost of its month in the plan (costs set)
        self.seen_changes: int | None = None
        self.trouble: str = ""
        self.refreshing = False  # a saved pump's forecast is shown; the rest of the fleet's is coming
        sixteen = self.console.color_system in (None, "standard")
        dark, light_theme = ("ansi-dark", "ansi-light") if sixteen else ("textual-dark", "textual-light")
        self.theme = light_theme if light else dark
        self.export_dir = export_dir  # where the plan export goes (default: the working directory)
        self.blink = blink  # text cursor blinking (off in tests and snapshots)

    @property
    def user(self) -> str:
        """Who is signed in: ``--as NAME``, else the login name, found as every command's
        store finds it (``store.core.default_user``: what `logbook record` records as)."""
        source = self.gate.store if self.gate.store is not None else self.gate.opener
        named = getattr(source, "user", None)
        if named:
            return named
        from logbook.store.core import default_user

        return default_user()

    @property
    def store(self):
        """The open Store (None until the first load has opened it)."""
        return self.gate.store

    # -- start -----------------------------------------------------------------------
    def get_default_screen(self):
        from logbook.tui.screens.fleet import FleetScreen

        return FleetScreen()

    def on_mount(self) -> None:
        self.screen.call_after_refresh(self._start_when_drawn)
        if self.poll_seconds > 0:
            self.set_interval(self.poll_seconds, self.poll_changes)

    def _start_when_drawn(self, frames: int = 0) -> None:
        """Open, read and forecast once the fleet view's first frame is on screen, footer
        keys included (Textual fills the footer a frame after the rest): the worker's
        imports and reads would otherwise hold that frame back."""
        if frames < 10 and not self.screen.query("FooterKey"):
            self.screen.call_after_refresh(self._start_when_drawn, frames + 1)
            return
        self.screen.call_after_refresh(self.load_data, "start")

    # -- data ------------------------------------------------------------------------
    @work(thread=True, exclusive=True, group="load")
    def load_data(self, reason: str = "", saved=None, basis: Fleet | None = None) -> None:
        """Read a consistent snapshot (under the store lock) and forecast it (outside).

        After a save (``saved``: the record the store returned, ``basis``: the snapshot
        shown when it was saved) the saved pump's forecast is posted first, then the whole
        fleet's (pooling and machine hours reach other pumps too). For a reading both come
        from ``basis`` plus that reading, and the store is not read again when nothing but
        that reading was written since ``basis`` (its change count rose by exactly one)."""
        from logbook.model import Reading

        worker = get_current_worker()
        serial = getattr(saved, "serial", None)
        try:
            quick = basis is not None and self.forecast is not None and serial in getattr(basis, "pumps", {})
            fleet = None
            if quick and isinstance(saved, Reading) and saved.id is not None:
                fleet = with_reading(basis, saved)
                self._post_pump(fleet, serial, basis, worker)
                quick = False
            with self.gate.open() as store:  # opens the store on the first load
                if fleet is None and self.fleet is None and self.as_of is None:
                    self._post_equipment(store)
                count = store.change_count()
                if fleet is None or count != basis.change_count + 1:  # someone else wrote too: read it all
                    fleet = store.fleet() if self.as_of is None else store.fleet_as_of(self.as_of)
                    count = fleet.change_count
                else:
                    fleet = replace(fleet, change_count=count)
                book, setup = store.costs(), store.plan_setup()
            if worker.is_cancelled:
                return
            if self.forecast is None:
                self.post_message(FleetRead(fleet))  # pumps can be listed while the forecast runs
            if quick and serial in fleet.pumps:
                self._post_pump(fleet, serial, basis, worker)
            from logbook.analysis.fleet import forecast_fleet

            forecast = forecast_fleet(fleet, today=self.today)
            from logbook.rounds import next_tests

            tests = next_tests(fleet, forecast, self.today)
        except Exception as exc:  # shown to the person, never a traceback
            if not worker.is_cancelled:
                self.post_message(DataTrouble(trouble_text(exc)))
            return
        if worker.is_cancelled:
            return
        self.post_message(DataLoaded(fleet, forecast, count, reason, tests))
        try:  # the money after the forecast is on screen: weighing and the least-cost plan take a moment
            from logbook.costing import fleet_money
            from logbook.plan import add_months, make_plan, month_start

            settings = setup.settings(month_start(self.today))  # the plan screen's stored settings
            end = add_months(settings.start_month, settings.horizon_months)
            money = fleet_money(book, fleet, forecast, (end - self.today).days)
            plan = make_plan(forecast, settings, money.costs) if money.costs is not None else None
        except Exception as exc:
            if not worker.is_cancelled:
                self.post_message(DataTrouble(trouble_text(exc)))
            return
        if not worker.is_cancelled:
            self.post_message(MoneyLoaded(forecast, money, plan))

    def on_money_loaded(self, message: MoneyLoaded) -> None:
        if message.forecast is not self.forecast:
            return  # a newer forecast is shown; its own money follows
        self.money = message.money
        self.month_costs = {line.serial: line.expected_cost for line in message.plan.lines
                            if line.expected_cost is not None} if message.plan is not None else {}
        self.data_generation += 1

    def _post_equipment(self, store) -> None:
        """The pumps, machines and fitments alone (a small read, without readings and events),
        so that the fleet view lists the pumps in service while the whole snapshot is read
        and forecast; the whole snapshot replaces it when read."""
        from logbook.model import Fleet

        self.post_message(FleetRead(Fleet(models=store.models(), machines=store.machines(), pumps=store.pumps(),
                                          fitments=tuple(store.fitments()), readings=(), events=(),
                                          source=store.path)))

    def _post_pump(self, fleet: Fleet, serial: str, basis: Fleet, worker) -> None:
        """Forecast one pump pooled with its model's pumps, as the fleet view would, and
        wait (a moment at most) until it is on screen: the read that follows would
        otherwise compete with the redraw for the interpreter."""
        from logbook.analysis.fleet import forecast_in_fleet

        from logbook.rounds import next_tests

        forecast = forecast_in_fleet(fleet, serial, self.today)
        shown = self.forecast  # the other pumps' forecasts stay as shown until the fleet's arrive
        tests = next_tests(fleet, with_pump(shown, forecast), self.today) if shown is not None else None
        if not worker.is_cancelled:
            message = PumpUpdated(fleet, forecast, basis, tests)
            self.post_message(message)
            message.shown.wait(timeout=2.0)

    def on_pump_updated(self, message: PumpUpdated) -> None:
        if self.forecast is None or self.fleet is not message.basis:
            message.shown.set()
            return  # the first forecast is still coming, or a newer snapshot is shown already
        self.call_after_refresh(message.shown.set)
        self.fleet, self.forecast = message.fleet, with_pump(self.forecast, message.forecast)
        if message.tests is not None:
            self.tests = message.tests
        self.refreshing = True
        self.data_generation += 1

    def on_data_loaded(self, message: DataLoaded) -> None:
        self.fleet, self.forecast, self.tests = message.fleet, message.forecast, message.tests
        self.seen_changes = message.change_count
        self.trouble = ""
        self.refreshing = False
        self.data_generation += 1
        if message.reason == "others":
            self.notify("The logbook was changed by someone else; the views are up to date again.", timeout=4)

    def on_fleet_read(self, message: FleetRead) -> None:
        if self.forecast is None:
            self.fleet = message.fleet
            self.data_generation += 1

    def on_data_trouble(self, message: DataTrouble) -> None:
        self.trouble = message.text
        self.refreshing = False
        self.data_generation += 1  # screens show the trouble line
        from logbook.fmt import visible  # a message can quote a file name: shown as typed, never as markup

        self.notify(visible(message.text), title="Cannot read the logbook", severity="error", timeout=8, markup=False)

    def reload(self, reason: str = "", saved=None) -> None:
        """Read and forecast again; ``saved`` (a record just written) gets its pump's forecast first."""
        self.load_data(reason, saved, self.fleet if saved is not None else None)

    @work(thread=True, exclusive=True, group="poll")
    def poll_changes(self) -> None:
        """Compare the store's change count with the loaded one; never waits for the lock."""
        held = self.gate.try_open()
        if held is None:
            return
        try:
            with held as store:
                count = store.change_count()
        except Exception as exc:
            self.post_message(DataTrouble(trouble_text(exc)))
            return
        if self.seen_changes is not None and count != self.seen_changes:
            self.post_message(ChangesSeen(count))

    def on_changes_seen(self, message: ChangesSeen) -> None:
        running = [w for w in self.workers if w.group == "load" and w.is_running]
        if not running and message.change_count != self.seen_changes:
            self.seen_changes = message.change_count
            self.load_data("others")

    # -- lookups for screens ---------------------------------------------------------------
    def pump_forecast(self, serial: str):
        return self.forecast.pump(serial) if self.forecast is not None else None

    def next_test(self, serial: str):
        """The pump's rounds.NextTest (None while computed, or when it is not fitted)."""
        return self.tests.get(serial) if self.tests is not None else None

    # -- actions -----------------------------------------------------------------------
    def check_action(self, action: str, parameters) -> bool | None:
        """No quitting from an entry form with one key: Esc leaves the form first."""
        if action in ("quit", "toggle_theme"):  # a stray letter on a form must not quit or restyle
            return not getattr(self.screen, "HOLDS_INPUT", False)
        return True

    def push_screen(self, screen, *args, **kwargs):
        """As of a past day (--as-of) nothing is recorded: the entry forms and the round stay shut."""
        if self.as_of is not None and not isinstance(screen, str):
            from logbook.tui.screens.entry import EntryScreen
            from logbook.tui.screens.round import RoundScreen

            if isinstance(screen, (EntryScreen, RoundScreen)):
                self.say_read_only()
                return None
        return super().push_screen(screen, *args, **kwargs)

    def read_only_key(self, screen, event) -> bool:
        """A key of ``screen`` that records something (its ``WRITING_ACTIONS``), pressed in the
        view of a past day: its binding is off there (not on the key bar), so say why
        nothing happens and take the key. True when it was one."""
        if self.as_of is None:
            return False
        writing = getattr(screen, "WRITING_ACTIONS", ())
        if event.key not in {b.key for b in screen.BINDINGS if b.action in writing}:
            return False
        self.say_read_only()
        event.stop()
        return True

    def say_read_only(self) -> None:
        self.notify(f"The logbook as of {self.as_of.isoformat()} (--as-of) is read-only: nothing is recorded "
                    "here. Start logbook without --as-of to record.", timeout=6, markup=False)

    def action_help(self) -> None:
        from logbook.tui.screens.help import HelpScreen

        if not isinstance(self.screen, HelpScreen):
            self.push_screen(HelpScreen(self.screen))

    def action_reload(self) -> None:
        self.load_data("asked")

    def action_toggle_theme(self) -> None:
        self.theme = DARK_THEMES.get(self.theme) or LIGHT_THEMES.get(self.theme) or "textual-dark"


def with_pump(forecast, pump_forecast):
    """A FleetForecast with one pump's forecast put in place of (or beside) the one it had."""
    serial = pump_forecast.serial
    pumps = [pump_forecast if p.serial == serial else p for p in forecast.pumps]
    if all(p.serial != serial for p in forecast.pumps):
        pumps.append(pump_forecast)
    return replace(forecast, pumps=tuple(pumps))


def with_reading(fleet: Fleet, reading: Reading) -> Fleet:
    """``fleet`` plus a reading the store has just saved (its id and machine set by the
    store), in the store's reading order, so that it equals a fresh read when nothing
    else changed. Keeps ``change_count``: the result is no snapshot of the store."""
    if any(r.id == reading.id for r in fleet.readings):
        return fleet
    readings = list(fleet.readings)
    bisect.insort(readings, reading, key=lambda r: (r.taken_on, r.machine_hours, r.id or 0))
    return replace(fleet, readings=tuple(readings))


def make_app(store, *, today: date, units: UnitPrefs | None = None, **options) -> LogbookApp:
    """Build the interface over an open Store (tests pass a temp-file or in-memory one) or
    over a ``StoreOpener`` (the CLI: the store is opened after the first frame)."""
    return LogbookApp(store, today=today, units=units, **options)
