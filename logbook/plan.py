"""Monthly overhaul plan: which pump to take out in which month (pure; numpy/stdlib only).

Model (see ``make_plan``):
- A pump is a candidate when one of its readings is past its limit, or its P10
  crossing date falls on or before the last day of the horizon.
- Its target month is the month of its earliest P10 date (the start month when it
  is past the limit or the P10 date lies before the start month).
- Pumps are placed in the engine's one order of urgency (``analysis.status.urgency_key``,
  the order of every pump list) into the latest month <= target that has room: shop capacity per month,
  shop capacity per site per month, and an exchange pump of its model. A pump is
  never placed after its target month; when no month up to the target has room it
  goes to ``Plan.unplaced`` with the reason. The pumps that fit are then re-placed
  least urgent first, so the riskier of two pumps competing for a month is the one
  pulled forward.
- Exchange pool: ``exchange_on_hand[model]`` spare units at the start. A shop job in
  month m takes one out of the pool for months m .. m+turnaround-1 (the removed
  pump is rebuilt and returns as the next spare). Models not listed are not limited.
- Work on kinds in ``on_machine_kinds`` (default: neutral drift, which is re-adjusted
  in place) is listed in its target month without using shop room or a spare.

Risk figure: probability that the limit is crossed before a date, from the
engine's P10/P50/P90 dates by a split lognormal on days from the forecast date
(``crossing_probability``): ln(days) is normal with median ln(d50) and spread
(ln d50 - ln d10)/z0.9 below the median, (ln d90 - ln d50)/z0.9 above it, so the
three given quantiles are reproduced exactly.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import date, timedelta

import numpy as np

from logbook.analysis.results import FLAG_JUMP, FleetForecast, KindForecast, Outcome, PumpForecast
from logbook.analysis.status import urgency_key
from logbook.costing import Candidate, CostedPlan, PlanCosts, cost_plan, job_days
from logbook.economics import split_lognormal_chance
from logbook.leveller import ShopLimits
from logbook.model import InputRejected, Kind, Problem


#: What is done when each reading reaches its limit (common practice, no published source).
ACTION_WORDS = {
    Kind.CASE_DRAIN: "overhaul or exchange the pump",
    Kind.SERVO_PRESSURE: "repair charge supply or control",
    Kind.NEUTRAL_DRIFT: "re-adjust neutral or repair the control",
}

NO_SITE = "(no site)"


# ----------------------------------------------------------------- months


def month_start(day: date) -> date:
    """First day of the month holding ``day``."""
    return day.replace(day=1)


def add_months(month: date, n: int) -> date:
    """First day of the month ``n`` months after ``month`` (n may be negative)."""
    index = month.year * 12 + (month.month - 1) + n
    return date(index // 12, index % 12 + 1, 1)


def months_between(first: date, second: date) -> int:
    """Whole months from the month of ``first`` to the month of ``second``."""
    return (second.year - first.year) * 12 + (second.month - first.month)


def parse_month(text: str, field_name: str = "month") -> date:
    """Parse "YYYY-MM" into the month's first day; InputRejected names what is wrong."""
    parts = text.strip().split("-")
    if len(parts) == 2 and all(p.isascii() and p.isdigit() for p in parts) and len(parts[0]) == 4:
        year, mon = int(parts[0]), int(parts[1])
        if 1 <= mon <= 12 and year >= 1900:
            return date(year, mon, 1)
    raise InputRejected([Problem(field_name, text, "a month written YYYY-MM, e.g. 2026-04")])


def month_label(month: date) -> str:
    return f"{month.year:04d}-{month.month:02d}"


# ----------------------------------------------------------------- risk


def crossing_probability(kf: KindForecast, today: date, by: date) -> float | None:
    """P(the limit is crossed before day ``by``) from the P10/P50/P90 dates (split lognormal).

    1.0 for a pump past its limit; None when the forecast gives no P10 and P50 date.
    """
    if kf.outcome is Outcome.PAST_LIMIT:
        return 1.0
    days = _p_days(kf, today)
    if days is None:
        return None
    ahead = (by - today).days
    if ahead <= 0:
        return 0.0
    return float(split_lognormal_chance(*days)(np.asarray(ahead, dtype=float)))


