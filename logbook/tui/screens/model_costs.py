"""Edit one pump model's job costs: a planned overhaul or exchange and an in-service failure.

Saved with ``store.set_model_costs`` (checked, one transaction, audited before and after).
A failure that costs no more than a planned job is accepted and its consequence said.
"""

from __future__ import annotations

from dataclasses import replace

from textual.app import ComposeResult
from textual.containers import Container, VerticalScroll
from textual.widgets import Static

from logbook import fmt, units, validate
from logbook.model import InputRejected, Problem
from logbook.tui.forms import FieldDef
from logbook.tui.screens.entry import EntryScreen
from logbook.tui.widgets.plain import Plain
from logbook.tui.widgets.keybar import KeyBar

#: The fields by their on-screen label (a problem names the field as the form shows it).
PLANNED, FAILURE = "Planned cost", "Failure cost"
_SPECS = {
    PLANNED: validate.FieldSpec(PLANNED, units.NONE, 0, validate.COST_FIELDS["planned"].maximum),
    FAILURE: validate.FieldSpec(FAILURE, units.NONE, 0, validate.COST_FIELDS["failure"].maximum),
}
#: The store names the same fields in its own problems.
_STORE_NAMES = {"planned cost": PLANNED, "failure cost": FAILURE}


def _amount(label: str):
    spec = _SPECS[label]

    def parse(text: str):
        value, problem = validate.parse_number(spec, text, "")
        if problem is None and value is None:
            return None, Problem(label, text, "is required: an amount, zero or more")
        return value, problem

    return parse


def cost_fields(currency: str) -> tuple[FieldDef, ...]:
    unit = currency or "no currency set"
    return (
        FieldDef("planned_cost", PLANNED, _amount(PLANNED), unit, "parts and shop labour"),
        FieldDef("failure_cost", FAILURE, _amount(FAILURE), unit, "parts, secondary damage, flush"),
    )


class ModelCostsScreen(EntryScreen):
    """The costs one model's jobs carry in the plan (downtime is per site or machine: logbook costs)."""

    HELP_TITLE = "Model costs"

    def __init__(self, code: str, planned: float | None, failure: float | None, currency: str) -> None:
        super().__init__()
        self.code, self.currency = code, currency
        self.prefill = {"planned_cost": "" if planned is None else f"{planned:g}",
                        "failure_cost": "" if failure is None else f"{failure:g}"}

    def compose(self) -> ComposeResult:
        cur = self.currency or "no currency set (logbook costs --currency CODE)"
        yield Plain(f"Costs of model {self.code} · in {cur} · downtime per site or machine: logbook costs", id="title")
        with VerticalScroll(classes="form", id="form"):
            with Container(classes="fields"):
                for d in cost_fields(self.currency):
                    yield self.make_field(d, self.prefill.get(d.name, ""))
            yield Plain("Change what you need; F2 saves, Esc goes back without saving.", id="check")
            yield Plain("", id="result")
        yield KeyBar()

    def on_mount(self) -> None:
        self.fields["planned_cost"].input.focus()

    def build_record(self, values) -> dict:
        return {"planned": values["planned_cost"], "failure": values["failure_cost"]}

    def dry_run(self, store, record) -> list[Problem] | None:
        return None  # the store checks the costs when it writes them

    def write(self, store, record):
        try:
            return store.set_model_costs(self.code, planned=record["planned"], failure=record["failure"])
        except InputRejected as exc:  # the store's names for the fields, as the form labels them
            raise InputRejected([replace(p, field=_STORE_NAMES.get(p.field, p.field)) for p in exc.problems]) from None

    def saved(self, result) -> None:
        costs, notes = result
        box = self.query_one("#result", Static)
        box.border_title = fmt.text(f"Saved the costs of {costs.model}")
        box.update(fmt.text(*(notes + ["The plan is weighed again with them. Esc goes back."])))
        box.add_class("-shown")
        self.query_one("#check", Static).update(f"✓ Saved the costs of {costs.model}.")

