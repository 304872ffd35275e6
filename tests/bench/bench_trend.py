"""Benchmark of the batched trend core (a script, not a test): run with the project's python.

10,000 pumps x 3 kinds x 40 readings, timed in one run against
(a) one batched numpy least-squares pass over the same arrays (normal equations
    built with einsum, optimize=True, and solved as a stack of 2x2 systems);
(c) the fastest honest floor for the same straight lines: closed-form sums
    (n, sum x, sum y, sum xx, sum xy per row) and the 2x2 solution written out;
(b) a per-series scipy.stats.linregress loop, timed on a subset and scaled.
The core does far more than one line per row (robust drops, step scan, two or more
paths, pooling, crossing quantiles), so its ratio to (c) says what that costs.
Targets: core <= 2x (a), and >= 20x faster than (b); (c) is reported with no target
of its own. Prints the ratios and peak memory.
"""

from __future__ import annotations

import argparse
import resource
import time
import tracemalloc

import numpy as np
from scipy import stats

from logbook.analysis.batch import FALLING, RISING, TrendBatch
from logbook.analysis.fit import fit_batch
from logbook.analysis.forecast import forecast_batch


def make_batch(pumps: int, readings: int, seed: int = 7) -> TrendBatch:
    """Synthetic fleet: case drain and drift rise (linear or exponential), servo pressure falls."""
    rng = np.random.default_rng(seed)
    s = pumps * 3
    x = np.sort(rng.uniform(0.0, 8000.0, (s, readings)), axis=1)
    kind = np.tile(np.arange(3), pumps)
    rate = rng.lognormal(np.log(3e-4), 0.3, s)
    expo = rng.random(s) < 0.3
    base = np.where(kind == 1, 28.0, np.where(kind == 0, 1.5, 0.5))
    sign = np.where(kind == 1, -1.0, 1.0)
    # linear paths; exponential ones grow (or, for servo pressure, decay) in proportion
    linear = base[:, None] + sign[:, None] * rate[:, None] * x * np.where(kind == 1, 3.0, 1.0)[:, None]
    proportional = base[:, None] * np.exp(sign[:, None] * rate[:, None] * x * np.where(kind == 1, 0.1, 1.0)[:, None])
    y = np.where(expo[:, None], proportional, linear)
    y += rng.normal(0.0, 0.05, y.shape) * np.where(kind == 1, 4.0, 1.0)[:, None]
    wild = rng.random(s) < 0.05  # one wild reading in 5 % of the series
    y[wild, rng.integers(5, readings, wild.sum())] *= 1.6
    gaps = rng.random((s, readings)) < 0.05  # a few missing readings, packed left
    y[gaps] = np.nan
    order = np.argsort(np.isnan(y), axis=1, kind="stable")
    x = np.take_along_axis(x, order, axis=1)
    y = np.take_along_axis(y, order, axis=1)
    x[np.isnan(y)] = np.nan
    limit = np.where(kind == 1, 18.0, np.where(kind == 0, 6.0, 5.0))
    direction = np.where(kind == 1, FALLING, RISING)
    group = kind  # one pump model: pooling group per kind
    x_now = np.nanmax(x, axis=1) + 200.0
    return TrendBatch(x=x, y=y, limit=limit, direction=direction, group=group, x_now=x_now)


def batched_lstsq(batch: TrendBatch) -> np.ndarray:
    """Baseline (a): one least-squares line per row via masked normal equations, solved as a stack."""
    m = np.isfinite(batch.y)
    xz, yz = np.where(m, batch.x, 0.0), np.where(m, batch.y, 0.0)
    design = np.stack([m.astype(float), xz], axis=-1)
    xtx = np.einsum("snk,snl->skl", design, design, optimize=True)
    xty = np.einsum("snk,sn->sk", design, yz, optimize=True)
    return np.linalg.solve(xtx, xty[..., None])[..., 0]


