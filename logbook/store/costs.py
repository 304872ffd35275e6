"""Costs and the currency: read, checked and written in one transaction each, audited."""

from __future__ import annotations

import dataclasses
import math
import re
from collections.abc import Sequence

from logbook.model import CostBook, Downtime, ImportReport, InputRejected, ModelCosts, Problem
from logbook.store.base import StorePart

CURRENCY_RE = re.compile(r"^[A-Z]{3}$")
SCOPES = ("site", "machine")
#: A costs file's columns: scope, name, then the model columns or the downtime columns.
MODEL_COLUMNS = ("planned_cost", "failure_cost")
DOWNTIME_COLUMNS = ("downtime_cost_per_hour", "planned_downtime_hours", "failure_downtime_hours")


def _amount(name: str, value: float | None, unit: str, problems: list[Problem]) -> None:
    if value is None or not isinstance(value, (int, float)) or not math.isfinite(value) or value < 0:
        problems.append(Problem(name, value if value is not None else "", "must be given as zero or more", unit))


def cost_notes(costs: ModelCosts) -> list[str]:
    """What a set of model costs means in plain words (accepted, but worth saying)."""
    if costs.failure <= costs.planned:
        return [f"a failure of {costs.model} costs no more than a planned job: run to failure is cheapest for this model"]
    return []