def _p_days(kf: KindForecast, today: date) -> tuple[float, float, float | None] | None:
    """Days from ``today`` to the P10, P50 and P90 dates (P90 may be None)."""
    if kf.outcome is not Outcome.CROSSING or kf.p10_date is None or kf.p50_date is None:
        return None
    d10 = max((kf.p10_date - today).days, 0.5)
    d50 = max((kf.p50_date - today).days, d10)
    d90 = float((kf.p90_date - today).days) if kf.p90_date is not None else None
    return float(d10), float(d50), d90


# ----------------------------------------------------------------- records


@dataclass(frozen=True)
class PlanSettings:
    """What the shop can do: start month, horizon, capacities and spare pumps."""

    start_month: date
    horizon_months: int = 6
    capacity_per_month: int | None = None  # shop jobs per month, all sites; None = no limit
    site_capacity: dict[str, int] = field(default_factory=dict)  # site -> shop jobs per month
    exchange_on_hand: dict[str, int] = field(default_factory=dict)  # model -> spare pumps
    turnaround_months: int = 1  # months a removed pump takes to come back as a spare
    on_machine_kinds: tuple[Kind, ...] = (Kind.NEUTRAL_DRIFT,)

    def __post_init__(self) -> None:
        problems: list[Problem] = []
        if self.start_month.day != 1:
            problems.append(Problem("start_month", self.start_month.isoformat(), "the first day of a month"))
        if not 1 <= self.horizon_months <= 60:
            problems.append(Problem("horizon", self.horizon_months, "a whole number of months from 1 to 60"))
        if self.capacity_per_month is not None and self.capacity_per_month < 0:
            problems.append(Problem("capacity", self.capacity_per_month, "zero or more jobs per month"))
        for site, cap in self.site_capacity.items():
            if cap < 0:
                problems.append(Problem(f"site capacity {site}", cap, "zero or more jobs per month"))
        for model, count in self.exchange_on_hand.items():
            if count < 0:
                problems.append(Problem(f"exchange {model}", count, "zero or more spare pumps"))
        if not 0 <= self.turnaround_months <= 24:
            problems.append(Problem("turnaround", self.turnaround_months, "0 to 24 months"))
        if problems:
            raise InputRejected(problems)

    @property
    def months(self) -> tuple[date, ...]:
        return tuple(add_months(self.start_month, i) for i in range(self.horizon_months))

    @property
    def end_day(self) -> date:
        """Last day of the horizon."""
        return add_months(self.start_month, self.horizon_months) - timedelta(days=1)


@dataclass(frozen=True)
class PlanLine:
    """One pump in the plan: when, why and how sure."""

    serial: str
    model: str
    machine: str | None
    site: str | None
    month: date | None  # planned month (first day); None when it does not fit
    target_month: date  # latest month that keeps the pump ahead of its P10 date
    kind: Kind  # the reading that drives the date
    outcome: Outcome
    latest_value: float | None
    limit_value: float | None
    p10_hours: float | None
    p50_hours: float | None
    p90_hours: float | None
    p10_date: date | None
    p50_date: date | None
    p90_date: date | None
    chance_by_month_start: float | None  # P(crossed before the planned month starts)
    chance_by_month_end: float | None  # P(crossed before the planned month ends)
    shop: bool  # uses shop room and an exchange pump
    also_due: tuple[Kind, ...] = ()  # other readings likely to cross in the horizon
    note: str = ""
    expected_cost: float | None = None  # of the planned month (None without costs)
    cost_month_earlier: float | None = None  # expected cost had the job gone one month earlier
    cost_month_later: float | None = None  # ... one month later (or after the horizon)

    @property
    def months_early(self) -> int | None:
        """How many months before its target the pump was pulled forward."""
        return None if self.month is None else months_between(self.month, self.target_month)

    @property
    def action(self) -> str:
        return ACTION_WORDS[self.kind]

    @property
    def reason(self) -> str:
        """One sentence: which reading, where it stands, and when it is expected to cross."""
        unit = self.kind.unit
        where = ""
        if self.latest_value is not None and self.limit_value is not None:
            where = f" at {self.latest_value:.2f} {unit} against a limit of {self.limit_value:.2f} {unit}"
        if self.outcome is Outcome.PAST_LIMIT:
            return f"{self.kind.label}{where}: already past the limit"
        dates = ", ".join(
            f"{name} {d.isoformat()}"
            for name, d in (("P10", self.p10_date), ("P50", self.p50_date), ("P90", self.p90_date))
            if d is not None
        )
        left = f"; {self.p10_hours:.0f} h left at P10" if self.p10_hours is not None else ""
        return f"{self.kind.label}{where}: crossing {dates}{left}"


