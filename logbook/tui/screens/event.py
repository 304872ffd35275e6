"""Event entry: overhaul, exchange, neutral re-set, control repair, oil change, move,
hour-meter replacement; checked by the store as you type, like a reading. The safety
warning is on screen (with the running-machine point for a neutral re-set or control
repair); F6 shows the whole safety list."""

from __future__ import annotations

from textual import on
from textual.app import ComposeResult
from textual.containers import Container, Horizontal, VerticalScroll
from textual.widgets import Label, Select, Static

from logbook import fmt
from logbook.cautions import RUNNING_MACHINE
from logbook.model import Event, EventKind, Problem, SEGMENT_RESETS
from logbook.tui import forms, present
from logbook.tui.screens.entry import EntryScreen
from logbook.tui.widgets.plain import Plain
from logbook.tui.widgets.safety import SAFETY_BINDING, SafetyBox, SafetyKey
from logbook.tui.widgets.keybar import KeyBar


#: Events whose work is done with the engine running: the short safety box adds that point.
RUNNING_WORK = (EventKind.NEUTRAL_RESET, EventKind.CONTROL_REPAIR)


class EventScreen(SafetyKey, EntryScreen):
    """Record one event for pump ``serial`` (a meter replacement is for its machine)."""

    HELP_TITLE = "Event entry"
    BINDINGS = [SAFETY_BINDING]

    def __init__(self, serial: str, kind: EventKind = EventKind.OVERHAUL) -> None:
        super().__init__()
        self.serial = serial
        self.kind = kind
        self.machine: str | None = None

    def compose(self) -> ComposeResult:
        yield Plain(f"New event · pump {self.serial}", id="title")
        with VerticalScroll(classes="form", id="form"):
            yield Plain("", id="pump-line", classes="form-hint")
            with Horizontal(classes="field-row", id="kind-row"):
                yield Label("Event", classes="field-label")
                yield Select([(words, k.value) for k, words in forms.EVENT_KIND_WORDS.items()], value=self.kind.value,
                             allow_blank=False, compact=True, id="kind")
            yield Plain("", id="kind-hint", classes="form-hint")
            with Container(classes="fields"):
                for d in forms.event_fields(self.app.today, self.kind):
                    yield self.make_field(d, self._prefill().get(d.name, ""))
            yield Plain("Fill in the event; the logbook checks it as you type.", id="check")
            yield Plain("", id="result")
            yield SafetyBox(self._safety_extra())
        yield KeyBar()

    def focus_order(self):
        return [self.query_one("#kind", Select), *super().focus_order()]

    def _safety_extra(self) -> tuple[str, ...]:
        return (RUNNING_MACHINE,) if self.kind in RUNNING_WORK else ()

    def _prefill(self) -> dict[str, str]:
        return {"date": self.app.today.isoformat()}

    def on_mount(self) -> None:
        fleet = self.app.fleet
        pf = self.app.pump_forecast(self.serial)
        if pf is not None:
            self.machine = pf.machine
        elif fleet is not None and self.serial in fleet.pumps:
            current = [f for f in fleet.history(self.serial).fitments if f.removed_on is None]
            self.machine = current[-1].machine if current else None
        where = present.where(pf) if pf else (self.machine or "not fitted")
        self.query_one("#pump-line", Static).update(
            f"Pump {self.serial} in {where}; hours are the hour meter of {self.machine or 'its machine'}."
        )
        self._apply_kind()
        self.query_one("#kind", Select).focus()

    def _apply_kind(self) -> None:
        wanted = set(forms.EVENT_FIELDS.get(self.kind, forms.DEFAULT_EVENT_FIELDS)) | {"date", "technician", "note"}
        labels = {d.name: d.label for d in forms.event_fields(self.app.today, self.kind)}
        for name, field in self.fields.items():
            field.set_class(name not in wanted, "-hidden")
            field.query_one(".field-label", Label).update(labels[name])
        resets = SEGMENT_RESETS.get(self.kind, ())
        hint = ("Starts a new trend for: " + ", ".join(k.label for k in resets)) if resets else "Does not restart any trend."
        if self.kind is EventKind.METER_REPLACED:
            hint = f"For machine {self.machine or '?'}: the old meter's last reading and the new meter's first."
        elif self.kind is EventKind.MOVE:
            hint = "Moves the pump: hour meter of the machine it leaves, then the target machine, position and its meter."
        elif self.kind is EventKind.EXCHANGE:
            hint = ("Takes this pump out and fits the pump named in 'Pump fitted in' in its place "
                    "(blank: the unit that went in is not on record). New trends start for every reading.")
        elif self.kind is EventKind.PARKED:
            hint = f"For machine {self.machine or '?'}: its pumps run no hours from this day until it is back in service."
        elif self.kind is EventKind.BACK_IN_SERVICE:
            hint = f"For machine {self.machine or '?'}: its pumps run hours again from this day."
        self.query_one("#kind-hint", Static).update(hint)
        self.query_one(SafetyBox).set_extra(self._safety_extra())

    @on(Select.Changed, "#kind")
    def _kind_changed(self, event: Select.Changed) -> None:
        self.kind = EventKind(event.value)
        self._apply_kind()
        if self._touched:
            self.schedule_check()

    # -- hooks ---------------------------------------------------------------------------------
    def build_record(self, values) -> Event:
        return forms.build_event(self.kind, self.serial, self.machine, values)

    def dry_run(self, store, record: Event) -> list[Problem]:
        return store.add_events([record], today=self.app.today, dry_run=True).problems

    def doubts(self, store, record: Event) -> list:
        return store.event_doubts(record)

    def write(self, store, record: Event) -> Event:
        return store.add_event(record, today=self.app.today)

    def saved(self, event: Event) -> None:
        box = self.query_one("#result", Static)
        box.border_title = fmt.text(f"Saved: {forms.EVENT_KIND_WORDS[event.kind].lower()}, {fmt.day(event.happened_on)}")
        resets = SEGMENT_RESETS.get(event.kind, ())
        text = f"Recorded event {event.id} for {event.serial or event.machine}."
        if resets:
            text += " New trends start for " + ", ".join(k.label for k in resets) + "; the forecast is being updated."
        box.update(text + "\nEsc goes back.")
        box.add_class("-shown")
        self.call_after_refresh(box.scroll_visible, animate=False)
        self.query_one("#check", Static).update(f"✓ Saved event {event.id}.")
        self.query_one("#check", Static).remove_class("-bad")
