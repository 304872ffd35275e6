"""Rolling-origin evaluation: what the forecast said at past dates, scored on what the record shows later.

At each origin D the fleet is taken as the logbook knew it on D (``logbook.asof``) and
forecast by the engine in one batch (``fleet.pack_fleet`` -> ``fit.fit_batch`` ->
``forecast.forecast_batch``), exactly as ``logbook forecast --as-of D`` would (Tashman,
"Out-of-sample tests of forecasting accuracy", Int. J. Forecasting 16, 2000). Each
forecast series (pump x reading kind) is then scored on the later readings of the same
wear segment (taken after D, before the next event that restarts the kind), as the
record shows them now:

- **PIT**: u = F(y), the forecast's predictive CDF of one new reading at that reading's
  hours (the path mixture with its spread factors, plus the reading-to-reading noise),
  at the observed normalized value. For a calibrated forecast u is uniform on [0, 1]
  (Dawid, JRSS A 147, 1984; Gneiting, Balabdaoui and Raftery, JRSS B 69, 2007): a
  U-shaped histogram means bands too narrow, a hump too wide.
- **Crossings**: the first later reading past the limit. u = P(crossed by then) under
  the forecast: below 0.1 means before P10, above 0.9 after P90. A series not past the
  limit by its last later reading is right-censored there; the tails are estimated by
  the Kaplan-Meier product-limit estimator on u (Kaplan and Meier, JASA 53, 1958). An
  overhaul (no reason is recorded) ends the series as a censoring, not as a crossing.
- **The plan** of each origin (``plan.make_plan``, no capacity limit, 12 months): pumps
  that crossed a limit before the first day of the month the plan gave them (or that
  had no month and crossed within the 12 months), and pumps overhauled more than
  EARLY_DAYS before the P10 date of their nearest kind.
"""

from __future__ import annotations

import copy
import dataclasses
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from datetime import date, timedelta

import numpy as np
from scipy import special

from logbook.analysis import paths
from logbook.analysis.batch import TrendBatch
from logbook.analysis.fit import FitOptions, fit_batch
from logbook.analysis.fleet import pack_fleet
from logbook.analysis.forecast import O_CROSSING, O_NO_CROSSING, forecast_batch
from logbook.analysis.records import RowFigures, kind_records, pump_records
from logbook.analysis.results import FleetForecast
from logbook.analysis.segments import KINDS, PumpReadings
from logbook.analysis.series import _conditions  # the engine's own test conditions of case drain readings
from logbook.analysis.normalize import trended_values
from logbook.analysis.timeline import Timeline
from logbook.asof import Known, fleet_as_of
from logbook.model import ALL_KINDS, SEGMENT_RESETS, EventKind, Fleet

PIT_BINS = 10
NOMINAL = (0.05, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 0.95)  # quantiles of the calibration plot
TAIL = 0.1  # P10 and P90: 10 % on each side
PLAN_MONTHS = 12
EARLY_DAYS = 180  # overhauled this long before its P10 date: much life left (common practice, no published source)
READINGS_BUCKETS = ((2, 3), (4, 6), (7, 12), (13, 10**9))
HORIZON_BUCKETS_MONTHS = ((0, 3), (3, 6), (6, 12), (12, 10**6))
DAYS_PER_MONTH = 365.2425 / 12


# ------------------------------------------------------------------------- the predictive CDF of a reading


