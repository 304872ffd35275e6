"""Shared behaviour of the entry forms: fields checked as typed, a dry run against the
store (in a thread, debounced), and a save in a thread that reports back by message."""

from __future__ import annotations

from textual import on, work
from textual.binding import Binding
from textual.screen import Screen
from textual.widgets import Input, Static
from textual.worker import get_current_worker

from logbook.model import InputRejected, Problem
from logbook.tui.forms import FieldDef, field_of
from logbook.tui.gate import trouble_text
from logbook.tui.messages import Checked, Rejected, Saved
from logbook.tui.widgets.field import FormField

CHECK_DELAY_S = 0.35


class EntryScreen(Screen):
    """Subclasses supply ``build_record``, ``dry_run`` and ``write``."""

    HOLDS_INPUT = True  # the app's one-key quit is off here

    BINDINGS = [
        Binding("f2", "save", "Save", key_display="F2", tooltip="save (the logbook checks everything first)", id="entry.save"),
        Binding("escape", "back", "Back", tooltip="leave the form; what is not saved is dropped", id="entry.back"),
        Binding("down", "app.focus_next", "Next field", show=False, id="entry.down"),
        Binding("up", "app.focus_previous", "Previous field", show=False, id="entry.up"),
    ]

    def __init__(self) -> None:
        super().__init__()
        self.fields: dict[str, FormField] = {}
        self._token = 0
        self._timer = None
        self._touched = False
        self.saving = False

    # -- fields ------------------------------------------------------------------------
    def make_field(self, d: FieldDef, value: str = "") -> FormField:
        field = FormField(d.name, d.label, d.parse, value=value, unit=d.unit, placeholder=d.placeholder)
        self.fields[d.name] = field
        return field

    def active_fields(self) -> dict[str, FormField]:
        return {n: f for n, f in self.fields.items() if not f.has_class("-hidden")}

    def parse_all(self) -> tuple[dict[str, object], list[Problem]]:
        values, problems = {}, []
        for name, field in self.active_fields().items():
            value, problem = field.check()
            values[name] = value
            if problem:
                problems.append(problem)
        return values, problems

    @on(Input.Submitted)
    def _enter_moves_on(self, event: Input.Submitted) -> None:
        event.stop()
        self.focus_next()

    @on(Input.Changed)
    def _typed(self, event: Input.Changed) -> None:
        if getattr(event, "programmatic", False):
            return
        self._touched = True
        self.schedule_check()

    def schedule_check(self) -> None:
        if self._timer is not None:
            self._timer.stop()
        self._timer = self.set_timer(CHECK_DELAY_S, self.run_check)

    # -- live dry run ------------------------------------------------------------------------
    def run_check(self) -> None:
        values, problems = self.parse_all()
        self._token += 1
        if problems:
            self.show_check([], f"{len(problems)} field(s) to fix (see the messages under them)")
            return
        try:
            record = self.build_record(values)
        except (KeyError, TypeError, ValueError) as exc:
            self.show_check([], f"incomplete: {exc}")
            return
        self._check_worker(self._token, record)

    @work(thread=True, exclusive=True, group="entry-check")
    def _check_worker(self, token: int, record) -> None:
        worker = get_current_worker()
        try:
            with self.app.gate.open() as store:
                problems = self.dry_run(store, record)
        except Exception as exc:
            problems, text = [], trouble_text(exc)
        else:
            text = ""
        if not worker.is_cancelled:
            self.post_message(Checked(token, problems, text))

    def on_checked(self, message: Checked) -> None:
        if message.token != self._token:
            return  # an older check; the form has changed since
        self.show_check(message.problems, message.text)

    def show_check(self, problems: list[Problem] | None, text: str = "") -> None:
        check = self.query_one("#check", Static)
        if problems is None:  # no dry run for this record: only the fields were checked
            check.update("✓ The fields look right; the logbook checks the whole record when you save (F2)")
            check.remove_class("-bad")
            return
        names = self.active_fields()
        general = []
        for field in names.values():
            field.show_problem("")
        for p in problems:
            name = field_of(p, names)
            if name is not None:
                names[name].show_problem(str(p))
            else:
                general.append(str(p))
        if text:
            check.update(f"✗ {text}")
        elif problems:
            check.update("✗ The logbook would refuse this:\n" + "\n".join(f"  • {g}" for g in general or ["see the fields marked"]))
        else:
            check.update("✓ The logbook accepts this (not saved yet: F2 saves)")
        check.set_class(bool(problems or text), "-bad")

    # -- save -----------------------------------------------------------------------------------
    def action_save(self) -> None:
        if self.saving:
            return
        if self._timer is not None:
            self._timer.stop()  # the save's own verdict must not be overwritten by a late check
        values, problems = self.parse_all()
        if problems:
            self.show_check([], f"not saved: {len(problems)} field(s) to fix")
            first = next(f for f in self.active_fields().values() if f.has_class("-bad"))
            first.input.focus()
            return
        try:
            record = self.build_record(values)
        except (KeyError, TypeError, ValueError) as exc:
            self.show_check([], f"not saved: incomplete ({exc})")
            return
        self.saving = True
        self._token += 1  # drop any check still running
        self._save_worker(record)

    @work(thread=True, exclusive=True, group="entry-save")
    def _save_worker(self, record) -> None:
        try:
            with self.app.gate.open() as store:
                saved = self.write(store, record)
        except InputRejected as exc:
            self.post_message(Rejected(exc.problems))
        except Exception as exc:
            self.post_message(Rejected([], trouble_text(exc)))
        else:
            self.post_message(Saved(saved))

    def on_rejected(self, message: Rejected) -> None:
        self.saving = False
        self.show_check(message.problems, ("not saved: " + message.text) if message.text else "")
        if message.problems:
            check = self.query_one("#check", Static)
            check.update("✗ Not saved, nothing was written:\n" + "\n".join(f"  • {p}" for p in message.problems))
        self.rejected(message)

    def on_saved(self, message: Saved) -> None:
        self.saving = False
        self.app.reload("saved", message.record)  # its pump first, then the fleet
        self.saved(message.record)

    # -- hooks -------------------------------------------------------------------------------------
    def build_record(self, values: dict[str, object]):
        raise NotImplementedError

    def dry_run(self, store, record) -> list[Problem]:
        raise NotImplementedError

    def write(self, store, record):
        raise NotImplementedError

    def saved(self, record) -> None:
        pass

    def rejected(self, message: Rejected) -> None:
        pass

    def action_back(self) -> None:
        self.app.pop_screen()