def closed_form(batch: TrendBatch) -> np.ndarray:
    """Baseline (c): intercept and slope per row from the five sums, no matrices at all."""
    m = np.isfinite(batch.y)
    xz, yz = np.where(m, batch.x, 0.0), np.where(m, batch.y, 0.0)
    n = m.sum(axis=1)
    sx, sy = xz.sum(axis=1), yz.sum(axis=1)
    sxx, sxy = (xz * xz).sum(axis=1), (xz * yz).sum(axis=1)
    slope = (n * sxy - sx * sy) / (n * sxx - sx * sx)
    return np.stack([(sy - slope * sx) / n, slope], axis=1)


def linregress_loop(batch: TrendBatch, rows: int) -> list:
    """Baseline (b): scipy.stats.linregress on each series in turn."""
    out = []
    for i in range(rows):
        m = np.isfinite(batch.y[i])
        out.append(stats.linregress(batch.x[i, m], batch.y[i, m]))
    return out


def core(batch: TrendBatch):
    fit = fit_batch(batch)
    return fit, forecast_batch(batch, fit)


def best_of(fn, repeat: int) -> float:
    times = []
    for _ in range(repeat):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return min(times)


def verdict(ok: bool, by: str) -> str:
    """'met', or 'missed' and by how much."""
    return "met" if ok else f"missed {by}"


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__)
    ap.add_argument("--pumps", type=int, default=10_000)
    ap.add_argument("--readings", type=int, default=40)
    ap.add_argument("--repeat", type=int, default=5)
    ap.add_argument("--subset", type=int, default=1_000, help="series timed for the linregress loop")
    args = ap.parse_args()

    batch = make_batch(args.pumps, args.readings)
    s = batch.size
    core(batch)  # warm up (imports, caches)
    lines = batched_lstsq(batch)
    assert np.allclose(lines, closed_form(batch), rtol=1e-6, atol=1e-9), "the two baselines disagree"
    # interleaved, best of each: the machine is shared, so all see the same conditions
    t_core, t_lstsq, t_closed = np.inf, np.inf, np.inf
    for _ in range(args.repeat):
        t_core = min(t_core, best_of(lambda: core(batch), 1))
        t_lstsq = min(t_lstsq, best_of(lambda: batched_lstsq(batch), 1))
        t_closed = min(t_closed, best_of(lambda: closed_form(batch), 1))
    sub = min(args.subset, s)
    t_loop = best_of(lambda: linregress_loop(batch, sub), 1) * s / sub

    tracemalloc.start()
    fit, fc = core(batch)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    rss_mb = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024

    print(f"series: {s:,} ({args.pumps:,} pumps x 3 kinds) x {args.readings} readings")
    print(f"core fit+forecast        : {t_core * 1e3:9.1f} ms (best of {args.repeat}, interleaved)")
    print(f"(a) batched numpy lstsq  : {t_lstsq * 1e3:9.1f} ms (best of {args.repeat}, einsum optimize=True)")
    print(f"(c) closed-form sums     : {t_closed * 1e3:9.1f} ms (best of {args.repeat})")
    print(f"(b) linregress loop      : {t_loop * 1e3:9.1f} ms (timed on {sub:,} series, scaled x{s / sub:.0f})")
    to_a, from_b = t_core / t_lstsq, t_loop / t_core
    print(f"core / (a)               : {to_a:9.2f}  (target <= 2: {verdict(to_a <= 2, f'by {to_a / 2:.1f}x')})")
    print(f"core / (c)               : {t_core / t_closed:9.2f}  (no target: the cost of robust, multi-path forecasts)")
    print(f"(b) / core               : {from_b:9.1f}  (target >= 20: {verdict(from_b >= 20, f'by {20 / from_b:.1f}x')})")
    print(f"peak traced memory (core): {peak / 2**20:9.1f} MiB; process max RSS {rss_mb:.0f} MiB")
    paths = np.bincount(fit.path, minlength=3)
    print(f"paths none/linear/exponential: {paths.tolist()}; outcomes: {np.bincount(fc.outcome, minlength=6).tolist()}")
    print(f"flags: outlier {int((fit.flags & 1).astype(bool).sum())}, step {int((fit.flags & 2).astype(bool).sum())}")


if __name__ == "__main__":
    main()