class ReadingPredictive:
    """The forecast distribution of one new reading at hours ``x`` for series ``rows`` of ``mixture``
    (1-D, same length). Per path k the reading's value on its Box-Cox scale is Student t with the
    line's degrees of freedom, location the line at ``x`` and variance f^2 (path variance) + (reading
    noise), f the spread factor of the side the value lies on (toward wear: ``spread[0]``, the other:
    ``spread[1]``), as ``PathMixture.crossed_by`` spreads them with ``noise=True``. The per-path terms
    are taken once, so that a search (the median) evaluates only the t CDFs."""

    def __init__(self, mixture: paths.PathMixture, rows: np.ndarray, x: np.ndarray):
        rows = np.asarray(rows, dtype=np.int64)
        x = np.asarray(x, dtype=float)
        self.size = rows.size
        self.sign = mixture.sign[rows]
        fast, slow = mixture.spread[0][rows], mixture.spread[1][rows]
        self.parts = []  # (weight, lam, location, fast variance, slow variance, dof)
        for k, line in enumerate(mixture.lines):
            wk = mixture.weights[rows, k]
            if not wk.any():
                continue
            d = x - line.xbar[rows]
            path_var = line.var_a[rows] + d * d * line.var_b[rows]
            s2 = line.s2[rows]
            self.parts.append((wk, line.lam, line.z0[rows] + line.b[rows] * d, fast * fast * path_var + s2,
                               slow * slow * path_var + s2, np.clip(line.nu[rows], 1.0, 1e6)))

    def _sum(self, z_of, exact: bool) -> np.ndarray:
        out = np.zeros(self.size)
        for wk, lam, loc, var_fast, var_slow, nu in self.parts:
            with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
                gap = z_of(lam) - loc
                t = np.nan_to_num(gap / np.sqrt(np.where(self.sign * gap > 0, var_fast, var_slow)), nan=-np.inf)
                p = special.stdtr(nu, t) if exact else paths.t_cdf(t, nu)
            out += np.where(wk > 0, wk * p, 0.0)
        return np.clip(out, 0.0, 1.0)

    def cdf(self, y: np.ndarray, *, exact: bool = True) -> np.ndarray:
        """P(the reading <= y): exact t (``special.stdtr``), or with ``exact=False`` the engine's fast
        approximation (``paths.t_cdf``, error under 1e-3)."""
        y = np.asarray(y, dtype=float)
        return self._sum(lambda lam: paths.box_cox(y, lam), exact)

    def cdf_of_log(self, log_y: np.ndarray, *, exact: bool = False) -> np.ndarray:
        """``cdf(exp(log_y))`` with each Box-Cox value taken from the log directly ((e^(lam t) - 1) / lam)."""
        return self._sum(lambda lam: log_y if lam == 0.0 else np.expm1(lam * log_y) / lam, exact)

    def median(self, near: np.ndarray, iterations: int = 10) -> np.ndarray:
        """The median, searched within a factor 4 of ``near`` (positive values; bisection on the log value,
        to 0.3 %: the bracket's end where the median lies beyond, so an error past 300 % counts as 300 %)."""
        base = np.log(np.where(near > 0, near, 1.0))
        lo, hi = base - np.log(4.0), base + np.log(4.0)
        for _ in range(iterations):
            mid = 0.5 * (lo + hi)
            up = self.cdf_of_log(mid) >= 0.5
            hi, lo = np.where(up, mid, hi), np.where(up, lo, mid)
        return np.exp(0.5 * (lo + hi))


def reading_cdf(mixture: paths.PathMixture, rows: np.ndarray, x: np.ndarray, y: np.ndarray, *,
                exact: bool = True) -> np.ndarray:
    """P(one new reading at hours ``x`` <= ``y``) for series ``rows`` of ``mixture`` (``ReadingPredictive``)."""
    return ReadingPredictive(mixture, rows, x).cdf(y, exact=exact)


def reading_median(mixture: paths.PathMixture, rows: np.ndarray, x: np.ndarray, near: np.ndarray,
                   iterations: int = 10) -> np.ndarray:
    """The median of one new reading at hours ``x`` (``ReadingPredictive.median``)."""
    return ReadingPredictive(mixture, rows, x).median(near, iterations)


MIN_AT_RISK = 10  # series still followed at the point a tail is read (common practice, no published source)


def kaplan_meier(u: np.ndarray, event: np.ndarray, at: float, min_at_risk: int = 1) -> float | None:
    """Product-limit estimate of P(U <= at) from times ``u`` with ``event`` False for a right-censored
    time (Kaplan and Meier, JASA 53, 1958; ties: events before censorings). None without data, or when
    fewer than ``min_at_risk`` are still followed at ``at`` (the estimate there rests on a handful)."""
    u, event = np.asarray(u, dtype=float), np.asarray(event, dtype=bool)
    if not u.size or np.sum(u >= at) < min_at_risk:
        return None
    order = np.lexsort((~event, u))
    u, event = u[order], event[order]
    at_risk = u.size - np.arange(u.size)
    factors = np.where(event & (u <= at), 1.0 - 1.0 / at_risk, 1.0)
    return float(1.0 - np.prod(factors))


