"""Which wear paths the forecast weighs, against the path each pump truly follows (a script, not a test).

    python tests/bench/bench_path_weights.py              # seeds 1-3 x 240 pumps, 4 % noise
    python tests/bench/bench_path_weights.py --noise 0.10

Fleets come from ``truth_fleet`` (written apart from the engine). For every case drain series
whose truth wears, two rows of mean weights over the rising paths:
- "mixture": the weights the forecast uses (``forecast_batch(...).mixture.weights``), per true
  path and pump model;
- "own later": what the series' own readings say, its later-readings scores
  (``paths.later_scores``: each path's line on the readings before each origin, scored on the later ones)
  turned into weights under an even prior (Bayes' rule over the paths: the softmax of the
  summed log predictive densities; Yao, Vehtari, Simpson and Gelman, Bayesian Analysis 13,
  2018, call these pseudo-BMA weights).
When the "own later" row of a true path is flat, the readings taken before the cut cannot
tell that path from the others, and no weighting rule can place those pumps by shape alone.
"""

from __future__ import annotations

import argparse
import sys
from collections import defaultdict
from pathlib import Path

import numpy as np
from scipy import special

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))  # the repository, for tests.bench.truth_fleet

from logbook.analysis import paths  # noqa: E402
from logbook.analysis.fit import fit_batch  # noqa: E402
from logbook.analysis.fleet import pack_fleet  # noqa: E402
from logbook.analysis.forecast import forecast_batch  # noqa: E402
from logbook.model import ALL_KINDS, Kind  # noqa: E402
from tests.bench.truth_fleet import make_truth_fleet  # noqa: E402

RISING_COLUMNS = [paths.LAMBDAS.index(lam) for lam in paths.RISING]


def weights_by_truth(seed: int, pumps: int, noise: float) -> tuple[dict, dict]:
    """(mixture, own later) weight rows over the rising paths, keyed by (true path, model)."""
    tf = make_truth_fleet(seed=seed, n_pumps=pumps, noise=noise)
    packed = pack_fleet(tf.fleet, tf.cut)
    batch = packed.pack.batch
    fit = fit_batch(batch)
    mix = forecast_batch(batch, fit).mixture
    w = fit.weights.astype(float)
    n_groups = int(batch.group.max(initial=-1)) + 1
    later, counted = paths.later_scores(np.nan_to_num(batch.x), np.nan_to_num(batch.y, nan=1.0), w, batch.group,
                                        n_groups)  # fmt: skip
    row = {(s, k): 3 * i + j for i, s in enumerate(packed.serials) for j, k in enumerate(ALL_KINDS)}
    mixture, own = defaultdict(list), defaultdict(list)
    for t in tf.truth:
        if t.kind is not Kind.CASE_DRAIN or t.path == "stable" or (t.serial, t.kind) not in row:
            continue
        r = row[(t.serial, t.kind)]
        for key in ((t.path, t.model), (t.path, "all")):
            mixture[key].append(mix.weights[r, RISING_COLUMNS])
        s = later[r, RISING_COLUMNS]
        if counted[r, RISING_COLUMNS].max() > 0 and np.isfinite(s).all():
            for key in ((t.path, t.model), (t.path, "all")):
                own[key].append(special.softmax(s))
    return mixture, own


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--seeds", type=int, nargs="*", default=[1, 2, 3])
    ap.add_argument("--pumps", type=int, default=240)
    ap.add_argument("--noise", type=float, default=0.04)
    args = ap.parse_args()
    mixture, own = defaultdict(list), defaultdict(list)
    for seed in args.seeds:
        m, o = weights_by_truth(seed, args.pumps, args.noise)
        for key, rows in m.items():
            mixture[key] += rows
        for key, rows in o.items():
            own[key] += rows
    print(f"seeds {args.seeds} x {args.pumps} pumps, {args.noise:.0%} noise; case drain series that wear;")
    print("mean weight per rising path (Box-Cox lambda):")
    words = [f"{lam:.2g} {paths.PATH_WORDS[lam]}" for lam in paths.RISING]
    print("  " + ", ".join(words[:4]) + ",\n  " + ", ".join(words[4:]))
    print(f"{'true path':11s} {'model':6s} {'':9s} {'n':>4s} " + "".join(f"{lam:>6.2g}" for lam in paths.RISING))
    for key in sorted(mixture):
        for label, table in (("mixture", mixture), ("own later", own)):
            rows = table.get(key, [])
            if not rows:
                continue
            mean = np.mean(rows, axis=0)
            print(f"{key[0]:11s} {key[1]:6s} {label:9s} {len(rows):4d} " + "".join(f"{v:6.2f}" for v in mean))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
