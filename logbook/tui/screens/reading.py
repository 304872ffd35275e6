"""Reading entry: a form prefilled from the pump, checked by the store as you type,
with the safety warning on screen (F6: the whole safety list), a comparison with the
limit and the previous reading on save, and a quick way on to the next pump of the round."""

from __future__ import annotations

from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Container, VerticalScroll
from textual.widgets import Static

from logbook import fmt
from logbook.model import ALL_KINDS, Problem, Reading
from logbook.tui import forms, present
from logbook.tui.screens.entry import EntryScreen
from logbook.tui.widgets.plain import Plain
from logbook.tui.widgets.safety import SAFETY_BINDING, SafetyBox, SafetyKey
from logbook.tui.widgets.keybar import KeyBar


class ReadingScreen(SafetyKey, EntryScreen):
    """``following``: the serials after this one in the fleet view (the round's order)."""

    HELP_TITLE = "Reading entry"
    BINDINGS = [
        Binding("f3", "save_next", "Save+next", key_display="F3", tooltip="save, then the next pump of the round",
                id="reading.save_next"),
        Binding("f4", "next_pump", "Skip pump", key_display="F4", tooltip="the next pump without saving this one",
                id="reading.skip"),
        SAFETY_BINDING,
    ]

    def __init__(self, serial: str, following: list[str] | None = None) -> None:
        super().__init__()
        self.serial = serial
        self.following = list(following or [])
        self._go_next_after_save = False
        self._pending: dict | None = None  # saved reading waiting for its new forecast

    def compose(self) -> ComposeResult:
        yield Plain("", id="title")
        yield Plain("", id="saved-line")  # outside the form: never scrolled out of sight, even in part
        with VerticalScroll(classes="form", id="form"):
            yield Plain("", id="pump-line", classes="form-hint")
            with Container(classes="fields"):
                for d in self.field_defs():
                    yield self.make_field(d)
            yield Plain("Fill in what you measured; the logbook checks it as you type.", id="check")
            yield Plain("", id="result")
            yield SafetyBox()
        yield KeyBar()

    def field_defs(self):
        return forms.reading_fields(self.app.units, self.app.today)

    def on_mount(self) -> None:
        self.watch(self.app, "data_generation", self._forecast_arrived, init=False)
        self.load_pump(self.serial)

    def load_pump(self, serial: str) -> None:
        """Show the form for ``serial``: prefilled, values of the last pump cleared."""
        self.serial = serial
        fleet = self.app.fleet
        if fleet is None or serial not in fleet.pumps:
            self.query_one("#pump-line", Static).update(self.app.trouble or f"pump {serial} is not in the logbook")
            return
        history = fleet.history(serial)
        pf = self.app.pump_forecast(serial)
        prefill = forms.reading_prefill(history, self.app.units, self.app.today, self.app.user)
        for name, field in self.fields.items():
            field.set_text(prefill.get(name, ""))
            field.show_problem("")
        self._touched, self._confirmed = False, None
        self._token += 1  # a check of the last pump's values says nothing here
        m, u = history.model, self.app.units
        last = history.readings[-1] if history.readings else None
        where = present.where(pf) if pf else "not fitted"
        left = f" · {len(self.following)} more in the round" if self.following else ""
        status = f" · {pf.status}" if pf else ""
        left = f" · {len(self.following)} more" if self.following else ""
        self.query_one("#title", Static).update(f"Reading · {serial} {m.code} · {where}{status}{left}")
        last_text = (f"last {fmt.day(last.taken_on)}, {fmt.hours(last.machine_hours)} by "
                     f"{last.technician or last.entered_by}") if last else "no reading yet"
        self.query_one("#pump-line", Static).update(
            f"{last_text} · test {m.test_speed_rpm:g} rpm, oil {fmt.temperature(m.test_temp_min_c, u).split()[0]}-"
            f"{fmt.temperature(m.test_temp_max_c, u)} · italic = prefilled"
        )
        self.query_one("#check", Static).update(
            "Fill in what you measured; the logbook checks it as you type."
        )
        self.query_one("#form").scroll_home(animate=False)
        self.fields["machine_hours"].input.focus()

    # -- the EntryScreen hooks --------------------------------------------------------------
    def build_record(self, values) -> Reading:
        return forms.build_reading(self.serial, values)

    def dry_run(self, store, record: Reading) -> list[Problem]:
        return store.add_readings([record], today=self.app.today, dry_run=True).problems

    def write(self, store, record: Reading) -> Reading:
        return store.add_reading(record, today=self.app.today)

    def doubts(self, store, record: Reading) -> list:
        from logbook.plausible import forecast_bands

        bands = forecast_bands(self.app.pump_forecast(record.serial), record.taken_on, self.app.today)
        return store.reading_doubts(record, self.app.units, bands=bands)

    def saved(self, reading: Reading) -> None:
        fleet = self.app.fleet
        history = fleet.history(reading.serial)
        before = self.app.pump_forecast(reading.serial)
        previous = [r for r in history.readings if (r.taken_on, r.machine_hours) < (reading.taken_on, reading.machine_hours)]
        self._pending = {"reading": reading, "before": before, "forecast": self.app.forecast}
        if self._go_next_after_save:  # first: the next pump's form stays at its top (no scroll to the result)
            self._go_next_after_save = False
            self.action_next_pump()
        self._show_result(reading, previous[-1] if previous else None, history.model, before, None)

    def _forecast_arrived(self, generation: int) -> None:
        pending = self._pending
        if pending is None or self.app.forecast is None or self.app.forecast is pending["forecast"]:
            return  # not the forecast made after this save yet
        reading = pending["reading"]
        history = self.app.fleet.history(reading.serial)
        previous = [r for r in history.readings if (r.taken_on, r.machine_hours) < (reading.taken_on, reading.machine_hours)]
        after = self.app.pump_forecast(reading.serial)
        self._show_result(reading, previous[-1] if previous else None, history.model, pending["before"], after)
        self._pending = None

    def _show_result(self, reading: Reading, previous: Reading | None, model, before, after) -> None:
        from logbook.analysis.normalize import normalized_value

        u = self.app.units
        lines, shares = [], []
        for kind in ALL_KINDS:
            raw = reading.value(kind)
            if raw is None:
                continue
            ref = normalized_value(reading, kind, model)
            limit = model.limit(kind)
            parts = [f"{kind.label} {fmt.value(kind, raw, u)} as read"]
            if ref is not None and ref == ref:
                parts.append(f"{fmt.value(kind, ref, u)} at reference")
                if limit is not None:
                    parts.append(fmt.against_limit(kind, ref, limit, u))
                    shares.append(f"{present.KIND_SHORT[kind]} {fmt.against_limit(kind, ref, limit, u)}")
            prev = previous.value(kind) if previous else None
            if prev is not None:
                diff = raw - prev
                parts.append(f"previous {fmt.value(kind, prev, u)} on {fmt.day(previous.taken_on)} "
                             f"({'+' if diff >= 0 else '−'}{fmt.value(kind, abs(diff), u)})")
            lines.append("• " + "; ".join(parts))
        if after is None:
            lines.append("Updating the forecast…")
            status = "forecast updating…"
        else:
            status = f"status {before.status if before else '-'} → {after.status}"
            lines.append(status[0].upper() + status[1:])
            old = {k.kind: k for k in before.kinds} if before else {}
            for kf in after.kinds:
                if reading.value(kf.kind) is None:
                    continue
                was = old.get(kf.kind)
                was_text = f" (was P10 {fmt.day(was.p10_date)}, P50 {fmt.day(was.p50_date)})" if was else ""
                lines.append(f"  {present.outcome_line(kf, u)}{was_text}")
        box = self.query_one("#result", Static)
        box.border_title = fmt.text(f"Saved: pump {reading.serial}, {fmt.day(reading.taken_on)}")
        box.update("\n".join(lines))
        box.remove_class("-rejected")
        box.add_class("-shown")
        saved_line = self.query_one("#saved-line", Static)
        saved_line.update(f"✓ Saved {reading.serial}: " + ", ".join(shares or ["recorded"]) + f" · {status} (details below)")
        saved_line.add_class("-shown")
        if self.serial == reading.serial:  # still on that pump: show the details; else stay on the new form
            self.call_after_refresh(box.scroll_visible, animate=False)
            self.query_one("#check", Static).update(f"✓ Saved reading {reading.id} for {reading.serial}.")
            self.query_one("#check", Static).remove_class("-bad")

    # -- actions --------------------------------------------------------------------------------
    def action_save_next(self) -> None:
        self._go_next_after_save = True
        self.action_save()
        if not self.saving:
            self._go_next_after_save = False

    def rejected(self, message) -> None:
        self._go_next_after_save = False

    def action_next_pump(self) -> None:
        if not self.following:
            self.notify("That was the last pump in the fleet view's order.", timeout=4)
            return
        nxt, self.following = self.following[0], self.following[1:]
        self.load_pump(nxt)