# ------------------------------------------------------------------------- what the record shows later


class LaterReadings:
    """Every current reading of the record, per kind: pump, day, pump hours and normalized value,
    sorted by (pump, day, hours); and per pump and kind the days of the events that restart it."""

    def __init__(self, fleet: Fleet):
        self.timeline = tl = Timeline(fleet.fitments, fleet.readings, fleet.events)
        self.serials = sorted(s for s in fleet.pumps if s in tl.serial_index)
        self.pump_of = {s: i for i, s in enumerate(self.serials)}
        models = [fleet.models[fleet.pumps[s].model] for s in self.serials]
        pumps = PumpReadings.of(tl, self.serials, tl.latest)
        conditions = _conditions(tl, pumps, models)
        self.kinds = []
        for k, kind in enumerate(ALL_KINDS):
            valued = np.flatnonzero(tl.given[k][pumps.reading])
            raw = tl.values[k][pumps.reading[valued]]
            y = trended_values(kind, raw, conditions(valued) if k == 0 else None)
            pump, day, hours = pumps.pump[valued], pumps.day[valued], pumps.hours[valued]
            order = np.lexsort((hours, day, pump))
            self.kinds.append((pump[order], day[order], hours[order], np.asarray(y, dtype=float)[order]))
        resets: dict[tuple[int, int], list[int]] = {}
        self.overhauls: dict[int, list[int]] = {}
        for e in fleet.events:
            if e.serial not in self.pump_of:
                continue
            p = self.pump_of[e.serial]
            for k, kind in enumerate(ALL_KINDS):
                if kind in SEGMENT_RESETS.get(e.kind, ()):
                    resets.setdefault((p, k), []).append(e.happened_on.toordinal())
            if e.kind in (EventKind.OVERHAUL, EventKind.EXCHANGE):
                self.overhauls.setdefault(p, []).append(e.happened_on.toordinal())
        self.resets = {key: np.array(sorted(v), dtype=np.int64) for key, v in resets.items()}
        self.overhauls = {p: sorted(v) for p, v in self.overhauls.items()}

    def segment_end(self, pump: np.ndarray, kind: int, day: int) -> np.ndarray:
        """Per pump: the day of the first event after ``day`` that restarts ``kind`` (a huge day for none)."""
        out = np.full(pump.shape, 1 << 30, dtype=np.int64)  # beyond any day ordinal, below the key shift
        for i, p in enumerate(pump.tolist()):
            days = self.resets.get((p, kind))
            if days is not None:
                j = np.searchsorted(days, day, side="right")
                if j < days.size:
                    out[i] = days[j]
        return out

    def after(self, pump: np.ndarray, kind: int, day: int) -> tuple[np.ndarray, np.ndarray]:
        """For each of ``pump`` (positions; -1 none): entries of ``kind`` taken after ``day`` and before its
        segment ends, as (owner index into ``pump``, entry index into the kind's columns)."""
        p, d, _, _ = self.kinds[kind]
        ok = pump >= 0
        end = self.segment_end(pump, kind, day)
        big = np.int64(1) << 32
        key = p.astype(np.int64) * big + d
        lo = np.searchsorted(key, pump * big + day, side="right")
        hi = np.searchsorted(key, pump * big + end, side="left")
        n = np.where(ok, np.maximum(hi - lo, 0), 0)
        owner = np.repeat(np.arange(pump.size), n)
        start = np.repeat(lo - np.r_[0, np.cumsum(n)[:-1]], n)
        return owner, start + np.arange(n.sum())


# ------------------------------------------------------------------------- many origins as one batch