@dataclass(frozen=True)
class Retest:
    """A pump to be tested again before the plan acts on it: its newest reading of ``kind`` lies far
    off its trend (a unit mix-up or a misread gauge looks like this) and was set aside."""

    serial: str
    model: str
    machine: str | None
    site: str | None
    kind: Kind
    reading: float | None  # the newest reading as normalized, the one set aside
    taken_on: date | None
    trend_outcome: Outcome  # what the trend says without it

    @property
    def reason(self) -> str:
        value = f" ({self.reading:.2f} {self.kind.unit} on {self.taken_on.isoformat()})" if self.reading is not None and self.taken_on else ""
        return (f"newest {self.kind.label} reading{value} is far off its trend: read it again before an overhaul "
                "is planned on it; a second reading that agrees makes it wear")


@dataclass(frozen=True)
class Plan:
    settings: PlanSettings
    today: date  # the forecast's date
    lines: tuple[PlanLine, ...]  # placed, by month then urgency
    unplaced: tuple[PlanLine, ...]  # due but no room up to the target month
    shop_load: dict[date, int]  # shop jobs per month
    site_load: dict[tuple[date, str], int]
    spares_out: dict[tuple[date, str], int]  # exchange pumps out of the pool per (month, model)
    costs: CostedPlan | None = None  # money, when costs were given for every shop job
    currency: str = ""
    placement: str = "greedy"  # "greedy" (no costs) or "least expected cost" (the integer program)
    placement_note: str = ""  # why the greedy pass placed the pumps although costs were given
    retests: tuple[Retest, ...] = ()  # pumps to read again first (their newest reading set aside)

    def spend_per_month(self) -> dict[date, float]:
        """Expected spend of the planned shop jobs per month (empty without costs)."""
        out: dict[date, float] = {}
        for line in self.lines:
            if line.month is not None and line.expected_cost is not None and line.shop:
                out[line.month] = out.get(line.month, 0.0) + line.expected_cost
        return out

    def month_lines(self, month: date) -> tuple[PlanLine, ...]:
        return tuple(line for line in self.lines if line.month == month)

    def line_for(self, serial: str) -> PlanLine | None:
        for line in self.lines + self.unplaced:
            if line.serial == serial:
                return line
        return None


# ----------------------------------------------------------------- planning


def _is_due(kf: KindForecast, end_day: date) -> bool:
    if kf.outcome is Outcome.PAST_LIMIT:
        return True
    return kf.outcome is Outcome.CROSSING and kf.p10_hours is not None and (
        kf.p10_date is None or kf.p10_date <= end_day
    )


def _urgency(kf: KindForecast) -> tuple:
    """Which of a pump's due kinds drives its plan line: past limit first (furthest past first),
    then earliest P10, P50. Pumps themselves go in ``urgency_key`` order."""
    if kf.outcome is Outcome.PAST_LIMIT:
        over = kf.percent_of_limit or 0.0
        if kf.limit is not None and kf.limit.direction == "below":
            over = -over
        return (0, date.min, date.min, -over)
    return (1, kf.p10_date or date.max, kf.p50_date or date.max, 0.0)


