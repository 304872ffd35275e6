"""Correct a stored reading on the form it was typed on: its values shown, a reason
required; the store supersedes it by the corrected copy (the original kept, both in the
pump's history, audited as `logbook correct`)."""

from __future__ import annotations

import dataclasses

from textual.widgets import Static

from logbook import fmt
from logbook.model import Reading
from logbook.tui import forms
from logbook.tui.screens.reading import ReadingScreen


class CorrectReadingScreen(ReadingScreen):
    HELP_TITLE = "Correct a reading"

    def __init__(self, reading: Reading) -> None:
        super().__init__(reading.serial, following=[])
        self.original = reading
        self._texts: dict[str, str] = {}

    def check_action(self, action: str, parameters) -> bool | None:
        """One reading is corrected: no next pump here (F3, F4 are off, and off the key bar)."""
        if action in ("save_next", "next_pump"):
            return False
        return super().check_action(action, parameters)

    def field_defs(self):
        return (forms.reason_field(), *super().field_defs())

    def load_pump(self, serial: str) -> None:
        super().load_pump(serial)
        self._texts = forms.reading_texts(self.original, self.app.units)
        for name, field in self.fields.items():
            field.set_text(self._texts.get(name, ""))
            field.set_class(False, "-prefilled")  # the stored values, not guesses
        r = self.original
        self.query_one("#title", Static).update(f"Correct reading {r.id} · {r.serial} · {fmt.day(r.taken_on)}")
        self.query_one("#check", Static).update("Change what was wrong and say why; F2 saves the correction.")
        self.fields["reason"].input.focus()

    # -- the EntryScreen hooks ----------------------------------------------------------
    def build_record(self, values) -> Reading:
        new = forms.build_reading(self.serial, values)
        return dataclasses.replace(new, id=None)

    def dry_run(self, store, record: Reading):
        return None  # checked as a new reading when saved (the original left out)

    def doubts(self, store, record: Reading) -> list:
        return store.reading_doubts(record, self.app.units, without=[self.original.id])

    def write(self, store, record: Reading) -> Reading:
        typed = {name: f.text for name, f in self.fields.items()}
        changes = forms.corrections(self.original, record, self._texts, typed)
        return store.correct_reading(self.original.id, reason=self.fields["reason"].text, today=self.app.today,
                                     **changes)

    def reload_after_save(self, record) -> None:
        self.app.reload("corrected")

    def saved(self, reading: Reading) -> None:
        self._touched = False
        for field in self.fields.values():
            field.set_text(field.text)  # what is shown is now what is stored
        check = self.query_one("#check", Static)
        check.update(f"✓ Reading {self.original.id} corrected: reading {reading.id} replaces it (the original is "
                     "kept; both are in the pump's history). Esc goes back.")
        check.remove_class("-bad")
