"""Calibration of the crossing forecast against fleets whose truth is known (a script, not a test).

    python tests/bench/bench_calibration.py            # 5 seeds x 240 pumps, 4 % and 10 % noise
    python tests/bench/bench_calibration.py --quick    # 2 seeds x 120 pumps
    python tests/bench/bench_calibration.py --with-noise   # the engine's prediction band (forecast_fleet(with_noise=True))
    python tests/bench/bench_calibration.py --no-pool      # each pump on its own (FitOptions(pool=False))

Fleets come from ``truth_fleet`` (written apart from the engine). Each is forecast as of
its cut date with only the readings before it, by ``logbook.analysis.fleet.forecast_fleet``
and, in the same run, by a baseline: a straight ordinary least squares line of log(y)
against operating hours per pump and kind, own readings only, whose crossing quantiles
come from the Student t prediction band of one new observation (Draper and Smith,
Applied Regression Analysis, 3rd ed., 1998, sec. 3.1), dates from the pump's own average
hours per day between its first and newest reading.

Scored: every pump and kind whose true condition wears toward its limit (the crossing is
within the engine's 20,000 h horizon by construction); "stable" kinds (never cross) are a
group of their own and not in "all". A crossing counts before P10 when it comes earlier
than P10 (a P10 beyond the horizon included), after P90 only when P90 is given (finite)
and the truth comes later; otherwise inside (a P90 beyond the horizon is open-ended). |P50 error| is
|P50 - truth| / (truth - cut), in hours and in days (P50 beyond the horizon: infinite
error). Rows the method declines (too few readings, no data, or "past limit" though the
truth is not) are counted apart. Targets (issue 12): coverage 80 +/- 5 % overall, per path
type and per readings-count class; each tail at most 13 %; median |P50 error| at most 15 %
at 4 % noise. Coverage is the share of true crossings inside [P10, P90] (Gneiting,
Balabdaoui and Raftery, JRSS B 69, 2007: calibration of probabilistic forecasts).
"""

from __future__ import annotations

import argparse
import math
import sys
import time
from collections import Counter, defaultdict
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from scipy import stats

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))  # the repository, for tests.bench.truth_fleet

from logbook.analysis.fleet import forecast_fleet  # noqa: E402
from logbook.model import Kind  # noqa: E402
from tests.bench.truth_fleet import PATHS, USAGES, WEARING_PATHS, TruthFleet, make_truth_fleet, reference_value  # noqa: E402

HORIZON_HOURS = 20_000.0  # the engine's default horizon
QUANTILES = (0.1, 0.5, 0.9)
FORECAST = ("crossing", "no_crossing")  # engine outcomes that carry quantiles
TARGET_COVER, TARGET_TOL, TARGET_TAIL, TARGET_P50 = 80.0, 5.0, 13.0, 15.0


@dataclass
class Preds:
    """One method's answers for a list of truth rows: quantiles in hours since fitting and in day ordinals.

    NaN = declined (``why`` says why); inf = beyond the horizon (or never)."""

    hours: np.ndarray  # (R, 3)
    days: np.ndarray  # (R, 3)
    why: list[str]  # "" for a forecast, else the reason it was declined
    path: list[str]
    flags: list[frozenset]
    per_day: np.ndarray  # (R,) hours per day the method assumed


# --- the engine ---


