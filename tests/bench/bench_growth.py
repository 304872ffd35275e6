"""Growth of every step with the fleet (a script, not a test): run with the project's python.

Three fleets made by scaling the demo fleet (bench_tui's renamed copies, with the demo
operator's invented model and site costs entered through the store), each twice the
one before. For each, the phases of ``logbook forecast``, ``logbook pumps`` and
``logbook round`` are timed in this process (process time, the least of several runs,
at least --min-seconds of runs for a short phase):

    load      Store.fleet() and Store.costs()          (all three commands)
    engine    analysis.fleet.forecast_fleet           (all three)
    life      analysis.life.fleet_life                 (forecast)
    plan      the least-cost plan (costing + leveller) and the greedy pass  (forecast)
    rounds    rounds.next_tests (pumps) and rounds.plan_round for a site (round)
    render    the plan as csv and as html, the round sheet as html

then each whole command in a fresh process (``logbook --db FILE ... --today``), its
child CPU time taken from getrusage, less the same command on one copy of the demo
(Python start, imports and 119 pumps): the growth of what a command adds per pump.

The growth exponent of a phase is the slope of log(time) on log(pumps), least
squares over the three sizes (for a whole command: log(time less the one-copy time)
on log(pumps less 119)); readings and events grow in proportion to pumps.
Target: every exponent <= 1.15 (linear, with room for noise); the script exits
non-zero when one is above. A phase shorter than --floor-ms at the largest size is
reported but not judged (its time is noise on a shared machine).

Also printed, at the largest size: the html plan against the csv plan, render alone
and whole command (target <= 3x); and at --memory-copies the peak resident memory of a
process that reads the fleet through the store and forecasts it, against the floor: a
process that fetches the same rows with plain sqlite3 (target <= 2x, issue 17), and
for information against one that only reads through the store.

    python tests/bench/bench_growth.py [--copies 20,40,80] [--repeat 3] [--memory-copies 84] [--memory-only]
"""

from __future__ import annotations

import argparse
import json
import math
import os
import resource
import subprocess
import sys
import time
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parent))
import bench_tui  # noqa: E402  (beside this script: the scaled demo databases)

from logbook.store import Store  # noqa: E402

TODAY = bench_tui.TODAY
LIMIT = 1.15
SITE = "Lowmarsh Pit"


def database(copies: int) -> Path:
    """bench_tui's scaled demo database with the demo's model and site costs set (once)."""
    import demo_fleet.scenario as sc

    path = bench_tui.build_db(copies)
    with Store(path, create=False, user="bench") as store:
        if not store.costs().models:
            store.set_currency(sc.CURRENCY)
            for code, (planned, failure) in sc.MODEL_COSTS.items():
                store.set_model_costs(code, planned=planned, failure=failure)
            for name, (per_hour, planned_h, failure_h) in sc.SITE_DOWNTIME.items():
                store.set_downtime("site", name, cost_per_hour=per_hour, planned_hours=planned_h, failure_hours=failure_h)
        store.conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")  # every process then reads the same file, no -wal
    return path


def least(fn, repeat: int, min_seconds: float, max_seconds: float = 10.0):
    """(result, least process time of the runs): at least ``repeat`` runs and ``min_seconds`` of them,
    fewer when they pass ``max_seconds`` together (a long phase is less noisy)."""
    best, spent, runs, out = math.inf, 0.0, 0, None
    while (runs < repeat and spent < max_seconds) or spent < min_seconds:
        t0 = time.process_time()
        out = fn()
        took = time.process_time() - t0
        best, spent, runs = min(best, took), spent + took, runs + 1
    return out, best


