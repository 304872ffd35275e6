"""The backtest measured from outside (a script, not a test).

    python tests/bench/bench_backtest.py            # 3 truth fleets x 160 pumps, and the demo's timing
    python tests/bench/bench_backtest.py --quick    # 1 fleet x 120 pumps, fewer timing rounds

1. Backtest against truth. On fleets from ``truth_fleet`` (written apart from the engine, the
   true condition of every pump known at every hour) the backtest runs at monthly origins over
   the two years before the fleet's cut, scored on the readings before the cut. Its figure,
   the share of later readings below the forecast's 10 % quantile of a new reading (and above
   its 90 %), is set beside the truth-based figure: for the same forecasts at the same hours,
   the probability that a reading falls there, from the known true condition and the known
   noise (case drain and servo pressure lognormal, neutral drift a folded normal). They should
   agree within sampling error (binomial, on the number of distinct readings scored, which is
   conservative: each reading is scored from several origins). Series with a reading typed in
   the wrong unit or a broken part (step) are left out of both: their readings are not drawn
   from the noise the truth-based figure assumes.
2. Before and after self-calibration. The same fleets forecast at their cut with raw bands
   (``calibration=False``) and calibrated ones; scored against the true crossing: coverage of
   [P10, P90] (nominal 80 %) and each tail (nominal 10 %). Every pump is held out of its own
   calibration (``paths.calibrate`` leaves the pump being forecast out). Also the backtest's
   reading tails before and after.
3. Speed. A backtest of the demo fleet at monthly origins over its history, as a ratio to one
   forecast of the whole demo fleet, both measured in this run (process time, best of rounds,
   interleaved). Target: under 20x.
"""

from __future__ import annotations

import argparse
import functools
import math
import sys
import time
from datetime import date, timedelta
from pathlib import Path

import numpy as np
from scipy import special

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))  # the repository, for tests.bench

from logbook.analysis import backtest as bt  # noqa: E402
from logbook.analysis.fit import fit_batch  # noqa: E402
from logbook.analysis.fleet import forecast_fleet, pack_fleet  # noqa: E402
from logbook.analysis.forecast import O_CROSSING, O_NO_CROSSING, forecast_batch  # noqa: E402
from logbook.analysis.records import RowFigures  # noqa: E402
from logbook.asof import Known, fleet_as_of  # noqa: E402
from logbook.model import ALL_KINDS, Kind  # noqa: E402
from tests.bench import bench_calibration as bc  # noqa: E402
from tests.bench.truth_fleet import make_truth_fleet  # noqa: E402


def reading_quantile(mix, rows, x, q: float, iterations: int = 48) -> np.ndarray:
    """The forecast's q-quantile of one new reading at hours x (bisection of ``backtest.reading_cdf``)."""
    lo, hi = np.full(x.shape, np.log(1e-6)), np.full(x.shape, np.log(1e4))
    for _ in range(iterations):
        mid = 0.5 * (lo + hi)
        up = bt.reading_cdf(mix, rows, x, np.exp(mid)) >= q
        hi, lo = np.where(up, mid, hi), np.where(up, lo, mid)
    return np.exp(0.5 * (lo + hi))


def true_below(kind: Kind, value: np.ndarray, level: np.ndarray, noise: float, limit: float) -> np.ndarray:
    """P(a normalized reading < level) when the true condition is ``value``: lognormal noise
    (case drain, servo pressure), |v + noise * limit * e| for drift (a folded normal)."""
    if kind is Kind.NEUTRAL_DRIFT:
        sd = noise * limit
        return special.ndtr((level - value) / sd) - special.ndtr((-level - value) / sd)
    with np.errstate(divide="ignore", invalid="ignore"):
        return special.ndtr((np.log(level) - np.log(value)) / noise)