def engine_preds(tf: TruthFleet, with_noise: bool = False, options=None) -> Preds:
    fc = forecast_fleet(tf.fleet, tf.cut, with_noise=with_noise, options=options)
    by_key, rate = {}, {}
    for pf in fc.pumps:
        rate[pf.serial] = pf.hours_per_day
        for kf in pf.kinds:
            by_key[(pf.serial, kf.kind)] = kf
    r = len(tf.truth)
    hours, days = np.full((r, 3), np.nan), np.full((r, 3), np.nan)
    why, path, flags, per_day = [], [], [], np.full(r, np.nan)
    for i, t in enumerate(tf.truth):
        kf = by_key.get((t.serial, t.kind))
        if kf is None:
            why.append("not forecast"), path.append("none"), flags.append(frozenset())
            continue
        outcome = getattr(kf.outcome, "value", kf.outcome)
        path.append(kf.path), flags.append(frozenset(kf.flags))
        per_day[i] = np.nan if rate.get(t.serial) is None else rate[t.serial]
        if outcome not in FORECAST:
            why.append(outcome)
            continue
        why.append("")
        now = kf.hours_in_segment or 0.0
        for j, (h, d) in enumerate(((kf.p10_hours, kf.p10_date), (kf.p50_hours, kf.p50_date), (kf.p90_hours, kf.p90_date))):
            hours[i, j] = math.inf if h is None else now + h
            if h is None:
                days[i, j] = math.inf
            elif d is not None:
                days[i, j] = d.toordinal()
            elif not (per_day[i] > 0):
                days[i, j] = np.nan  # hours but no utilisation: no date
            else:
                days[i, j] = math.inf
        if np.isnan(days[i]).any():
            days[i] = np.nan
    return Preds(hours, days, why, path, flags, per_day)


# --- the baseline: OLS on log(y), t prediction band ---


def ols_crossings(x, y, limit: float, sign: float, x_now: float, horizon: float = HORIZON_HOURS,
                  quantiles=QUANTILES, steps: int = 4000) -> np.ndarray:  # fmt: skip
    """Crossing quantiles (absolute hours) of a straight OLS line of log(y) on x with a t prediction band.

    P(crossing <= x') = P(a new log reading at x' is beyond log(limit)), so the q-quantile is the
    first x' >= x_now at which sign * (log L - m(x')) / se_pred(x') falls to t_{1-q, n-2}; inf if
    not within ``horizon``. Needs 3 readings (one residual degree of freedom)."""
    x, ly = np.asarray(x, dtype=float), np.log(np.asarray(y, dtype=float))
    n = len(x)
    xbar = x.mean()
    sxx = float(((x - xbar) ** 2).sum())
    b = float(((x - xbar) * (ly - ly.mean())).sum() / sxx)
    a = ly.mean() - b * xbar
    s2 = float(((ly - a - b * x) ** 2).sum()) / (n - 2)
    grid = x_now + np.linspace(0.0, horizon, steps + 1)
    se = np.sqrt(s2 * (1.0 + 1.0 / n + (grid - xbar) ** 2 / sxx))
    g = sign * (math.log(limit) - (a + b * grid)) / np.maximum(se, 1e-300)
    out = []
    for q in quantiles:
        crit = 0.0 if q == 0.5 else stats.t.ppf(1.0 - q, n - 2)
        below = np.flatnonzero(g <= crit)
        if not below.size:
            out.append(math.inf)
            continue
        k = int(below[0])
        if k == 0:
            out.append(float(grid[0]))
            continue
        g0, g1 = g[k - 1], g[k]  # straight-line interpolation between grid points
        out.append(float(grid[k - 1] + (grid[k] - grid[k - 1]) * (g0 - crit) / (g0 - g1)))
    return np.array(out)


def baseline_preds(tf: TruthFleet) -> Preds:
    fleet = tf.fleet
    fit_of = {f.serial: f for f in fleet.fitments}
    reads = defaultdict(list)
    for rd in fleet.readings:
        reads[rd.serial].append(rd)
    r = len(tf.truth)
    hours, days = np.full((r, 3), np.nan), np.full((r, 3), np.nan)
    why, per_day = [], np.full(r, np.nan)
    cut = tf.cut.toordinal()
    for i, t in enumerate(tf.truth):
        model = fleet.models[t.model]
        rs = sorted(reads[t.serial], key=lambda rd: (rd.taken_on, rd.machine_hours))
        fit = fit_of[t.serial]
        pts = [(rd.machine_hours - fit.machine_hours_at_fit, reference_value(rd, t.kind, model), rd) for rd in rs]
        pts = [(x, y, rd) for x, y, rd in pts if y is not None and y > 0]
        if len(pts) < 3 or len({x for x, _, _ in pts}) < 2:
            why.append("too_few")
            continue
        x = [p[0] for p in pts]
        y = [p[1] for p in pts]
        sign = 1.0 if t.direction == "above" else -1.0
        if sign * (y[-1] - t.limit) >= 0:
            why.append("past_limit")
            continue
        first, last = pts[0][2], pts[-1][2]
        span = last.taken_on.toordinal() - first.taken_on.toordinal()
        rate = (last.machine_hours - first.machine_hours) / span if span > 0 else np.nan
        per_day[i] = rate
        x_now = x[-1] + (rate * (cut - last.taken_on.toordinal()) if rate == rate else 0.0)
        q = ols_crossings(x, y, t.limit, sign, x_now)
        hours[i] = q
        why.append("")
        with np.errstate(invalid="ignore", divide="ignore"):
            days[i] = np.where(np.isinf(q), np.inf, cut + np.ceil(np.maximum(q - x_now, 0.0) / rate)) if rate > 0 else np.nan
    return Preds(hours, days, why, ["ols-log"] * r, [frozenset()] * r, per_day)


