"""Benchmark of the least-cost plan against the greedy pass (a script, not a test).

    python tests/bench/bench_plan.py [--pumps 2000] [--months 12] [--repeat 3]

An invented fleet of forecasts (tests/unit/forecast_builders): every pump's P10 lies
5-400 days ahead, so most are due inside a 12-month plan; shop capacity, two site
capacities and exchange pools per model bind. Timed in one run, interleaved, best of
--repeat: (g) make_plan without costs (the greedy passes, the baseline) and (c) make_plan
with costs (expected cost per pump and month, the integer program, sensitivity).
Target (issue 16): (c) within 3x of (g); the script says by how much it misses.
Also printed: both plans' expected cost on the same costs (the integer program's can only
be lower) and how many pumps each leaves over.
"""

from __future__ import annotations

import argparse
import sys
import time
from datetime import date
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from logbook.costing import PlanCosts, PumpCosts  # noqa: E402
from logbook.economics import JobCosts  # noqa: E402
from logbook.plan import PlanSettings, make_plan  # noqa: E402
from tests.unit.forecast_builders import fleet, kind_forecast, pump_forecast  # noqa: E402

MODELS = ("TQ-55", "TQ-90", "TQ-145", "TQ-250")
SITES = ("North", "South", "East")


def make_fleet(n: int, seed: int = 5):
    rng = np.random.default_rng(seed)
    pumps = []
    for i in range(n):
        serial = f"P{i:05d}"
        kf = kind_forecast(serial, p10_days=float(rng.uniform(5, 400)), spread=float(rng.uniform(1.2, 2.0)))
        pumps.append(pump_forecast(serial, [kf], model=MODELS[i % 4], site=SITES[i % 3]))
    return fleet(pumps)


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--pumps", type=int, default=2000)
    ap.add_argument("--months", type=int, default=12)
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    fc = make_fleet(args.pumps)
    per_month = max(1, args.pumps // (args.months + 2))
    settings = PlanSettings(date(2026, 4, 1), horizon_months=args.months, capacity_per_month=per_month,
                            site_capacity={"North": per_month // 3, "South": per_month // 2},
                            exchange_on_hand={m: max(1, per_month // 5) for m in MODELS}, turnaround_months=1)
    rng = np.random.default_rng(9)
    costs = PlanCosts("EUR", {p.serial: PumpCosts(JobCosts(4000.0 + 1000 * (i % 4), float(rng.uniform(12000, 40000))),
                                                  float(rng.uniform(0.2, 1.0)))
                              for i, p in enumerate(fc.pumps)})
    t_greedy, t_cost = np.inf, np.inf
    for _ in range(args.repeat):
        t0 = time.perf_counter()
        greedy = make_plan(fc, settings)
        t1 = time.perf_counter()
        costed = make_plan(fc, settings, costs)
        t2 = time.perf_counter()
        t_greedy, t_cost = min(t_greedy, t1 - t0), min(t_cost, t2 - t1)
    pol = costed.costs.policies
    ratio = t_cost / t_greedy
    print(f"{args.pumps:,} pumps, {args.months} months, capacity {per_month}/month, site and exchange limits")
    print(f"(g) greedy pass            : {t_greedy * 1e3:9.1f} ms (best of {args.repeat})")
    print(f"(c) least cost (milp, HiGHS): {t_cost * 1e3:9.1f} ms, with costs per month and sensitivity")
    verdict = "met" if ratio <= 3 else f"missed by {ratio / 3:.1f}x"
    print(f"(c) / (g)                  : {ratio:9.2f}  (target <= 3: {verdict})")
    print(f"expected cost, same costs  : greedy {pol['at_p10']:,.0f}  least-cost {pol['cost_optimal']:,.0f}  "
          f"run to failure {pol['run_to_failure']:,.0f} EUR")
    print(f"left over                  : greedy {len(greedy.unplaced)}  least-cost {len(costed.unplaced)}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