class CostsMixin(StorePart):
    """Per model job costs, per site and machine downtime, and the currency (settings 'currency')."""

    def costs(self) -> CostBook:
        models: dict[str, ModelCosts] = {}
        sites: dict[str, Downtime] = {}
        machines: dict[str, Downtime] = {}
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
            self._write_currency(value, self.costs().currency)
        return value

    def _write_currency(self, value: str, old: str) -> None:
        """Store the currency (inside the caller's transaction), audited."""
        self.conn.execute("INSERT INTO settings (key, value) VALUES ('currency', ?) "
                          "ON CONFLICT(key) DO UPDATE SET value = excluded.value", (value,))
        self._audit("set", "settings", "currency", None, {"currency": old} if old else None, {"currency": value})

    def set_model_costs(self, model: str, *, planned: float | None, failure: float | None) -> tuple[ModelCosts, list[str]]:
        """Planned and failure cost of one model's jobs; returns them and plain-word notes."""
        problems: list[Problem] = []
        _amount("planned cost", planned, "", problems)
        _amount("failure cost", failure, "", problems)
        if model not in self.models():
            problems.append(Problem("model", model, "is not a known pump model"))
        if problems:
            raise InputRejected(problems)
        assert planned is not None and failure is not None  # _amount found both given
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
        assert cost_per_hour is not None and planned_hours is not None and failure_hours is not None  # _amount found them given
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

    # -- a costs file (logbook import costs FILE): every row or none -------------------------
    def add_costs(self, rows: Sequence[dict], *, lines: Sequence[int] | None = None,
                  dry_run: bool = False) -> ImportReport:
        """Rows of ``scope`` (model, site, machine or currency), ``name`` and that scope's columns: a model's
        ``planned_cost`` and ``failure_cost``, a site's or machine's ``downtime_cost_per_hour``,
        ``planned_downtime_hours`` and ``failure_downtime_hours``; a currency row names the currency the
        amounts are in (set when the logbook has none; another than the logbook's is refused: no
        exchange rates). All checked first, then written
        in one transaction (audited); a row equal to what is stored counts as already present.
        ``flagged`` says what a model's costs mean when a failure costs no more than its job."""
        from logbook.store.batches import Checked

        def line_of(i: int) -> int | None:
            return lines[i] if lines is not None and i < len(lines) else None

        def check() -> Checked:
            book, models = self.costs(), set(self.models())
            machines = self.machines()
            known = {"model": models, "site": {m.site for m in machines.values()}, "machine": set(machines)}
            problems: list[Problem] = []
            items: list[tuple] = []  # (scope, new, old); a currency: (scope, code, None)
            present, notes, seen = 0, [], set[tuple]()
            for i, row in enumerate(rows):
                line = line_of(i)
                scope, name = (row.get("scope") or "").strip().lower(), row.get("name")
                if scope == "currency":
                    code = (name or "").strip().upper()
                    extra = [c for c in (*MODEL_COLUMNS, *DOWNTIME_COLUMNS) if row.get(c) is not None]
                    if not CURRENCY_RE.match(code):
                        problems.append(Problem("name", name or "", "a currency row names a three-letter currency "
                                                "code (ISO 4217), e.g. EUR", line=line))
                    elif extra:
                        problems.append(Problem(extra[0], row[extra[0]], "must be blank for a currency row", line=line))
                    elif "currency" in {s for s, _ in seen}:
                        problems.append(Problem("scope", "currency", "appears twice in this file", line=line))
                    elif book.currency and book.currency != code:
                        problems.append(Problem("name", code, f"the logbook's amounts are in {book.currency}: this "
                                                "file's cannot be taken without exchange rates", line=line))
                    elif book.currency == code:
                        present += 1
                    else:
                        items.append(("currency", code, None))
                    seen.add(("currency", code))
                    continue
                if scope not in known:
                    problems.append(Problem("scope", row.get("scope") or "",
                                            "must be model, site, machine or currency", line=line))
                    continue
                if (scope, name) in seen:
                    problems.append(Problem("name", name, f"appears twice in this file for {scope}", line=line))
                    continue
                seen.add((scope, name))
                if name not in known[scope]:
                    listed = ", ".join(sorted(known[scope])[:8]) or "none recorded"
                    problems.append(Problem("name", name, f"is not a known {scope} (known: {listed})", line=line))
                    continue
                own, other = (MODEL_COLUMNS, DOWNTIME_COLUMNS) if scope == "model" else (DOWNTIME_COLUMNS, MODEL_COLUMNS)
                here: list[Problem] = []
                for col in own:
                    _amount(col, row.get(col), "h" if col.endswith("hours") else "", here)
                for col in other:
                    if row.get(col) is not None:
                        here.append(Problem(col, row[col], f"must be blank for a {scope} row "
                                                           f"(a {scope} row takes {', '.join(own)})"))
                if here:
                    problems += [dataclasses.replace(p, line=line) for p in here]
                    continue
                new: ModelCosts | Downtime
                old: ModelCosts | Downtime | None
                if scope == "model":
                    new = ModelCosts(name, float(row["planned_cost"]), float(row["failure_cost"]))
                    old = book.models.get(name)
                    notes += [f"line {line}: {n}" if line is not None else n for n in cost_notes(new)]
                else:
                    new = Downtime(scope, name, *(float(row[c]) for c in DOWNTIME_COLUMNS))
                    old = (book.sites if scope == "site" else book.machines).get(name)
                if old == new:
                    present += 1
                else:
                    items.append((scope, new, old))
            return Checked(problems, items, present, notes)

        def write(checked: Checked) -> None:
            for scope, new, old in checked.items:
                if scope == "currency":
                    self._write_currency(new, "")  # only ever set where none was
                    continue
                if scope == "model":
                    self.conn.execute(
                        "INSERT INTO costs (scope, name, planned_cost, failure_cost) VALUES ('model', ?, ?, ?) "
                        "ON CONFLICT(scope, name) DO UPDATE SET planned_cost = excluded.planned_cost, "
                        "failure_cost = excluded.failure_cost", (new.model, new.planned, new.failure))
                    key = f"model {new.model}"
                else:
                    self.conn.execute(
                        "INSERT INTO costs (scope, name, downtime_cost_per_hour, planned_downtime_hours, "
                        "failure_downtime_hours) VALUES (?, ?, ?, ?, ?) ON CONFLICT(scope, name) DO UPDATE SET "
                        "downtime_cost_per_hour = excluded.downtime_cost_per_hour, "
                        "planned_downtime_hours = excluded.planned_downtime_hours, "
                        "failure_downtime_hours = excluded.failure_downtime_hours",
                        (scope, new.name, new.cost_per_hour, new.planned_hours, new.failure_hours))
                    key = f"{scope} {new.name}"
                self._audit("set", "costs", key, None, dataclasses.asdict(old) if old else None, dataclasses.asdict(new))

        checked, _ = self._check_then_write(check, write, dry_run=dry_run)
        added = 0 if checked.problems else len(checked.items)
        return ImportReport("costs", added=added, already_present=checked.present, problems=checked.problems,
                            flagged=list(checked.notes), dry_run=dry_run)