def _line(pf: PumpForecast, kf: KindForecast, due: list[KindForecast], today, month, target, shop, note,
          expected_cost=None, cost_earlier=None, cost_later=None) -> PlanLine:
    start = month or target
    return PlanLine(
        serial=pf.serial,
        model=pf.model,
        machine=pf.machine,
        site=pf.site,
        month=month,
        target_month=target,
        kind=kf.kind,
        outcome=kf.outcome,
        latest_value=kf.latest_value,
        limit_value=kf.limit.value if kf.limit else None,
        p10_hours=kf.p10_hours,
        p50_hours=kf.p50_hours,
        p90_hours=kf.p90_hours,
        p10_date=kf.p10_date,
        p50_date=kf.p50_date,
        p90_date=kf.p90_date,
        chance_by_month_start=crossing_probability(kf, today, start) if month else None,
        chance_by_month_end=crossing_probability(kf, today, add_months(start, 1)),
        shop=shop,
        also_due=tuple(k.kind for k in due if k is not kf),
        note=note,
        expected_cost=expected_cost,
        cost_month_earlier=cost_earlier,
        cost_month_later=cost_later,
    )


class _Shop:
    """Running loads of one placement pass: shop jobs, site jobs, spares out of the pool."""

    def __init__(self, settings: PlanSettings):
        self.settings = settings
        self.shop_load = {m: 0 for m in settings.months}
        self.site_load: dict[tuple[date, str], int] = {}
        self.spares_out: dict[tuple[date, str], int] = {}

    def _pool_months(self, month: date, span: int) -> list[date]:
        return [m for m in (add_months(month, k) for k in range(span)) if m in self.shop_load]

    def full(self, month: date, pf: PumpForecast) -> str:
        """Empty string when ``month`` can take the pump, else what is full."""
        s = self.settings
        if s.capacity_per_month is not None and self.shop_load[month] >= s.capacity_per_month:
            return "shop full"
        site = pf.site or NO_SITE
        if site in s.site_capacity and self.site_load.get((month, site), 0) >= s.site_capacity[site]:
            return f"site {site} full"
        if pf.model in s.exchange_on_hand:
            pool = s.exchange_on_hand[pf.model]
            for m in self._pool_months(month, max(s.turnaround_months, 1)):
                if self.spares_out.get((m, pf.model), 0) >= pool:
                    return f"no exchange {pf.model} pump"
        return ""

    def take(self, month: date, pf: PumpForecast) -> None:
        self.shop_load[month] += 1
        site = pf.site or NO_SITE
        self.site_load[(month, site)] = self.site_load.get((month, site), 0) + 1
        if pf.model in self.settings.exchange_on_hand:
            for m in self._pool_months(month, self.settings.turnaround_months):
                self.spares_out[(m, pf.model)] = self.spares_out.get((m, pf.model), 0) + 1

    def place(self, pf: PumpForecast, target: date) -> tuple[date | None, str]:
        """Put the pump in the latest month <= target with room; (month, "") or (None, why)."""
        blocked = []
        for back in range(months_between(self.settings.start_month, target) + 1):
            month = add_months(target, -back)
            why = self.full(month, pf)
            if not why:
                self.take(month, pf)
                return month, ""
            blocked.append(why)
        return None, self.no_room(target, blocked)

    def no_room(self, target: date, blocked: list[str]) -> str:
        return "no room up to " + month_label(target) + (": " + ", ".join(sorted(set(blocked))) if blocked else "")

    def why_not(self, pf: PumpForecast, target: date) -> str:
        """Why no month up to ``target`` can take the pump with the loads as they stand."""
        months = (add_months(target, -back) for back in range(months_between(self.settings.start_month, target) + 1))
        return self.no_room(target, [why for why in (self.full(m, pf) for m in months) if why])


def _target(kf: KindForecast, settings: PlanSettings) -> date:
    if kf.outcome is Outcome.PAST_LIMIT or kf.p10_date is None or kf.p10_date < settings.start_month:
        return settings.start_month
    return month_start(kf.p10_date)


def _candidates(forecast: FleetForecast, settings: PlanSettings) -> list[tuple]:
    """(urgency, serial, pump, driving kind, due kinds, needs the shop) for every due pump, most urgent first."""
    candidates = []
    for pf in forecast.pumps:
        due = sorted((k for k in pf.kinds if _is_due(k, settings.end_day)), key=_urgency)
        if not due:
            continue
        shop_due = [k for k in due if k.kind not in settings.on_machine_kinds]
        driver = (shop_due or due)[0]
        candidates.append((urgency_key(pf), pf.serial, pf, driver, due, bool(shop_due)))
    candidates.sort(key=lambda c: c[0])  # the engine's one most-urgent-first order
    return candidates