def forecast_together(batches: Sequence[TrendBatch], *, calibration: bool = True, options: FitOptions | None = None):
    """Fit and forecast several batches as one (``fit.fit_batch``, ``forecast.forecast_batch``), each
    batch's pooling groups kept apart, so that the engine's fixed cost per call is paid once; per batch
    its own (BatchFit, BatchForecast), rows and columns cut back to it: the figures of each batch
    forecast alone (every step of the engine works per pooling group; test_backtest holds them equal)."""
    width = max(b.x.shape[1] for b in batches)
    sizes = [b.x.shape[0] for b in batches]
    offsets, group_base, groups = np.r_[0, np.cumsum(sizes)], 0, []
    for b in batches:
        groups.append(np.where(b.group >= 0, b.group + group_base, -1))
        group_base += int(b.group.max(initial=-1)) + 1

    def padded(a):
        return np.pad(a, ((0, 0), (0, width - a.shape[1])), constant_values=np.nan)

    big = TrendBatch(x=np.vstack([padded(b.x) for b in batches]), y=np.vstack([padded(b.y) for b in batches]),
                     limit=np.concatenate([b.limit for b in batches]),
                     direction=np.concatenate([b.direction for b in batches]), group=np.concatenate(groups),
                     x_now=np.concatenate([b.x_now for b in batches]))
    fit = fit_batch(big, options)
    fc = forecast_batch(big, fit, calibration=calibration)
    total = int(offsets[-1])
    return [(_rows(fit, slice(lo, hi), total, (width, b.x.shape[1])), _rows(fc, slice(lo, hi), total))
            for b, lo, hi in zip(batches, offsets[:-1].tolist(), offsets[1:].tolist())]


def _rows(obj, rows: slice, total: int, columns: tuple[int, int] | None = None):
    """``obj`` (an engine result: dataclass or path mixture) with every per-row array cut to ``rows``;
    with ``columns`` = (width, n), every (rows, width) array also to its first n columns (the fit's
    per-reading arrays: only for the fit, whose other arrays are per row; a forecast's per-quantile or
    a mixture's per-path columns are never cut, whatever their number)."""
    if isinstance(obj, np.ndarray):
        if obj.ndim >= 1 and obj.shape[0] == total:
            obj = obj[rows]
            if columns is not None and obj.ndim == 2 and obj.shape[1] == columns[0]:
                obj = obj[:, :columns[1]]
        return obj
    if isinstance(obj, (list, tuple)):
        return type(obj)(_rows(v, rows, total, columns) for v in obj)
    if dataclasses.is_dataclass(obj) and not isinstance(obj, type):
        return dataclasses.replace(obj, **{f.name: _rows(getattr(obj, f.name), rows, total, columns)
                                           for f in dataclasses.fields(obj) if f.init})
    if isinstance(obj, paths.PathMixture):
        cut = copy.copy(obj)
        for name, value in vars(obj).items():
            setattr(cut, name, _rows(value, rows, total))
        cut.size = rows.stop - rows.start
        return cut
    return obj


# ------------------------------------------------------------------------- the run


@dataclass
class Scores:
    """Everything scored, one entry per later reading (``r_*``) and per forecast series (``c_*``)."""

    r_u: list = field(default_factory=list)  # PIT of the later reading
    r_err: list = field(default_factory=list)  # |observed / predictive median - 1|
    r_keys: list = field(default_factory=list)  # (serial, model, path, readings bucket, horizon bucket)
    c_u: list = field(default_factory=list)  # P(crossed by the crossing or censoring hours)
    c_event: list = field(default_factory=list)  # a crossing was seen
    c_err: list = field(default_factory=list)  # observed crossing hours - P50 hours (NaN: none)
    c_keys: list = field(default_factory=list)  # (serial, model, path, readings bucket, horizon bucket)
    misses: list = field(default_factory=list)  # (origin, serial, model, planned month or None, crossed on)
    early: list = field(default_factory=list)  # (origin, serial, model, overhauled on, P10 date)


def _bucket(values: np.ndarray, buckets) -> np.ndarray:
    """Index of the bucket (lo, hi) holding each value (below the first: the first)."""
    lows = np.array([lo for lo, _ in buckets], dtype=float)
    return np.clip(np.searchsorted(lows, values, side="right") - 1, 0, len(buckets) - 1)


