"""Costs and the currency: read, checked and written in one transaction each, audited."""

from __future__ import annotations

import dataclasses
import math
import re

from logbook.model import CostBook, Downtime, InputRejected, ModelCosts, Problem

CURRENCY_RE = re.compile(r"^[A-Z]{3}$")
SCOPES = ("site", "machine")


def _amount(name: str, value: float | None, unit: str, problems: list[Problem]) -> None:
    if value is None or not isinstance(value, (int, float)) or not math.isfinite(value) or value < 0:
        problems.append(Problem(name, value if value is not None else "", "must be given as zero or more", unit))


def cost_notes(costs: ModelCosts) -> list[str]:
    """What a set of model costs means in plain words (accepted, but worth saying)."""
    if costs.failure <= costs.planned:
        return [f"a failure of {costs.model} costs no more than a planned job: run to failure is cheapest for this model"]
    return []


class CostsMixin:
    """Per model job costs, per site and machine downtime, and the currency (settings 'currency')."""

    def costs(self) -> CostBook:
        models, sites, machines = {}, {}, {}
        for row in self.db.query("SELECT * FROM costs ORDER BY scope, name"):
            if row["scope"] == "model":
                models[row["name"]] = ModelCosts(row["name"], row["planned_cost"], row["failure_cost"])
            else:
                entry = Downtime(row["scope"], row["name"], row["downtime_cost_per_hour"], row["planned_downtime_hours"],
                                 row["failure_downtime_hours"])
                (sites if row["scope"] == "site" else machines)[row["name"]] = entry
        currency = next((r["value"] for r in self.db.query("SELECT value FROM settings WHERE key = 'currency'")), "")
        return CostBook(currency, models, sites, machines)

    def set_currency(self, code: str) -> str:
        value = (code or "").strip().upper()
        if not CURRENCY_RE.match(value):
            raise InputRejected([Problem("currency", code, "must be a three-letter currency code (ISO 4217), e.g. EUR or USD")])
        with self.transaction():
            old = self.costs().currency
            self.conn.execute("INSERT INTO settings (key, value) VALUES ('currency', ?) "
                              "ON CONFLICT(key) DO UPDATE SET value = excluded.value", (value,))
            self._audit("set", "settings", "currency", None, {"currency": old} if old else None, {"currency": value})
        return value

    def set_model_costs(self, model: str, *, planned: float | None, failure: float | None) -> tuple[ModelCosts, list[str]]:
        """Planned and failure cost of one model's jobs; returns them and plain-word notes."""
        problems: list[Problem] = []
        _amount("planned cost", planned, "", problems)
        _amount("failure cost", failure, "", problems)
        if model not in self.models():
            problems.append(Problem("model", model, "is not a known pump model"))
        if problems:
            raise InputRejected(problems)
        new = ModelCosts(model, float(planned), float(failure))
        with self.transaction():
            old = self.costs().models.get(model)
            self.conn.execute(
                "INSERT INTO costs (scope, name, planned_cost, failure_cost) VALUES ('model', ?, ?, ?) "
                "ON CONFLICT(scope, name) DO UPDATE SET planned_cost = excluded.planned_cost, "
                "failure_cost = excluded.failure_cost", (model, new.planned, new.failure))
            self._audit("set", "costs", f"model {model}", None, dataclasses.asdict(old) if old else None,
                        dataclasses.asdict(new))
        return new, cost_notes(new)

    def set_downtime(self, scope: str, name: str, *, cost_per_hour: float | None, planned_hours: float | None,
                     failure_hours: float | None) -> Downtime:
        """Downtime figures of a site or a machine."""
        problems: list[Problem] = []
        if scope not in SCOPES:
            problems.append(Problem("scope", scope, "must be site or machine"))
        _amount("downtime cost per hour", cost_per_hour, "per h", problems)
        _amount("planned downtime", planned_hours, "h", problems)
        _amount("failure downtime", failure_hours, "h", problems)
        known = {m.site for m in self.machines().values()} if scope == "site" else set(self.machines())
        if scope in SCOPES and name not in known:
            problems.append(Problem(scope, name, f"is not a known {scope}" + (": " + ", ".join(sorted(known)) if known else "")))
        if problems:
            raise InputRejected(problems)
        new = Downtime(scope, name, float(cost_per_hour), float(planned_hours), float(failure_hours))
        with self.transaction():
            book = self.costs()
            old = (book.sites if scope == "site" else book.machines).get(name)
            self.conn.execute(
                "INSERT INTO costs (scope, name, downtime_cost_per_hour, planned_downtime_hours, failure_downtime_hours) "
                "VALUES (?, ?, ?, ?, ?) ON CONFLICT(scope, name) DO UPDATE SET "
                "downtime_cost_per_hour = excluded.downtime_cost_per_hour, "
                "planned_downtime_hours = excluded.planned_downtime_hours, "
                "failure_downtime_hours = excluded.failure_downtime_hours",
                (scope, name, new.cost_per_hour, new.planned_hours, new.failure_hours))
            self._audit("set", "costs", f"{scope} {name}", None, dataclasses.asdict(old) if old else None,
                        dataclasses.asdict(new))
        return new
