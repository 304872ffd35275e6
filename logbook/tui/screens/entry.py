"""Shared behaviour of the entry forms: fields checked as typed, a dry run against the
store (in a thread, debounced), and a save in a thread that reports back by message."""

from __future__ import annotations

from textual import on, work
from textual.actions import SkipAction
from textual.binding import Binding
from textual.screen import Screen
from textual.widget import Widget
from textual.widgets import Input, Static
from textual.worker import get_current_worker

from logbook.model import InputRejected, Problem
from logbook.validate import say
from logbook.tui.forms import FieldDef, field_of
from logbook.tui.gate import trouble_text
from logbook.tui.messages import Checked, Doubted, Rejected, Saved
from logbook.tui.widgets.field import FormField

CHECK_DELAY_S = 0.35  # quiet after a keystroke before the dry run; 0 checks at once (the tests set it)


class EntryScreen(Screen):
    """Subclasses supply ``build_record``, ``dry_run`` and ``write``."""

    HOLDS_INPUT = True  # the app's one-key quit is off here

    BINDINGS = [
        Binding("f2", "save", "Save", key_display="F2", tooltip="save (the logbook checks everything first)", id="entry.save"),
        Binding("escape", "back", "Back", tooltip="leave the form (asks first when something was typed)", id="entry.back"),
        # The form moves focus itself, as each key arrives: priority bindings are run by the
        # app before it hands the next key on, so a digit typed right after Tab lands in the
        # next field however fast it follows (the framework's own focus change is queued
        # behind the keys already sent, and a burst would land in the old field).
        Binding("tab", "next_field", "Next field", show=False, priority=True, id="entry.tab"),
        Binding("shift+tab", "previous_field", "Previous field", show=False, priority=True, id="entry.backtab"),
        Binding("enter", "enter_field", "Next field", show=False, priority=True, id="entry.enter"),
        Binding("down", "down_field", "Next field", show=False, priority=True, id="entry.down"),
        Binding("up", "up_field", "Previous field", show=False, priority=True, id="entry.up"),
    ]

    def __init__(self) -> None:
        super().__init__()
        self.fields: dict[str, FormField] = {}
        self._token = 0
        self._timer = None
        self._touched = False
        self.saving = False
        self._confirmed = None  # the record whose doubts were shown: F2 again saves it

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

    # -- focus, moved by the form in key order -----------------------------------------------
    def focus_order(self) -> list[Widget]:
        """The widgets Tab walks through, in order (subclasses may put a chooser first)."""
        return [f.input for f in self.active_fields().values()]

    def _move(self, step: int, *, inputs_only: bool, wrap: bool) -> None:
        order = self.focus_order()
        here = self.focused
        if here not in order or (inputs_only and not isinstance(here, Input)):
            raise SkipAction()  # a chooser, a dialog or a button: its own keys
        i = order.index(here) + step
        if not 0 <= i < len(order):
            if not wrap:
                if step > 0:
                    self.at_last_field()
                return
            i %= len(order)
        self.set_focus(order[i])  # at once: the next key already goes to the new field

    def action_next_field(self) -> None:
        self._move(+1, inputs_only=False, wrap=True)

    def action_previous_field(self) -> None:
        self._move(-1, inputs_only=False, wrap=True)

    def action_enter_field(self) -> None:
        self._move(+1, inputs_only=True, wrap=False)

    def action_down_field(self) -> None:
        self._move(+1, inputs_only=True, wrap=False)

    def action_up_field(self) -> None:
        self._move(-1, inputs_only=True, wrap=False)

    def at_last_field(self) -> None:
        """Enter or Down on the last field: stay in it and say how to save."""
        self.notify("Last field. F2 saves; Tab goes back to the first field.", timeout=3)

    @on(Input.Submitted)
    def _enter_moves_on(self, event: Input.Submitted) -> None:
        event.stop()  # Enter is the form's (action_enter_field); never leave the fields

    @on(Input.Changed)
    def _typed(self, event: Input.Changed) -> None:
        if getattr(event, "programmatic", False):
            return
        self._touched = True
        self.schedule_check()

    def schedule_check(self) -> None:
        if self._timer is not None:
            self._timer.stop()
            self._timer = None
        if CHECK_DELAY_S <= 0:
            self.run_check()
            return
        self._timer = self.set_timer(CHECK_DELAY_S, self.run_check)

    # -- live dry run ------------------------------------------------------------------------
    def run_check(self) -> None:
        values, problems = self.parse_all()
        self._token += 1
        if problems:
            self.show_check(problems, self._to_fix(problems))
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
        doubts = []
        try:
            with self.app.gate.open() as store:
                problems = self.dry_run(store, record)
                if not problems:
                    doubts = self.doubts(store, record)
        except Exception as exc:
            problems, text = [], trouble_text(exc)
        else:
            text = ""
        if not worker.is_cancelled:
            self.post_message(Checked(token, problems, text, doubts))

    def on_checked(self, message: Checked) -> None:
        if message.token != self._token:
            return  # an older check; the form has changed since
        self.show_check(message.problems, message.text)
        if message.doubts and not message.problems and not message.text:
            self.show_doubts(message.doubts, "The logbook accepts this, but asks (F2 shows it again before saving):")

    def show_doubts(self, doubts, head: str) -> None:
        """Values that look wrong: under their fields and in the check line (never moves focus)."""
        names = self.active_fields()
        for d in doubts:
            if d.field in names:
                names[d.field].show_problem(f"? {d.reason}")
        check = self.query_one("#check", Static)
        check.update(f"? {head}\n" + "\n".join(f"  • {d}" for d in doubts))
        check.add_class("-bad")

    def _to_fix(self, problems: list[Problem]) -> str:
        """The fields' own problems in full (each field's line under it is cut to one row)."""
        names = self.active_fields()
        said = [say(p, names[p.field].label_text if p.field in names else None) for p in problems]
        return f"{len(problems)} field(s) to fix:\n" + "\n".join(f"  • {t}" for t in said)

    def show_check(self, problems: list[Problem] | None, text: str = "") -> None:
        check = self.query_one("#check", Static)
        if problems is None:  # no dry run for this record: only the fields were checked
            check.update("✓ The fields look right; the logbook checks the whole record when you save (F2)")
            check.remove_class("-bad")
            return
        names = self.active_fields()
        for field in names.values():
            field.show_problem("")
        for p in problems:
            name = field_of(p, names)
            if name is not None:
                names[name].show_problem(say(p, names[name].label_text))
        if text:
            check.update(f"✗ {text}")
        elif problems:
            said = [say(p, names[p.field].label_text if p.field in names else None) for p in problems]
            check.update("✗ The logbook would refuse this:\n" + "\n".join(f"  • {g}" for g in said))
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
            self.show_check(problems, "not saved: " + self._to_fix(problems))
            first = next((f for f in self.active_fields().values() if f.has_class("-bad")), None)
            if first is not None:
                first.input.focus()
            return
        try:
            record = self.build_record(values)
        except (KeyError, TypeError, ValueError) as exc:
            self.show_check([], f"not saved: incomplete ({exc})")
            return
        self.saving = True
        self._token += 1  # drop any check still running
        confirmed = self._confirmed is not None and self._confirmed == record
        self._save_worker(record, confirmed)

    @work(thread=True, exclusive=True, group="entry-save")
    def _save_worker(self, record, confirmed: bool = False) -> None:
        try:
            with self.app.gate.open() as store:
                doubts = [] if confirmed else self.doubts(store, record)
                if doubts:
                    self.post_message(Doubted(record, doubts))
                    return
                saved = self.write(store, record)
        except InputRejected as exc:
            self.post_message(Rejected(exc.problems))
        except Exception as exc:
            self.post_message(Rejected([], trouble_text(exc)))
        else:
            self.post_message(Saved(saved))

    def on_doubted(self, message: Doubted) -> None:
        self.saving = False
        self._confirmed = message.record
        self.show_doubts(message.doubts, "Not saved yet: these values look wrong. Fix them, or press F2 again to "
                                         "save them as typed.")
        self.rejected(message)

    def on_rejected(self, message: Rejected) -> None:
        self.saving = False
        self.show_check(message.problems, ("not saved: " + message.text) if message.text else "")
        if message.problems:
            check = self.query_one("#check", Static)
            check.update("✗ Not saved, nothing was written:\n" + "\n".join(f"  • {say(p)}" for p in message.problems))
        self.rejected(message)

    def on_saved(self, message: Saved) -> None:
        self.saving = False
        self._confirmed = None
        self._touched = False
        self.reload_after_save(message.record)
        self.saved(message.record)

    # -- hooks -------------------------------------------------------------------------------------
    def build_record(self, values: dict[str, object]):
        raise NotImplementedError

    def dry_run(self, store, record) -> list[Problem]:
        raise NotImplementedError

    def doubts(self, store, record) -> list:
        """Values that look wrong (logbook.plausible), asked about before saving."""
        return []

    def write(self, store, record):
        raise NotImplementedError

    def saved(self, record) -> None:
        pass

    def reload_after_save(self, record) -> None:
        self.app.reload("saved", record)  # its pump first, then the fleet

    def rejected(self, message: Rejected) -> None:
        pass

    def typed_values(self) -> bool:
        """True when a field holds something the person typed and has not saved."""
        return self._touched and any(f.edited for f in self.fields.values())

    def action_back(self) -> None:
        if not self.typed_values():
            self.app.pop_screen()
            return
        from logbook.tui.screens.confirm import ConfirmLeave

        def answer(leave: bool | None) -> None:
            if leave:
                self.app.pop_screen()

        self.app.push_screen(ConfirmLeave(), answer)
