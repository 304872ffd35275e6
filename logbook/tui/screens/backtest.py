"""How past forecasts did: the backtest summary per pump model (``b`` in the fleet view), and the
line on the pump view that says how this pump's past forecasts did.

Both run ``analysis.backtest.run_backtest`` in a thread worker over the store's history (the
fleet forecast as of monthly origins, scored on the later record) and show what it computed;
a result is kept per (model, data version) so that a second look is immediate.
"""

from __future__ import annotations

from dataclasses import replace

from textual import work
from textual.app import ComposeResult
from textual.binding import Binding
from textual.message import Message
from textual.screen import Screen
from textual.widgets import DataTable, Static

from logbook.tui.widgets.plain import Plain
from logbook.tui.widgets.keybar import KeyBar

TABLE = (("readings", "Later readings"), ("below_p10", "<P10"), ("above_p90", ">P90"), ("p50_error", "P50 err"),
         ("crossings", "Crossed"), ("km_before_p10", "KM<P10"), ("km_after_p90", "KM>P90"))


class BacktestDone(Message):
    """A backtest finished (``result``), or failed (``trouble``)."""

    def __init__(self, key, result=None, trouble: str = "") -> None:
        super().__init__()
        self.key, self.result, self.trouble = key, result, trouble


class BacktestStep(Message):
    def __init__(self, text: str) -> None:
        super().__init__()
        self.text = text


def cached(app, model: str | None):
    """The kept result for ``model`` (None: the whole fleet) at the data shown now, or None."""
    key = _key(app, model)
    return getattr(app, "backtests", {}).get(key) if key is not None else None


def _key(app, model):
    fleet = getattr(app, "fleet", None)
    return None if fleet is None else (model, fleet.change_count, getattr(app, "as_of", None))


def compute(app, model: str | None, step=None):
    """Read the history and run the backtest as ``logbook backtest`` does with its defaults (as of
    ``app.as_of`` when set); for one model only its pumps are forecast (pooling never crosses models)."""
    from logbook.analysis.backtest import default_span, origin_dates, run_backtest
    from logbook.asof import fleet_as_of

    with app.gate.open() as store:
        history, known = store.fleet_history()
        now = store.fleet()
    if app.as_of is not None:
        now = fleet_as_of(history, known, app.as_of)
    if model is not None:
        now = replace(now, pumps={s: p for s, p in now.pumps.items() if p.model == model})
        history = replace(history, pumps=now.pumps)
    span = default_span(now, app.today)
    origins = origin_dates(*span, 1, "months") if span else []
    return run_backtest(now, history, known, origins, model=model, step=step)


class BacktestScreen(Screen):
    """A plain table of the backtest per pump model, with the PIT histogram and plan misses under it."""

    HELP_TITLE = "How past forecasts did"
    DEFAULT_CSS = """
    BacktestScreen #backtest-table { height: auto; max-height: 12; }
    BacktestScreen #backtest-notes { height: auto; padding: 0 1; }
    """
    BINDINGS = [Binding("escape", "back", "Back", tooltip="back to the fleet view", id="backtest.back")]

    def compose(self) -> ComposeResult:
        yield Static("How past forecasts did: as of past months, scored on what came later", id="title")
        yield Plain("Forecasting the fleet as of past dates…", id="backtest-status")
        yield DataTable(id="backtest-table", cursor_type="row", zebra_stripes=True)
        yield Plain("", id="backtest-notes")
        yield KeyBar()

    def on_mount(self) -> None:
        table = self.query_one("#backtest-table", DataTable)
        table.add_column("Model", key="model")
        for key, label in TABLE:
            table.add_column(label, key=key)
        table.focus()
        result = cached(self.app, None)
        if result is not None:
            self.show(result)
        else:
            self.run_backtest(_key(self.app, None))

    @work(thread=True, exclusive=True, group="backtest")
    def run_backtest(self, key) -> None:
        from logbook.tui.gate import trouble_text

        try:
            result = compute(self.app, None, step=lambda day: self.post_message(
                BacktestStep(f"Forecasting the fleet as of {day.isoformat()}…")))
        except Exception as exc:  # shown to the person, never a traceback
            self.post_message(BacktestDone(key, trouble=trouble_text(exc)))
            return
        self.post_message(BacktestDone(key, result))

    def on_backtest_step(self, message: BacktestStep) -> None:
        self.query_one("#backtest-status", Static).update(message.text)

    def on_backtest_done(self, message: BacktestDone) -> None:
        if message.result is None:
            self.query_one("#backtest-status", Static).update(f"Cannot run the backtest: {message.trouble}")
            return
        if message.key is not None:
            if not hasattr(self.app, "backtests"):
                self.app.backtests = {}
            self.app.backtests[message.key] = message.result
        self.show(message.result)

    def show(self, result) -> None:
        from logbook.exports.backtest_report import cell, headline, pit_line

        table = self.query_one("#backtest-table", DataTable)
        table.clear()
        for label, f in [("all", result.overall), *result.groups["model"].items()]:
            table.add_row(label, *("-" if k == "km_before_p10" and not f.crossings else cell(k, getattr(f, k))
                                   for k, _ in TABLE), key=label)  # no crossing: no share before P10
        self.query_one("#backtest-status", Static).update(headline(result))
        self.query_one("#backtest-notes", Static).update("\n".join((
            "<P10, >P90: share of later readings below / above the forecast's 10 % / 90 % quantile; "
            "KM<P10, KM>P90: crossings before P10 / after P90 (Kaplan-Meier, with pumps not crossed yet). "
            "Calibrated: 0.10 each.",
            f"PIT histogram (flat when calibrated): {pit_line(result.overall)}",
            f"Plan misses: {len(result.misses)}; overhauled with much life left: {len(result.early)}. "
            "All figures and plots: logbook backtest --format html.",
        )))

    def action_back(self) -> None:
        self.app.pop_screen()