# --- scoring ---


def score(q: np.ndarray, truth: np.ndarray, ref: np.ndarray) -> dict:
    """Coverage, tails and median |P50 error| (% of truth - ref) of forecast rows (q without NaN)."""
    ok = ~np.isnan(q).any(axis=1)
    q, tv, rf = q[ok], truth[ok], ref[ok]
    n = len(q)
    if not n:
        return {"n": 0}
    before = tv < q[:, 0]  # P10 beyond the horizon and a crossing within it: before P10
    after = np.isfinite(q[:, 2]) & (tv > q[:, 2])
    fin = np.isfinite(tv)
    with np.errstate(invalid="ignore", divide="ignore"):
        err = np.where(np.isfinite(q[fin, 1]), np.abs(q[fin, 1] - tv[fin]) / (tv[fin] - rf[fin]), np.inf)
    return {"n": n, "cover": 100.0 * (1 - before.mean() - after.mean()), "before": 100.0 * before.mean(),
            "after": 100.0 * after.mean(), "p50": 100.0 * float(np.median(err)) if err.size else np.nan}  # fmt: skip


def _mark(value: float, ok: bool | None) -> str:
    if value != value:
        return "    -  "
    return f"{value:5.1f}{' ' if ok is None else ('✓' if ok else '✗')} "


def _cells(s: dict, with_p50_target: bool, with_cover_target: bool = True) -> str:
    if not s.get("n"):
        return "    -      -      -      -   "
    cover_ok = abs(s["cover"] - TARGET_COVER) <= TARGET_TOL if with_cover_target else None
    tails = (s["before"] <= TARGET_TAIL, s["after"] <= TARGET_TAIL) if with_cover_target else (None, None)
    p50_ok = s["p50"] <= TARGET_P50 if with_p50_target else None
    return (_mark(s["cover"], cover_ok) + _mark(s["before"], tails[0]) + _mark(s["after"], tails[1])
            + _mark(s["p50"], p50_ok))  # fmt: skip


def groups(truth) -> list[tuple[str, np.ndarray, bool]]:
    """(label, row mask, judged against the targets) of the table."""
    path = np.array([t.path for t in truth])
    wearing = path != "stable"
    cls = np.array([t.readings_class for t in truth])
    usage = np.array([t.usage for t in truth])
    step = np.array([t.step or "" for t in truth])
    outlier = np.array([t.outlier or "" for t in truth])
    out = [("all (wearing)", wearing, True)]
    out += [(f"path {p}", path == p, p != "stable") for p in PATHS]
    out += [(f"readings {c}", wearing & (cls == c), True) for c in ("2-4", "5-7", "8+")]
    out += [(f"usage {u}", wearing & (usage == u), False) for u in USAGES]
    out += [("step +40 %", wearing & (step == "plus40"), False), ("step 8 sigma", wearing & (step == "sigma8"), False),
            ("mix-up newest", wearing & (outlier == "newest"), False),
            ("mix-up earlier", wearing & (outlier == "earlier"), False)]  # fmt: skip
    return out