def _greedy(candidates: list[tuple], settings: PlanSettings, today: date):
    """The greedy passes: months per serial, the unplaced lines, the shop loads.

    Pass 1 takes pumps most urgent first, so the riskiest get room and the rest
    overflow. Pass 2 re-places the pumps that fitted least urgent first, so that of
    two pumps competing for a month the more urgent one is pulled forward; if pass 2
    cannot place them all (spares and sites can make order matter) pass 1 stands.
    """
    first = _Shop(settings)
    months: dict[str, date] = {}
    unplaced: dict[str, str] = {}
    in_shop = []
    p10: dict[str, date | None] = {}
    for _, serial, pf, kf, due, shop in candidates:
        target = _target(kf, settings)
        if kf.outcome is Outcome.CROSSING and kf.p10_date is None:
            unplaced[serial] = "no machine utilisation to turn hours into a date"
        elif not shop:
            months[serial] = target
        else:
            month, why = first.place(pf, target)
            if month is None:
                unplaced[serial] = why
            else:
                months[serial] = month
                in_shop.append((serial, pf, target))
                p10[serial] = kf.p10_date if kf.outcome is not Outcome.PAST_LIMIT else None

    second = _Shop(settings)
    second_months = {}
    for serial, pf, target in reversed(in_shop):
        month, _ = second.place(pf, target)
        if month is None:
            break
        second_months[serial] = month
    shop = first
    if len(second_months) == len(in_shop):
        months.update(second_months)
        shop = second
    _p10_order(months, in_shop, p10)
    return months, unplaced, shop


def _p10_order(months: dict[str, date], in_shop: list[tuple], p10: dict[str, date | None]) -> None:
    """Within each site and model, the earlier P10 gets the earlier month: the months the
    pass gave that group are handed out again in P10 order (ties: the pass's own, most
    urgent first). Pumps of one site and model load the same shop, site and exchange pool,
    so every load stays as it was; and as each pump's month was no later than its P10
    month, the sorted hand-out keeps that too (the earliest month to the earliest deadline)."""
    groups: dict[tuple, list[tuple]] = {}
    for rank, (serial, pf, target) in enumerate(in_shop):  # past its limit (no P10 date): first
        groups.setdefault((pf.site or NO_SITE, pf.model), []).append((p10[serial] or date.min, rank, serial))
    for members in groups.values():
        given = sorted(months[serial] for _, _, serial in members)
        for month, (_, _, serial) in zip(given, sorted(members)):
            months[serial] = month


def _least_cost(candidates, settings: PlanSettings, today: date, costs: PlanCosts, greedy: dict[str, date]):
    """The integer program's months for the shop jobs (None when some shop job has no costs)."""
    shop_jobs = [c for c in candidates if c[5] and not (c[3].outcome is Outcome.CROSSING and c[3].p10_date is None)]
    missing = [c[1] for c in shop_jobs if c[1] not in costs.pumps]
    if missing:
        return None, f"no costs for {len(missing)} pump(s) (e.g. {missing[0]}): placed by the greedy pass"
    index = {m: i for i, m in enumerate(settings.months)}
    cands = []
    for _, serial, pf, kf, _due, _shop in shop_jobs:
        days = None if kf.outcome is Outcome.PAST_LIMIT else _p_days(kf, today)
        cands.append(Candidate(serial, pf.site or NO_SITE, pf.model, index[_target(kf, settings)], days,
                               pf.hours_per_day or 0.0))
    limits = ShopLimits(settings.horizon_months, settings.capacity_per_month, dict(settings.site_capacity),
                        dict(settings.exchange_on_hand), settings.turnaround_months)
    month_days = job_days(today, settings.months, add_months(settings.start_month, settings.horizon_months))
    greedy_index = {c.serial: index.get(greedy[c.serial]) if c.serial in greedy else None for c in cands}
    return cost_plan(cands, costs, limits, month_days, greedy_index), ""


