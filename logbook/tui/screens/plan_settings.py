"""The plan's standing assumptions, edited where the plan is read: shop capacity overall
and per site, exchange pumps per model, turnaround and horizon. Saved with
``store.set_plan_setup`` (checked, audited); ``logbook forecast`` from cron uses the same."""

from __future__ import annotations

from dataclasses import replace

from textual.app import ComposeResult
from textual.containers import Container, VerticalScroll
from textual.widgets import Static

from logbook import fmt
from logbook.model import Problem
from logbook.plan_setup import PlanSetup
from logbook.tui import present
from logbook.tui.forms import FieldDef
from logbook.tui.screens.entry import EntryScreen
from logbook.tui.widgets.plain import Plain
from logbook.tui.widgets.keybar import KeyBar


def _count(name: str, allowed: str, *, blank_ok: bool):
    """A whole number (digits 0-9) of 0 or more; blank is None when ``blank_ok``."""
    from logbook.validate import whole_number

    def parse(text: str):
        if text.strip() == "":
            return None, (None if blank_ok else Problem(name, text, f"is required; it {allowed}"))
        value = whole_number(text.strip())
        if value is None or value < 0:
            return None, Problem(name, text, allowed + _why_not_whole(text.strip()))
        return value, None

    return parse


def _why_not_whole(text: str) -> str:
    """Why a value typed is no whole number, when a person could wonder."""
    if "," in text:
        return " (no decimal comma or thousands separator: digits only)"
    if "." in text:
        return f" ({text} is not a whole number)"
    if text.startswith("-"):
        return " (not below 0)"
    return ""


def setup_fields(sites, models) -> tuple[FieldDef, ...]:
    fields = [
        FieldDef("horizon", "Horizon", _count("horizon", "must be a whole number of months from 1 to 60", blank_ok=False), "months"),
        FieldDef("capacity", "Shop capacity", _count("capacity", "must be a whole number of jobs a month, 0 or more", blank_ok=True),
                 "jobs a month", "blank: no limit"),
        FieldDef("turnaround", "Turnaround", _count("turnaround", "must be a whole number of months from 0 to 24", blank_ok=False), "months",
                 "until a removed pump is back as an exchange pump"),
    ]
    # one field per site and per model, named by position (a field name is a screen identifier)
    fields += [FieldDef(f"site_{i}", _label(s), _count(f"site capacity {s}", "must be a whole number of jobs a month, 0 or more", blank_ok=True),
                        "jobs a month", "blank: no limit") for i, s in enumerate(sites)]
    fields += [FieldDef(f"model_{i}", f"Exchange {m}", _count(f"exchange {m}", "must be a whole number of pumps, 0 or more", blank_ok=True),
                        "pumps on hand", "blank: no limit") for i, m in enumerate(models)]
    return tuple(fields)


def _label(site: str) -> str:
    """A site's label in the form's label column (16 characters): cut with … when longer."""
    return site if len(site) <= 16 else site[:15] + "…"


def setup_prefill(setup: PlanSetup, sites, models) -> dict[str, str]:
    out = {"horizon": str(setup.horizon_months), "turnaround": str(setup.turnaround_months),
           "capacity": "" if setup.capacity_per_month is None else str(setup.capacity_per_month)}
    out.update({f"site_{i}": str(setup.site_capacity[s]) for i, s in enumerate(sites) if s in setup.site_capacity})
    out.update({f"model_{i}": str(setup.exchange_on_hand[m]) for i, m in enumerate(models) if m in setup.exchange_on_hand})
    return out


def setup_from(values: dict, sites, models) -> PlanSetup:
    return PlanSetup(
        horizon_months=values["horizon"], capacity_per_month=values.get("capacity"),
        turnaround_months=values["turnaround"],
        site_capacity={s: values[f"site_{i}"] for i, s in enumerate(sites) if values.get(f"site_{i}") is not None},
        exchange_on_hand={m: values[f"model_{i}"] for i, m in enumerate(models) if values.get(f"model_{i}") is not None},
    )


class PlanSettingsScreen(EntryScreen):
    """F2 saves (the store checks every value and records the change), Esc goes back."""

    HELP_TITLE = "Plan settings"

    def __init__(self, setup: PlanSetup, sites, models) -> None:
        super().__init__()
        self.setup, self.sites, self.models = setup, sorted(sites), sorted(models)

    def compose(self) -> ComposeResult:
        prefill = setup_prefill(self.setup, self.sites, self.models)
        yield Plain("Plan settings · also used by `logbook forecast`", id="title")
        with VerticalScroll(classes="form", id="form"):
            with Container(classes="fields"):
                for d in setup_fields(self.sites, self.models):
                    yield self.make_field(d, prefill.get(d.name, ""))
            yield Plain("Capacity per site: jobs a month at that site, within the shop's. Exchange pumps: units of the "
                        "model on hand to swap in. Change what you need; F2 saves, Esc goes back without saving.",
                        id="check")
            yield Plain("", id="result")
        yield KeyBar()

    def on_mount(self) -> None:
        self.fields["horizon"].input.focus()

    def parse_all(self) -> tuple[dict[str, object], list[Problem]]:
        """Each field's own check, then the plan's limits (plan.PlanSettings) on every
        value that is a number, so that one check (and one F2) names every bad field,
        its value as typed and what is allowed. A field that is not a number stands in
        as the default value (always allowed) for the check of the others."""
        values, found, failed = {}, [], set()
        order = {name: i for i, name in enumerate(self.active_fields())}
        for name, field in self.active_fields().items():
            value, problem = field.check()
            values[name] = value
            if problem:
                found.append((order[name], problem))
                failed.add(name)
        default = PlanSetup()
        stand_ins = {"horizon": default.horizon_months, "turnaround": default.turnaround_months}
        trial = {name: stand_ins.get(name) if name in failed else value for name, value in values.items()}
        form_name = {"horizon": "horizon", "capacity": "capacity", "turnaround": "turnaround"}
        form_name.update({f"site capacity {s}": f"site_{i}" for i, s in enumerate(self.sites)})
        form_name.update({f"exchange {m}": f"model_{i}" for i, m in enumerate(self.models)})
        for p in setup_from(trial, self.sites, self.models).problems():
            name = form_name.get(p.field)
            if name in order and name not in failed:
                found.append((order[name], replace(p, field=name, value=self.fields[name].text)))
        return values, [p for _, p in sorted(found, key=lambda item: item[0])]  # in the form's order

    def build_record(self, values) -> PlanSetup:
        return setup_from(values, self.sites, self.models)

    def dry_run(self, store, record: PlanSetup) -> list[Problem]:
        return record.problems(sites={m.site for m in store.machines().values()}, models=set(store.models()))

    def write(self, store, record: PlanSetup) -> PlanSetup:
        return store.set_plan_setup(record)

    def saved(self, setup: PlanSetup) -> None:
        box = self.query_one("#result", Static)
        box.border_title = fmt.text("Saved plan settings")
        box.update(fmt.text(present.setup_words(setup, self.models) + ". Esc goes back to the plan."))
        box.add_class("-shown")
        self.query_one("#check", Static).update("✓ Saved the plan settings.")