def print_table(title: str, truth, cuts: np.ndarray, preds: dict[str, Preds], scale: str, noise: float) -> None:
    truth_v = np.array([t.cross_hours if scale == "hours" else (t.cross_on.toordinal() if t.cross_on else math.inf)
                        for t in truth])  # fmt: skip
    ref = np.array([t.x_cut for t in truth]) if scale == "hours" else cuts
    p50_target = abs(noise - 0.04) < 1e-9
    print(f"\n{title}")
    head = f"{'group':<18}{'rows':>5}"
    for name in preds:
        head += f" | {name + ': decl/over':<26}{'cover':>6}{'<P10':>7}{'>P90':>7}{'|P50|':>7} "
    print(head)
    print("-" * len(head))
    for label, mask, judged in groups(truth):
        if not mask.any():
            continue
        line = f"{label:<18}{int(mask.sum()):>5}"
        for name, p in preds.items():
            q = getattr(p, scale)[mask]
            why = [w for w, m in zip(p.why, mask) if m]
            declined = sum(1 for w in why if w and w != "past_limit")
            over = sum(1 for w in why if w == "past_limit")
            s = score(q, truth_v[mask], ref[mask])
            if label == "path stable":  # never crosses: only "after P90" (a false alarm) can happen
                s = dict(s, p50=np.nan)
            line += f" | {f'{declined}/{over}':<26}" + _cells(s, p50_target and judged, judged)
        print(line)