def make_plan(forecast: FleetForecast, settings: PlanSettings, costs: PlanCosts | None = None) -> Plan:
    """Level the due pumps of ``forecast`` into the months of ``settings``.

    Without ``costs`` (or when a shop job has none) the greedy passes place the pumps
    (``_greedy``); with costs for every shop job the integer program of
    ``logbook.leveller`` places them at least expected cost within the same limits and
    P10 deadlines (``logbook.costing``), and every line carries its expected cost.
    """
    today = forecast.today
    candidates = _candidates(forecast, settings)
    months, unplaced, shop = _greedy(candidates, settings, today)
    costed, placement_note = (None, "") if costs is None else _least_cost(candidates, settings, today, costs, months)
    if costed is not None:
        shop = _Shop(settings)
        no_room = []
        for _, serial, pf, kf, _due, in_the_shop in candidates:
            if serial in costed.months:
                index = costed.months[serial]
                unplaced.pop(serial, None)
                months.pop(serial, None)
                if index is None:
                    unplaced[serial] = "least cost after the horizon"
                    if serial in costed.left_over:
                        no_room.append((serial, pf, _target(kf, settings)))
                else:
                    months[serial] = settings.months[index]
                    shop.take(months[serial], pf)
        for serial, pf, target in no_room:  # what is full, with every placed job in
            unplaced[serial] = shop.why_not(pf, target)

    placed, left = [], []
    for _, serial, pf, kf, due, in_the_shop in candidates:
        target = _target(kf, settings)
        money = _money(costed, serial, months.get(serial), settings)
        if serial in unplaced:
            left.append(_line(pf, kf, due, today, None, target, in_the_shop, unplaced[serial], *money))
            continue
        month = months[serial]
        notes = ["on the machine"] if not in_the_shop else []
        if month < target:
            notes.append(f"pulled forward {months_between(month, target)} month(s)")
        elif month > target:
            notes.append(f"{months_between(target, month)} month(s) after its P10 month")
        if kf.p10_date is not None and kf.p10_date < settings.start_month:
            notes.append(f"P10 date {kf.p10_date.isoformat()} is before the plan starts")
        if any(FLAG_JUMP in k.flags for k in pf.kinds):
            notes.append("test again first: its newest reading is set aside")
        placed.append(_line(pf, kf, due, today, month, target, in_the_shop, "; ".join(notes), *money))
    order = {c[1]: i for i, c in enumerate(candidates)}
    placed.sort(key=lambda line: (line.month, order[line.serial]))
    return Plan(
        settings=settings,
        today=today,
        lines=tuple(placed),
        unplaced=tuple(left),
        shop_load=shop.shop_load,
        site_load=shop.site_load,
        spares_out=shop.spares_out,
        costs=costed,
        currency=costs.currency if costs is not None else "",
        placement="least expected cost" if costed is not None else "greedy",
        placement_note=placement_note,
        retests=retests_of(forecast),
    )


def retests_of(forecast: FleetForecast) -> tuple[Retest, ...]:
    """Every pump whose newest reading of some kind was set aside as far off its trend, most urgent first."""
    out = []
    for pf in sorted(forecast.pumps, key=urgency_key):
        for kf in pf.kinds:
            if FLAG_JUMP in kf.flags:
                out.append(Retest(pf.serial, pf.model, pf.machine, pf.site, kf.kind, kf.latest_value, kf.latest_on,
                                  kf.outcome))
    return tuple(out)


def _money(costed: CostedPlan | None, serial: str, month: date | None, settings: PlanSettings):
    """(expected cost of the chosen month, of one month earlier, of one month later) or Nones."""
    if costed is None or serial not in costed.by_month:
        return None, None, None
    expected = costed.by_month[serial].expected
    i = settings.months.index(month) if month in settings.months else len(expected) - 1
    return expected[i], (expected[i - 1] if i > 0 else None), (expected[i + 1] if i + 1 < len(expected) else None)


__all__ = [
    "ACTION_WORDS",
    "Plan",
    "PlanLine",
    "PlanSettings",
    "Retest",
    "add_months",
    "crossing_probability",
    "make_plan",
    "month_label",
    "month_start",
    "months_between",
    "parse_month",
    "retests_of",
]