def against_truth(tf, origins) -> dict:
    """Per later reading scored (clean series only): the backtest's indicators and the truth-based
    probabilities of the same events."""
    later = bt.LaterReadings(tf.fleet)
    known = Known()
    clean = {(t.serial, t.kind) for t in tf.truth if t.outlier is None and t.step is None}
    truth = {(t.serial, t.kind): t for t in tf.truth}
    obs_lo, obs_hi, true_lo, true_hi, ids = [], [], [], [], []
    for origin in origins:
        packed = pack_fleet(fleet_as_of(tf.fleet, known, origin), origin)
        batch = packed.pack.batch
        fit = fit_batch(batch)
        fc = forecast_batch(batch, fit)
        figures = RowFigures.of(packed.pack, fit, fc)
        scored = fc.mixture.ok & (fit.n_used > 0) & np.isin(figures.code, (O_CROSSING, O_NO_CROSSING))
        pump_pos = np.array([later.pump_of.get(s, -1) for s in packed.serials], dtype=np.int64)
        for k, kind in enumerate(ALL_KINDS):
            rows = np.flatnonzero(scored[k::3]) * 3 + k
            rows = np.array([r for r in rows if (packed.serials[r // 3], kind) in clean], dtype=np.int64)
            if not rows.size:
                continue
            owner, entry = later.after(pump_pos[rows // 3], k, origin.toordinal())
            if not owner.size:
                continue
            r = rows[owner]
            _, _, hours, y = later.kinds[k]
            x = hours[entry] - packed.pack.origin[r]
            u = bt.reading_cdf(fc.mixture, r, x, y[entry])
            q10, q90 = (reading_quantile(fc.mixture, r, x, q) for q in (0.1, 0.9))
            ts = [truth[(packed.serials[i // 3], kind)] for i in r.tolist()]
            value = np.array([t.value(xx) for t, xx in zip(ts, x.tolist())], dtype=float)
            limit = ts[0].limit
            obs_lo.append(u < 0.1), obs_hi.append(u > 0.9)
            true_lo.append(true_below(kind, value, q10, tf.noise, limit))
            true_hi.append(1.0 - true_below(kind, value, q90, tf.noise, limit))
            ids.append(entry + 10**7 * k)
    cat = np.concatenate
    return {"obs_lo": cat(obs_lo), "obs_hi": cat(obs_hi), "true_lo": cat(true_lo), "true_hi": cat(true_hi),
            "distinct": np.unique(cat(ids)).size}


def crossing_scores(tf, calibration: bool, keep: list | None = None) -> dict:
    """Coverage of the true crossing by the forecast at the cut (bench_calibration's scoring); ``keep``
    gathers the scored rows (forecast hours, truth, cut hours) for a pooled figure."""
    original = bc.forecast_fleet
    bc.forecast_fleet = functools.partial(forecast_fleet, calibration=calibration)
    try:
        preds = bc.engine_preds(tf)
    finally:
        bc.forecast_fleet = original
    wear = np.array([t.path != "stable" for t in tf.truth])
    rows = (preds.hours[wear], np.array([t.cross_hours for t in tf.truth])[wear], np.array([t.x_cut for t in tf.truth])[wear])
    if keep is not None:
        keep.append(rows)
    return bc.score(*rows)


def _se(s: dict) -> float:
    """Binomial standard error of a coverage in points, on the crossings scored."""
    p = s["cover"] / 100.0
    return 100.0 * math.sqrt(max(p * (1 - p), 1e-9) / max(s["n"], 1))


def _pct(x: float) -> str:
    return f"{100 * x:5.1f} %"


def part_truth(seeds, n_pumps) -> None:
    print("\n1. Backtest against truth (clean series; monthly origins over the 2 years before each cut)")
    print("   fleet   readings  distinct   <P10 backtest  truth-based   >P90 backtest  truth-based   agree")
    for seed in seeds:
        tf = make_truth_fleet(seed, n_pumps, 0.04)
        origins = bt.origin_dates(tf.cut - timedelta(days=730), tf.cut - timedelta(days=60), 1, "months")
        s = against_truth(tf, origins)
        n = s["distinct"]
        cells = []
        ok = True
        for side in ("lo", "hi"):
            o, t = s[f"obs_{side}"].mean(), s[f"true_{side}"].mean()
            se = math.sqrt(max(t * (1 - t), 1e-9) / n)
            ok &= abs(o - t) <= 3 * se
            cells.append(f"{_pct(o):>13}  {_pct(t):>11} (se {100 * se:.1f})")
        print(f"   seed {seed}  {s['obs_lo'].size:>8,}  {n:>8,}   " + "   ".join(cells) + f"   {'yes' if ok else 'NO'}")


def part_calibration(seeds, n_pumps, noises=(0.04, 0.10)) -> None:
    print("\n2. Before and after self-calibration (every pump held out of its own calibration), forecast at the cut")
    print("   fleet           raw: cover  <P10  >P90 (se)        calibrated: cover  <P10  >P90 (se)  (nominal 80 / 10 / 10)")

    def cells(s):
        return f"{s['cover']:5.1f} {s['before']:5.1f} {s['after']:5.1f} ({_se(s):.1f})"

    within = lambda s: abs(s["cover"] - 80) <= 5  # noqa: E731
    pooled: dict = {}
    for seed, noise in ((seed, noise) for noise in noises for seed in seeds):
        tf = make_truth_fleet(seed, n_pumps, noise)
        kept = pooled.setdefault(noise, ([], []))
        raw, cal = crossing_scores(tf, False, kept[0]), crossing_scores(tf, True, kept[1])
        print(f"   seed {seed} {100 * noise:2.0f} %   {cells(raw)}{' ✓' if within(raw) else ' ✗'}        {cells(cal)}"
              f"{' ✓' if within(cal) else ' ✗'}")
        origins = bt.origin_dates(tf.cut - timedelta(days=730), tf.cut - timedelta(days=60), 3, "months")
        for calibration in (False, True):
            r = bt.run_backtest(tf.fleet, tf.fleet, Known(), origins, calibration=calibration).overall
            print(f"            backtest {'calibrated' if calibration else 'raw       '}: later readings "
                  f"{r.readings:,}, below P10 {_pct(r.below_p10)}, above P90 {_pct(r.above_p90)}")
        if seed == seeds[-1] and len(seeds) > 1:  # the fleets of this noise together: a figure with a smaller se
            raw, cal = (bc.score(*(np.concatenate([part[i] for part in kept[j]]) for i in range(3))) for j in (0, 1))
            print(f"   all {len(seeds)} {100 * noise:3.0f} %  {cells(raw)}{' ✓' if within(raw) else ' ✗'}        {cells(cal)}"
                  f"{' ✓' if within(cal) else ' ✗'}")


def part_speed(rounds: int) -> None:
    import tempfile

    from demo_fleet.generate import load
    from logbook.store import Store

    today = date(2026, 12, 1)
    with tempfile.TemporaryDirectory() as folder:
        with Store(Path(folder) / "demo.db", user="bench") as store:
            load(store, today)
            now = store.fleet()
            history, known = store.fleet_history()
    origins = bt.origin_dates(*bt.default_span(now, today), 1, "months")
    one, full = [], []
    for _ in range(rounds):  # interleaved: both see the same machine load
        t = time.process_time()
        forecast_fleet(now, today)
        one.append(time.process_time() - t)
        t = time.process_time()
        bt.run_backtest(now, history, known, origins)
        full.append(time.process_time() - t)
    ratio = min(full) / min(one)
    print(f"\n3. Speed: demo fleet ({len(now.pumps)} pumps, {len(now.readings):,} readings), {len(origins)} monthly origins")
    print(f"   one fleet forecast {min(one):.3f} s, backtest {min(full):.2f} s: {ratio:.1f}x one forecast "
          f"({ratio / len(origins):.2f}x per origin; target under 20x: {'met' if ratio < 20 else 'missed'})")


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--skip", nargs="*", default=[], choices=("truth", "calibration", "speed"))
    ap.add_argument("--seeds", type=int, nargs="+", help="truth fleets' seeds (default 1 2 3; --quick: 1)")
    ap.add_argument("--noises", type=float, nargs="+", default=[0.04, 0.10],
                    help="noise levels of part 2 (default 0.04 0.10)")
    args = ap.parse_args(argv)
    seeds = tuple(args.seeds) if args.seeds else (1,) if args.quick else (1, 2, 3)
    n_pumps = 120 if args.quick else 160
    if "truth" not in args.skip:
        part_truth(seeds, n_pumps)
    if "calibration" not in args.skip:
        part_calibration(seeds, n_pumps, tuple(args.noises))
    if "speed" not in args.skip:
        part_speed(2 if args.quick else 3)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