def diagnostics(truth, eng: Preds, tfs: list[TruthFleet]) -> None:
    path = np.array([t.path for t in truth])
    print("\nengine's chosen path by true case drain path (share of forecast rows):")
    for p in WEARING_PATHS:
        rows = [i for i, t in enumerate(truth) if t.path == p and eng.why[i] == ""]
        c = Counter(eng.path[i] for i in rows)
        print(f"  {p:<12} n={len(rows):>4}  " + "  ".join(f"{k} {100 * v / max(len(rows), 1):4.1f} %" for k, v in sorted(c.items())))
    print("engine in hours by true path and readings class: cover / before P10 / after P90 / median |P50| (%, rows)")
    cls = np.array([t.readings_class for t in truth])
    hv = np.array([t.cross_hours for t in truth])
    xc = np.array([t.x_cut for t in truth])
    for p in PATHS[:-1]:
        cells = []
        for c in ("2-4", "5-7", "8+"):
            m = (path == p) & (cls == c)
            s = score(eng.hours[m], hv[m], xc[m])
            cells.append(f"{c}: {s['cover']:3.0f}/{s['before']:3.0f}/{s['after']:3.0f}/{s['p50']:4.0f} ({s['n']:>3})"
                         if s.get("n") else f"{c}: -")
        print(f"  {p:<14} " + "   ".join(cells))
    print("steps (case drain, 6+ readings): flagged 'step_detected'")
    for st in ("plus40", "sigma8"):
        rows = [i for i, t in enumerate(truth) if t.step == st]
        hit = sum("step_detected" in eng.flags[i] for i in rows)
        print(f"  {st:<8} {hit}/{len(rows)} = {100 * hit / max(len(rows), 1):.0f} %")
    clean = [i for i, t in enumerate(truth) if t.step is None and t.n_readings >= 6 and t.outlier is None]
    false = sum("step_detected" in eng.flags[i] for i in clean)
    print(f"  false flags on series without a step: {false}/{len(clean)} = {100 * false / max(len(clean), 1):.1f} %")
    print("newest reading typed in the wrong unit (all kinds): engine outcome (flags)")
    rows = [i for i, t in enumerate(truth) if t.outlier == "newest"]
    c = Counter((eng.why[i] or "forecast") + (" +jump" if "last_reading_jumped" in eng.flags[i] else "") for i in rows)
    print("  " + ", ".join(f"{k}: {v}" for k, v in sorted(c.items())) + f"  (of {len(rows)})")
    wrong = sum(1 for i, t in enumerate(truth) if eng.why[i] == "past_limit")
    print(f"  all rows 'past limit' though the truth is not: {wrong}")
    rate = {m: v for tf in tfs for m, v in tf.true_hours_per_day.items()}
    print("hours per day the engine assumed / true mean over the year after the cut (median, case drain rows):")
    for u in USAGES:
        rows = [i for i, t in enumerate(truth) if t.usage == u and t.kind is Kind.CASE_DRAIN and eng.per_day[i] == eng.per_day[i]]
        ratio = [eng.per_day[i] / rate[truth[i].machine] for i in rows if rate[truth[i].machine] > 0]
        print(f"  {u:<14} n={len(rows):>4}  ratio {np.median(ratio) if ratio else float('nan'):5.2f}")
    rows = [i for i, t in enumerate(truth) if path[i] != "stable" and eng.why[i] == "" and np.isfinite(eng.hours[i]).all()]
    width = [(eng.hours[i, 2] - eng.hours[i, 0]) / truth[i].remaining_hours for i in rows]
    print(f"engine band width (P90 - P10) / true remaining hours, median of finite bands: {np.median(width):.2f} (n={len(rows)})")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--quick", action="store_true", help="2 seeds x 120 pumps")
    ap.add_argument("--seeds", type=int, default=None)
    ap.add_argument("--pumps", type=int, default=None)
    ap.add_argument("--noise", type=float, nargs="*", default=[0.04, 0.10])
    ap.add_argument("--with-noise", action="store_true", help="forecast_fleet(..., with_noise=True)")
    ap.add_argument("--no-pool", action="store_true", help="forecast_fleet(..., options=FitOptions(pool=False))")
    args = ap.parse_args(argv)
    options = None
    if args.no_pool:
        from logbook.analysis.fit import FitOptions  # only for this switch: the fit module's name may change

        options = FitOptions(pool=False)
    seeds = args.seeds or (2 if args.quick else 5)
    n_pumps = args.pumps or (120 if args.quick else 240)
    for noise in args.noise:
        t0 = time.perf_counter()
        tfs = [make_truth_fleet(seed, n_pumps, noise) for seed in range(1, seeds + 1)]
        truth = [t for tf in tfs for t in tf.truth]
        cuts = np.array([tf.cut.toordinal() for tf in tfs for _ in tf.truth], dtype=float)
        t1 = time.perf_counter()
        parts = [engine_preds(tf, args.with_noise, options) for tf in tfs]
        t2 = time.perf_counter()
        base = [baseline_preds(tf) for tf in tfs]
        t3 = time.perf_counter()
        eng, ols = _concat(parts), _concat(base)
        print(f"\n=== noise {100 * noise:.0f} %: {seeds} seeds x {n_pumps} pumps, {len(truth)} pump-kind rows "
              f"(generate {t1 - t0:.1f} s, engine {t2 - t1:.1f} s, baseline {t3 - t2:.1f} s) ===")
        print(f"targets: cover 80 +/- 5 %, <P10 and >P90 each <= 13 %, median |P50| <= 15 % of true remaining life"
              f"{' (4 % noise)' if abs(noise - 0.04) < 1e-9 else ' (no |P50| target at this noise)'}; ✓/✗ judged on "
              f"'all', path types and readings classes; declined = too few / no data, over = 'past limit' though not")
        label = "engine" + ("+noise" if args.with_noise else "") + (" no pool" if args.no_pool else "")
        preds = {label: eng, "OLS log": ols}
        print_table("in operating hours (crossing hours since fitting)", truth, cuts, preds, "hours", noise)
        print_table("in calendar days (dates, with each method's hours per day)", truth, cuts, preds, "days", noise)
        diagnostics(truth, eng, tfs)
        by_seed = []
        for tf, part in zip(tfs, parts):
            wear = np.array([t.path != "stable" for t in tf.truth])
            s = score(part.hours[wear], np.array([t.cross_hours for t in tf.truth])[wear],
                      np.array([t.x_cut for t in tf.truth])[wear])  # fmt: skip
            by_seed.append(f"seed {tf.seed}: {s['cover']:.1f}")
        print("engine coverage in hours (all wearing) by seed: " + ", ".join(by_seed))
    return 0


def _concat(parts: list[Preds]) -> Preds:
    return Preds(np.concatenate([p.hours for p in parts]), np.concatenate([p.days for p in parts]),
                 [w for p in parts for w in p.why], [x for p in parts for x in p.path],
                 [f for p in parts for f in p.flags], np.concatenate([p.per_day for p in parts]))  # fmt: skip


if __name__ == "__main__":
    raise SystemExit(main())