def phases(path: Path, repeat: int, min_seconds: float) -> tuple[int, dict[str, float]]:
    from logbook.analysis.fleet import forecast_fleet
    from logbook.analysis.life import fleet_life
    from logbook.costing import model_economies, pump_costs
    from logbook.exports import Provenance, Report, render
    from logbook.exports import round_sheet
    from logbook.plan import PlanSettings, add_months, make_plan, month_start
    from logbook.rounds import next_tests, plan_round

    def load():
        with Store(path, create=False) as store:
            return store.fleet(), store.costs()

    t = {}
    (fleet, book), t["load"] = least(load, repeat, min_seconds)
    forecast, t["engine"] = least(lambda: forecast_fleet(fleet, TODAY), repeat, min_seconds)
    start = add_months(month_start(TODAY), 1)
    horizon_days = (add_months(start, 12) - TODAY).days
    life, t["life"] = least(lambda: fleet_life(fleet, forecast, horizon_days=horizon_days), repeat, min_seconds)
    settings = PlanSettings(start, 12, capacity_per_month=max(4, len(fleet.pumps) // 60))

    def costed():
        economies = model_economies(book, life)
        return make_plan(forecast, settings, pump_costs(book, forecast, economies)), economies

    (plan, economies), t["plan (least cost)"] = least(costed, repeat, min_seconds)
    _, t["plan (greedy)"] = least(lambda: make_plan(forecast, settings), repeat, min_seconds)
    _, t["rounds (next tests)"] = least(lambda: next_tests(fleet, forecast, TODAY), repeat, min_seconds)
    tests, t["rounds (one site)"] = least(lambda: plan_round(fleet, forecast, TODAY, site=SITE, within_days=30),
                                          repeat, min_seconds)
    report = Report(forecast, plan, life, Provenance.from_models(str(path), TODAY, fleet.models), economies=economies)
    for fmt in ("csv", "html"):
        _, t[f"render (plan {fmt})"] = least(lambda: render(report, fmt), repeat, min_seconds)

    def sheet():
        made = round_sheet.build_sheet(fleet, forecast, tests, site=SITE, made_on=TODAY, test_by=TODAY)
        return round_sheet.render(made, "html")

    _, t["render (round sheet)"] = least(sheet, repeat, min_seconds)
    return len(fleet.pumps), t


def child_cpu(args: list[str]) -> float:
    """CPU seconds (user + system) of one ``logbook`` process, output thrown away."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    env = {**os.environ, "COLUMNS": "80", "TERM": "dumb"}
    subprocess.run([sys.executable, "-m", "logbook", *args], check=True, env=env,
                   stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


COMMANDS = {
    "command forecast (csv)": ["forecast", "--format", "csv", "--out", os.devnull],
    "command forecast (html)": ["forecast", "--format", "html", "--out", os.devnull],
    "command pumps": ["pumps"],
    "command round": ["round", "--site", SITE, "--format", "html", "--out", os.devnull],
}


def commands(path: Path, repeat: int) -> dict[str, float]:
    """CPU seconds of each whole command on the database (least of ``repeat`` runs)."""
    day = ["--today", TODAY.isoformat()]
    return {name: min(child_cpu(["--db", str(path), *day, *a]) for _ in range(repeat)) for name, a in COMMANDS.items()}


_PEAK = """
import json, resource, sys
from datetime import date

def rss(key):  # this process's own memory (VmHWM: ru_maxrss would start at the parent's peak at the fork)
    try:
        return next(int(line.split()[1]) for line in open("/proc/self/status") if line.startswith(key + ":"))
    except (OSError, StopIteration):
        return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss

path, what = sys.argv[1], sys.argv[2]
if what == "raw":  # the floor: a plain sqlite3 connection fetching the rows Store.fleet() reads, nothing imported
    import sqlite3
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    rows = [conn.execute(sql).fetchall() for sql in json.loads(sys.argv[4])]
    print(rss("VmHWM"))
    raise SystemExit
from logbook.store import Store
if what == "forecast":
    from logbook.analysis.fleet import forecast_fleet
imported = rss("VmRSS")
with Store(path, create=False) as s:
    fleet = s.fleet()
read = rss("VmRSS")
if what == "forecast":
    forecast_fleet(fleet, date.fromisoformat(sys.argv[3]))
print(imported, read, rss("VmHWM"))
"""


def peak_kib(path: Path, what: str) -> list[int]:
    """KiB of a fresh process that reads the fleet raw (its peak), or through the store, and perhaps
    forecasts it (resident after the imports, after the read, and its peak)."""
    from bench_read import RAW_QUERIES  # the rows Store.fleet() reads, as bench_read times them

    out = subprocess.run([sys.executable, "-c", _PEAK, str(path), what, TODAY.isoformat(), json.dumps(RAW_QUERIES)],
                         check=True, capture_output=True, text=True)
    return [int(v) for v in out.stdout.split()]


def exponent(sizes, times) -> float:
    return float(np.polyfit(np.log(sizes), np.log(times), 1)[0])


def memory(copies: int) -> list[str]:
    """Peak resident memory of a process that forecasts the fleet against the raw read of the same rows
    (the floor, judged: target <= 2x) and against a process that only reads it through the store."""
    path = database(copies)
    with Store(path, create=False) as store:
        pumps = store.counts()["pumps"]
    print(f"memory at {pumps:,} pumps:")
    (raw,), (_, _, read) = peak_kib(path, "raw"), peak_kib(path, "read")
    imported, after_read, forecast = peak_kib(path, "forecast")
    mem, mib = forecast / raw, 1 / 1024
    print(f"peak memory, read + forecast / raw read   : {mem:6.2f}  ({forecast * mib:.0f} MiB against {raw * mib:.0f} MiB: "
          f"plain sqlite3 fetching the same rows; target <= 2: {'met' if mem <= 2 else f'MISSED by {mem / 2:.2f}x'})")
    print(f"peak memory, read + forecast / store read : {forecast / read:6.2f}  ({read * mib:.0f} MiB: Store.fleet() alone, "
          f"numpy imported; no target)")
    print(f"  the forecasting process: {imported * mib:.0f} MiB after the imports, {after_read * mib:.0f} MiB after "
          f"Store.fleet(), peak {forecast * mib:.0f} MiB in forecast_fleet")
    return [] if mem <= 2 else ["peak memory within 2x of the raw read"]


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--copies", default="20,40,80", help="demo copies per size, comma separated (119 pumps each; "
                                                     "below about 2,000 pumps the records still fit the caches)")
    ap.add_argument("--repeat", type=int, default=3)
    ap.add_argument("--min-seconds", type=float, default=0.3, help="least time spent on runs of a short phase")
    ap.add_argument("--floor-ms", type=float, default=20.0, help="phases below this at the largest size are not judged")
    ap.add_argument("--no-commands", action="store_true", help="skip the whole-command runs")
    ap.add_argument("--memory-copies", type=int, default=84, help="demo copies for the memory check (84: 9,996 pumps)")
    ap.add_argument("--memory-only", action="store_true", help="only the memory check")
    args = ap.parse_args()
    if args.memory_only:
        return 1 if memory(args.memory_copies) else 0
    copies = [int(c) for c in args.copies.split(",")]
    if len(copies) < 3 or sorted(copies) != copies:
        raise SystemExit("--copies: three or more sizes, smallest first")

    sizes, table = [], {}
    one = {} if args.no_commands else commands(database(1), args.repeat)
    for c in copies:
        path = database(c)
        n, t = phases(path, args.repeat, args.min_seconds)
        if not args.no_commands:
            t.update(commands(path, args.repeat))
        sizes.append(n)
        for name, seconds in t.items():
            table.setdefault(name, []).append(seconds)
        print(f"{n:,} pumps done", flush=True)

    print(f"\n{'phase':<26}" + "".join(f"{n:>10,}" for n in sizes) + "   exponent (target <= 1.15)")
    failed = []
    for name, times in table.items():
        grown = [max(t - one[name], 1e-6) for t in times] if name in one else times
        k = exponent([n - 119 for n in sizes] if name in one else sizes, grown)
        judged = grown[-1] * 1e3 >= args.floor_ms
        verdict = ("met" if k <= LIMIT else "MISSED") if judged else f"not judged (< {args.floor_ms:g} ms)"
        if judged and k > LIMIT:
            failed.append(name)
        since = f" (less {one[name] * 1e3:.0f} ms at 119)" if name in one else ""
        print(f"{name:<26}" + "".join(f"{s * 1e3:>8.0f}ms" for s in times) + f"   {k:5.2f} {verdict}{since}")

    print(f"\nat {sizes[-1]:,} pumps:")
    render_ratio = table["render (plan html)"][-1] / table["render (plan csv)"][-1]
    print(f"html / csv plan, render alone       : {render_ratio:6.2f}  (no target: up to 200 charts against a table)")
    if not args.no_commands:
        whole = table["command forecast (html)"][-1] / table["command forecast (csv)"][-1]
        print(f"html / csv plan, whole command      : {whole:6.2f}  (target <= 3: {'met' if whole <= 3 else 'MISSED'})")
        failed += [] if whole <= 3 else ["html plan within 3x of csv"]
    failed += memory(args.memory_copies)
    if failed:
        print("missed: " + "; ".join(failed))
        return 1
    return 0


if __name__ == "__main__":
    sys.exit(main())