def readings_words(i: int) -> str:
    lo, hi = READINGS_BUCKETS[i]
    return f"{lo}+" if hi > 10**8 else f"{lo}-{hi}"


def horizon_words(i: int) -> str:
    lo, hi = HORIZON_BUCKETS_MONTHS[i]
    return f"{lo}+ months" if hi > 10**5 else f"{lo}-{hi} months"


def run_backtest(fleet_now: Fleet, fleet_history: Fleet, known: Known, origins: Sequence[date], *,
                 site: str | None = None, model: str | None = None, calibration: bool = True,
                 options: FitOptions | None = None, step: Callable[[date], None] | None = None,
                 together: int = 6) -> "BacktestResult":
    """Forecast as of each origin (``fleet_history``: every row with superseded and removed ones, ``known``:
    when each became known) and score on the later record (``fleet_now``: the current readings). The
    origins are forecast ``together`` at a time in one batch (``forecast_together``)."""
    later = LaterReadings(fleet_now)
    sc = Scores()
    sites = {unit: m.site for unit, m in fleet_now.machines.items()}
    origins = list(origins)
    for start in range(0, len(origins), max(together, 1)):
        chunk = origins[start:start + max(together, 1)]
        packed = [(day, pack_fleet(fleet_as_of(fleet_history, known, day), day)) for day in chunk]
        packed = [(day, p) for day, p in packed if p.serials]
        results = forecast_together([p.pack.batch for _, p in packed], calibration=calibration, options=options) \
            if packed else []
        done = {day: (p, fit, fc) for (day, p), (fit, fc) in zip(packed, results)}
        for day in chunk:
            if step is not None:
                step(day)
            if day in done:
                _score_origin(*done[day], day, later, sites, site, model, sc)
    return summarize(sc, tuple(origins), calibration, site=site, model=model)