def pump_words(result, serial: str) -> str:
    """One or two lines: how the past forecasts of pump ``serial`` did in ``result``."""
    from logbook.exports.backtest_report import cell

    f = result.pumps.get(serial)
    if f is None or not f.readings:
        return "Past forecasts of this pump: none to score yet (no readings after an earlier forecast)."
    crossed = (f"; limit crossed before P10 seen from {f.before_p10}, inside P10-P90 from {f.inside}"
               if f.crossings else "")
    return (f"Past forecasts ({len(result.origins)} origins): {f.readings:,} later readings, "
            f"{cell('', f.below_p10)} below P10, {cell('', f.above_p90)} above P90 (0.10 when calibrated), "
            f"P50 error {cell('', f.p50_error)}{crossed}.")


class PastForecasts(Plain):
    """The pump view's line on how this pump's past forecasts did; ``score()`` runs the backtest of
    its model when no result is kept yet."""

    DEFAULT_CSS = "PastForecasts { height: auto; padding: 0 1; }"
    HINT = "Past forecasts of this pump: b scores them (the backtest of its model)."

    def __init__(self, serial: str, **kwargs) -> None:
        super().__init__(self.HINT, **kwargs)
        self.serial = serial

    def on_mount(self) -> None:
        self.refresh_words()

    def refresh_words(self) -> None:
        model = self._model()
        result = cached(self.app, None) or (cached(self.app, model) if model else None)
        self.update(pump_words(result, self.serial) if result is not None else self.HINT)

    def _model(self) -> str | None:
        fleet = self.app.fleet
        return fleet.pumps[self.serial].model if fleet is not None and self.serial in fleet.pumps else None

    def score(self) -> None:
        model = self._model()
        if model is None or cached(self.app, None) or cached(self.app, model):
            self.refresh_words()
            return
        self.update("Past forecasts of this pump: forecasting its model as of past months…")
        self._run(model, _key(self.app, model))

    @work(thread=True, exclusive=True, group="past-forecasts")
    def _run(self, model: str, key) -> None:
        from logbook.tui.gate import trouble_text

        try:
            result = compute(self.app, model)
        except Exception as exc:
            self.post_message(BacktestDone(key, trouble=trouble_text(exc)))
            return
        self.post_message(BacktestDone(key, result))

    def on_backtest_done(self, message: BacktestDone) -> None:
        message.stop()
        if message.result is None:
            self.update(f"Past forecasts of this pump: cannot score them ({message.trouble}).")
            return
        if not hasattr(self.app, "backtests"):
            self.app.backtests = {}
        self.app.backtests[message.key] = message.result
        self.refresh_words()
