"""The planner's standing assumptions (pure): shop capacity overall and per site, exchange
pumps on hand per model, turnaround and horizon. Stored once in the database (audited,
``Store.set_plan_setup``), used by ``logbook forecast`` (cron), the TUI plan screen alike;
command-line flags override them for one run (``override``). The limits on each value are
``plan.PlanSettings``'s own (written once there)."""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from datetime import date

from logbook.model import InputRejected, Problem


@dataclass(frozen=True)
class PlanSetup:
    horizon_months: int = 6
    capacity_per_month: int | None = None  # shop jobs a month, all sites; None: no limit
    site_capacity: dict[str, int] = field(default_factory=dict)  # site -> shop jobs a month
    exchange_on_hand: dict[str, int] = field(default_factory=dict)  # model -> exchange pumps on hand
    turnaround_months: int = 1  # months before a removed pump is back as an exchange pump

    def settings(self, start_month: date):
        """The plan's ``PlanSettings`` from ``start_month`` (raises InputRejected as it does)."""
        from logbook.plan import PlanSettings

        return PlanSettings(start_month=start_month, horizon_months=self.horizon_months,
                            capacity_per_month=self.capacity_per_month, site_capacity=dict(self.site_capacity),
                            exchange_on_hand=dict(self.exchange_on_hand), turnaround_months=self.turnaround_months)

    def problems(self, sites=None, models=None) -> list[Problem]:
        """What is wrong with these values (the plan's own limits; sites and models that are not recorded)."""
        problems: list[Problem] = []
        for name, value in (("horizon", self.horizon_months), ("capacity", self.capacity_per_month),
                            ("turnaround", self.turnaround_months), *self.site_capacity.items(),
                            *self.exchange_on_hand.items()):
            if value is not None and (isinstance(value, bool) or not isinstance(value, int)):
                problems.append(Problem(name, value, "a whole number"))
        if problems:
            return problems
        try:
            self.settings(date(2000, 1, 1))
        except InputRejected as exc:
            problems += exc.problems
        if sites is not None:
            for site in sorted(set(self.site_capacity) - set(sites)):
                problems.append(Problem("site capacity", site, "not a recorded site; sites: " + (", ".join(sorted(sites)) or "none")))
        if models is not None:
            for model in sorted(set(self.exchange_on_hand) - set(models)):
                problems.append(Problem("exchange pumps", model, "not a recorded model; models: " + (", ".join(sorted(models)) or "none")))
        return problems

    def as_dict(self) -> dict:
        return {"horizon_months": self.horizon_months, "capacity_per_month": self.capacity_per_month,
                "site_capacity": dict(sorted(self.site_capacity.items())),
                "exchange_on_hand": dict(sorted(self.exchange_on_hand.items())),
                "turnaround_months": self.turnaround_months}

    @classmethod
    def from_dict(cls, data: dict) -> PlanSetup:
        default = cls()
        return cls(horizon_months=data.get("horizon_months", default.horizon_months),
                   capacity_per_month=data.get("capacity_per_month"),
                   site_capacity=dict(data.get("site_capacity") or {}),
                   exchange_on_hand=dict(data.get("exchange_on_hand") or {}),
                   turnaround_months=data.get("turnaround_months", default.turnaround_months))

    def override(self, *, horizon=None, capacity=None, site_capacity=None, exchange=None, turnaround=None) -> PlanSetup:
        """These values for one run (None: the stored one); per-site and per-model values
        given replace the stored ones of those sites and models only."""
        return replace(
            self,
            horizon_months=self.horizon_months if horizon is None else horizon,
            capacity_per_month=self.capacity_per_month if capacity is None else capacity,
            site_capacity={**self.site_capacity, **(site_capacity or {})},
            exchange_on_hand={**self.exchange_on_hand, **(exchange or {})},
            turnaround_months=self.turnaround_months if turnaround is None else turnaround,
        )

    def words(self, models=()) -> str:
        """The assumptions in one line, as the plan screen and reports state them. A value left blank sets
        no limit and is said so; 'none on hand' is said only of a model with 0 exchange pumps (``models``:
        the recorded ones, to say that the others are left blank)."""
        def plural(n, word):
            return f"{n} {word}" + ("" if n == 1 else "s")

        shop = "no limit" if self.capacity_per_month is None else f"{plural(self.capacity_per_month, 'job')} a month"
        parts = [f"shop capacity {shop}"]
        if self.site_capacity:
            parts.append("per site " + ", ".join(f"{s} {n}" for s, n in sorted(self.site_capacity.items())))
        given = sorted(self.exchange_on_hand.items())
        if not given:
            parts.append("exchange pumps no limit set")
        else:
            words = [f"{m} {'none on hand' if n == 0 else n}" for m, n in given]
            if set(models) - set(self.exchange_on_hand):
                words.append("other models no limit set")
            parts.append("exchange pumps " + ", ".join(words))
        parts.append(f"turnaround {plural(self.turnaround_months, 'month')}")
        parts.append(f"horizon {plural(self.horizon_months, 'month')}")
        return "; ".join(parts)