def _score_origin(packed, fit, fc, origin: date, later: LaterReadings, sites, site, model, sc):
    pk, batch = packed.pack, packed.pack.batch
    mix = fc.mixture
    figures = RowFigures.of(pk, fit, fc)
    kinds = kind_records(packed.serials, pk, fit, fc, figures, origin)
    pumps = pump_records(packed.serials, packed.models, pk, fit, figures, kinds, origin, sites, None)
    keep_pump = np.array([(model is None or pf.model == model) and (site is None or pf.site == site) for pf in pumps])
    serial_rows = np.repeat(np.array(packed.serials, dtype=object), KINDS)
    model_rows = np.repeat(np.array([m.code for m in packed.models], dtype=object), KINDS)
    path_rows = np.array([paths.PATH_WORDS[paths.LAMBDAS[max(int(k), 0)]] for k in fc.path], dtype=object)
    n_used = fit.n_used
    readings_b = _bucket(np.asarray(n_used, dtype=float), READINGS_BUCKETS)
    scored = np.repeat(keep_pump, KINDS) & mix.ok & (n_used > 0) & np.isin(figures.code, (O_CROSSING, O_NO_CROSSING))
    pump_pos = np.array([later.pump_of.get(s, -1) for s in packed.serials], dtype=np.int64)
    day = origin.toordinal()
    crossed_on: dict[str, int] = {}
    for k in range(KINDS):
        rows = np.flatnonzero(scored[k::KINDS]) * KINDS + k
        if not rows.size:
            continue
        owner, entry = later.after(pump_pos[rows // KINDS], k, day)
        p_, d_, h_, y_ = later.kinds[k]
        r = rows[owner]
        x = h_[entry] - pk.origin[r]
        y = y_[entry]
        ahead_months = (d_[entry] - day) / DAYS_PER_MONTH
        horizon_b = _bucket(ahead_months, HORIZON_BUCKETS_MONTHS)
        if r.size:
            predictive = ReadingPredictive(mix, r, x)
            u = predictive.cdf(y)
            med = predictive.median(y)
            with np.errstate(invalid="ignore", divide="ignore"):
                err = np.abs(y / med - 1.0)
            sc.r_u.append(u)
            sc.r_err.append(err)
            sc.r_keys.append(np.stack([serial_rows[r], model_rows[r], path_rows[r], readings_b[r], horizon_b], axis=1))
        # crossings: the first later reading past the limit, else censored at the last later reading
        sign = np.where(batch.direction[rows] < 0, -1.0, 1.0)
        past = sign[owner] * (y - batch.limit[r]) >= 0
        has_later = np.bincount(owner, minlength=rows.size) > 0
        first_past = np.full(rows.size, -1)
        idx = np.flatnonzero(past)
        if idx.size:
            o = owner[idx]
            firsts = np.unique(o, return_index=True)
            first_past[firsts[0]] = idx[firsts[1]]
        last = np.cumsum(np.bincount(owner, minlength=rows.size)) - 1  # owners come in order
        event = first_past >= 0
        at = np.where(event, first_past, last)
        sel = has_later
        if not sel.any():
            continue
        ent = at[sel]
        rr = rows[sel]
        xs = x[ent]
        u_cross = mix.crossed_by(xs[:, None], rr)[:, 0]
        p50 = figures.remaining[rr, 1]
        c_err = np.where(event[sel], xs - batch.x_now[rr] - p50, np.nan)
        months_ahead = (d_[entry][ent] - day) / DAYS_PER_MONTH
        sc.c_u.append(u_cross)
        sc.c_event.append(event[sel])
        sc.c_err.append(c_err)
        sc.c_keys.append(np.stack([serial_rows[rr], model_rows[rr], path_rows[rr], readings_b[rr],
                                   _bucket(months_ahead, HORIZON_BUCKETS_MONTHS)], axis=1))
        for i in np.flatnonzero(event[sel]).tolist():
            s = serial_rows[rr[i]]
            crossed_on[s] = min(crossed_on.get(s, 1 << 40), int(d_[entry][ent[i]]))
    _score_plan(pumps, keep_pump, origin, crossed_on, later, sc)


def _score_plan(pumps, keep_pump, origin: date, crossed_on: dict[str, int], later: LaterReadings, sc: Scores) -> None:
    from logbook.plan import PlanSettings, add_months, make_plan, month_start

    chosen = tuple(pf for pf, keep in zip(pumps, keep_pump.tolist()) if keep)
    start = month_start(origin)
    plan = make_plan(FleetForecast(today=origin, pumps=chosen), PlanSettings(start_month=start, horizon_months=PLAN_MONTHS))
    month_of = {line.serial: line.month for line in (*plan.lines, *plan.unplaced)}
    end = add_months(start, PLAN_MONTHS).toordinal()
    for pf in chosen:
        crossed = crossed_on.get(pf.serial)
        planned = month_of.get(pf.serial)
        if crossed is not None and crossed < end and (planned is None or crossed < planned.toordinal()):
            sc.misses.append((origin, pf.serial, pf.model, planned, date.fromordinal(crossed)))
        p = later.pump_of.get(pf.serial)
        after = [d for d in later.overhauls.get(p, []) if d > origin.toordinal()] if p is not None else []
        worst = pf.worst
        if after and after[0] < end and worst is not None and worst.outcome.value in ("crossing", "no_crossing"):
            p10 = worst.p10_date
            overhauled = date.fromordinal(after[0])
            if p10 is None or (p10 - overhauled).days > EARLY_DAYS:
                sc.early.append((origin, pf.serial, pf.model, overhauled, p10))


# ------------------------------------------------------------------------- the figures


@dataclass(frozen=True)
class Figures:
    """The backtest's figures for one group of forecasts."""

    readings: int  # later readings scored
    below_p10: float | None  # share of later readings below the forecast's 10 % quantile (nominal 0.10)
    above_p90: float | None  # share above its 90 % quantile (nominal 0.10)
    p50_error: float | None  # median |reading / predictive median - 1|
    pit: tuple[int, ...]  # PIT histogram, PIT_BINS equal bins
    observed: tuple[float, ...]  # share of PIT values <= each NOMINAL quantile (the calibration plot)
    series: int  # forecast series with at least one later reading
    crossings: int  # of them: a reading past the limit seen
    before_p10: int
    inside: int  # between P10 and P90
    after_p90: int  # crossed after P90, or followed past P90 without crossing
    open: int  # not crossed yet and followed less than to P90: undecided
    km_before_p10: float | None  # Kaplan-Meier P(crossing before P10), nominal 0.10
    km_after_p90: float | None  # Kaplan-Meier P(crossing after P90), nominal 0.10
    p50_error_hours: float | None  # median |observed crossing hours - P50| over seen crossings


def figures_of(u: np.ndarray, err: np.ndarray, cu: np.ndarray, cev: np.ndarray, cerr: np.ndarray) -> Figures:
    n = int(u.size)
    hist = np.histogram(u, bins=PIT_BINS, range=(0.0, 1.0))[0] if n else np.zeros(PIT_BINS, dtype=int)
    observed = tuple(float(np.mean(u <= q)) for q in NOMINAL) if n else ()
    finite = err[np.isfinite(err)]
    cerr_f = np.abs(cerr[np.isfinite(cerr)])
    before = int(np.sum(cev & (cu < TAIL)))
    after = int(np.sum(cu > 1 - TAIL))
    inside = int(np.sum(cev & (cu >= TAIL) & (cu <= 1 - TAIL)))
    km_lo = kaplan_meier(cu, cev, TAIL, MIN_AT_RISK)
    km_hi = kaplan_meier(cu, cev, 1 - TAIL, MIN_AT_RISK)
    return Figures(
        readings=n, below_p10=float(np.mean(u < TAIL)) if n else None, above_p90=float(np.mean(u > 1 - TAIL)) if n else None,
        p50_error=float(np.median(finite)) if finite.size else None, pit=tuple(int(v) for v in hist), observed=observed,
        series=int(cu.size), crossings=int(cev.sum()), before_p10=before, inside=inside, after_p90=after,
        open=int(cu.size) - before - inside - after, km_before_p10=km_lo,
        km_after_p90=None if km_hi is None else 1.0 - km_hi,
        p50_error_hours=float(np.median(cerr_f)) if cerr_f.size else None,
    )


GROUPINGS = ("model", "path", "readings", "horizon")  # columns 1..4 of the keys


@dataclass(frozen=True)
class BacktestResult:
    origins: tuple[date, ...]
    calibration: bool
    site: str | None
    model: str | None
    overall: Figures
    groups: dict[str, dict[str, Figures]]  # grouping -> label -> figures
    pumps: dict[str, Figures]  # per serial: how past forecasts of this pump did
    misses: tuple[tuple, ...]  # (origin, serial, model, planned month or None, crossed on)
    early: tuple[tuple, ...]  # (origin, serial, model, overhauled on, P10 date or None)


def _cat(parts, dtype=float, width=None):
    if parts:
        return np.concatenate(parts)
    return np.zeros((0, width), dtype=object) if width else np.zeros(0, dtype=dtype)


def _split(codes: list[int], n: int) -> list[np.ndarray]:
    """Positions of each code 0..n-1 in ``codes`` (one sort, not a mask per code)."""
    codes_a = np.asarray(codes, dtype=np.int64)
    order = np.argsort(codes_a, kind="stable")
    return np.split(order, np.searchsorted(codes_a[order], np.arange(1, n)))


def summarize(sc: Scores, origins: tuple[date, ...], calibration: bool, *, site=None, model=None) -> BacktestResult:
    u, err, rk = _cat(sc.r_u), _cat(sc.r_err), _cat(sc.r_keys, width=5)
    cu, cev, cerr, ck = _cat(sc.c_u), _cat(sc.c_event, dtype=bool), _cat(sc.c_err), _cat(sc.c_keys, width=5)
    labels = {"readings": readings_words, "horizon": horizon_words}

    def grouped(col: int) -> dict[str, Figures]:
        keys = sorted(set(rk[:, col].tolist()) | set(ck[:, col].tolist()), key=lambda v: (str(type(v)), v))
        index = {key: i for i, key in enumerate(keys)}
        name = GROUPINGS[col - 1] if col else "pump"
        r_of = _split([index[k] for k in rk[:, col].tolist()], len(keys))
        c_of = _split([index[k] for k in ck[:, col].tolist()], len(keys))
        return {(labels[name](int(key)) if name in labels else str(key)):
                figures_of(u[a], err[a], cu[b], cev[b], cerr[b]) for key, a, b in zip(keys, r_of, c_of)}

    return BacktestResult(
        origins=origins, calibration=calibration, site=site, model=model,
        overall=figures_of(u, err, cu, cev, cerr),
        groups={name: grouped(i + 1) for i, name in enumerate(GROUPINGS)},
        pumps=grouped(0), misses=tuple(sc.misses), early=tuple(sc.early),
    )


def origin_dates(first: date, last: date, every: int, unit: str) -> list[date]:
    """Origins from ``first`` to ``last`` every ``every`` days or months (``unit``: "days" or "months";
    a month step keeps the day of the month, the last day where a month is shorter)."""
    out: list[date] = []
    i = 0
    while True:
        if unit == "days":
            day = first + timedelta(days=every * i)
        else:
            total = first.month - 1 + every * i
            y, m = first.year + total // 12, total % 12 + 1
            nxt = date(y + (m == 12), m % 12 + 1, 1)
            day = date(y, m, min(first.day, (nxt - timedelta(days=1)).day))
        if day > last:
            return out
        out.append(day)
        i += 1


FIRST_AFTER_DAYS = 183  # the default first origin: this long after the first reading
LAST_BEFORE_DAYS = 30  # the default last origin: this long before today (later readings to score on)


def default_span(fleet: Fleet, today: date) -> tuple[date, date] | None:
    """The default first and last origin: six months after the first reading, a month before today
    (None without readings)."""
    if not fleet.readings:
        return None
    return (min(r.taken_on for r in fleet.readings) + timedelta(days=FIRST_AFTER_DAYS),
            today - timedelta(days=LAST_BEFORE_DAYS))


# ------------------------------------------------------------------------- words for the forecast


def calibration_notes(forecast: FleetForecast, *, calibrated: bool = True) -> tuple[str, ...]:
    """One line per pump model: on how many later readings its bands were calibrated, per reading kind,
    or that they are uncalibrated (fewer than ``paths.MIN_SCORES``), or raw (``calibrated=False``)."""
    if not calibrated:
        return ("uncalibrated bands (--no-calibration): the spread the wear paths give, no factors from later readings",)
    by_model: dict[str, dict[str, int]] = {}
    for pf in forecast.pumps:
        for kf in pf.kinds:
            if kf.limit is None:
                continue
            seen = by_model.setdefault(pf.model, {})
            seen[kf.kind.label] = max(seen.get(kf.kind.label, 0), kf.calibrated_on)
    lines = []
    for code in sorted(by_model):
        done = [f"{label} {n:,}" for label, n in by_model[code].items() if n]
        left = [label for label, n in by_model[code].items() if not n]
        words = f"{code} bands calibrated on later readings of {code}: " + ", ".join(done) if done else ""
        if left:
            words += ("; " if words else f"{code} bands ") + f"uncalibrated for {', '.join(left)} (fewer than " \
                     f"{paths.MIN_SCORES} later readings: the bands the paths give)"
        lines.append(words)
    return tuple(lines)


def kind_calibration_words(calibrated_on: int, model: str) -> str:
    """Words for one forecast's band: calibrated on N later readings of MODEL, or uncalibrated."""
    if calibrated_on:
        return f"calibrated on {calibrated_on:,} later readings of {model}"
    return f"uncalibrated (fewer than {paths.MIN_SCORES} later readings of {model})"


__all__ = [
    "BacktestResult", "Figures", "default_span", "LaterReadings", "NOMINAL", "PIT_BINS", "calibration_notes", "figures_of",
    "ReadingPredictive", "kaplan_meier", "kind_calibration_words", "origin_dates", "reading_cdf", "reading_median", "run_backtest",
    "summarize",
]
