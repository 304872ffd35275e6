"""Reading the fleet out of the store, and the whole forecast command (a script, not a test).

The database is bench_tui's scaled demo fleet (invented; 84 copies = 9,996 pumps and
about 185,000 readings by default). Measured side by side in this run, process time,
the least of --repeat runs, interleaved (the machine is shared):

  raw        a plain sqlite3 connection reading the same rows as Store.fleet(): the
             current readings in the store's order, every fitment, the current events,
             pumps, machines, models and limits, fetchall() each (a tuple per row)
  columns    Store.fleet(): the readings as columns (logbook.columns), no record per reading
  records    the read as it was before the columns: a sqlite_utils dict per row, then a
             Reading per row (rebuilt here from the former code, for comparison only)
  core       fit_batch + forecast_batch on the arrays forecast_fleet fits (the engine's floor)
  command    `logbook --db FILE --today D forecast --format csv --out FILE` in a fresh
             process, its CPU (user + system) from getrusage

and prints the ratios: command / (raw + core), target <= 3 (issue 11), and
columns / raw, records / raw.

    python tests/bench/bench_read.py [--copies 84] [--repeat 3]
"""

from __future__ import annotations

import argparse
import os
import resource
import sqlite3
import subprocess
import sys
import tempfile
import time
from datetime import date, datetime
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))
import bench_tui  # noqa: E402  (beside this script: the scaled demo databases)

from logbook.analysis.fit import fit_batch  # noqa: E402
from logbook.analysis.fleet import fleet_batch  # noqa: E402
from logbook.analysis.forecast import forecast_batch  # noqa: E402
from logbook.model import Reading  # noqa: E402
from logbook.store import Store  # noqa: E402

TODAY = bench_tui.TODAY
TARGET = 3.0
CURRENT = "superseded_by IS NULL AND removed_reason IS NULL"
RAW_QUERIES = (
    f"SELECT * FROM readings WHERE {CURRENT} ORDER BY taken_on, machine_hours, id",
    "SELECT * FROM fitments ORDER BY fitted_on, id",
    "SELECT * FROM events WHERE removed_reason IS NULL ORDER BY happened_on, id",
    "SELECT * FROM pumps ORDER BY serial",
    "SELECT * FROM machines ORDER BY unit",
    "SELECT * FROM models ORDER BY code",
    "SELECT * FROM limits ORDER BY model, kind",
)


def cpu(fn):
    t0 = time.process_time()
    out = fn()
    return out, time.process_time() - t0


def raw_read(path: Path) -> int:
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    try:
        conn.execute("BEGIN")
        rows = [conn.execute(sql).fetchall() for sql in RAW_QUERIES]
        conn.execute("COMMIT")
    finally:
        conn.close()
    return len(rows[0])


def columns_read(path: Path):
    with Store(path, create=False) as store:
        return store.fleet()


def records_read(path: Path) -> int:
    """The former readings read: a dict per row (sqlite_utils), then a Reading per row."""
    def dt(text):
        return datetime.fromisoformat(text) if text else None

    with Store(path, create=False) as store:
        store.conn.execute("BEGIN")
        try:
            extra = (store.models(), store.machines(), store.pumps(), tuple(store.fitments()), tuple(store.events()))
            readings = tuple(
                Reading(
                    id=row["id"], serial=row["serial"], taken_on=date.fromisoformat(row["taken_on"]),
                    machine_hours=row["machine_hours"], case_drain_lpm=row["case_drain_lpm"],
                    servo_pressure_bar=row["servo_pressure_bar"], neutral_drift_bar=row["neutral_drift_bar"],
                    charge_pressure_bar=row["charge_pressure_bar"], oil_temp_c=row["oil_temp_c"],
                    test_pressure_bar=row["test_pressure_bar"], test_speed_rpm=row["test_speed_rpm"],
                    oil_grade=row["oil_grade"], oil_vi=row["oil_vi"], iso4406=row["iso4406"],
                    technician=row["technician"], note=row["note"], entered_by=row["entered_by"],
                    entered_at=dt(row["entered_at"]), superseded_by=row["superseded_by"], machine=row["machine"],
                    removed_reason=row["removed_reason"], nu40_cst=row["nu40_cst"], nu100_cst=row["nu100_cst"],
                )
                for row in store.db.query(f"SELECT * FROM readings WHERE {CURRENT} ORDER BY taken_on, machine_hours, id")
            )  # fmt: skip
        finally:
            store.conn.execute("COMMIT")
    return len(readings) + len(extra)


def command_cpu(path: Path, out: Path) -> float:
    """CPU seconds (user + system) of one whole `logbook forecast --format csv` process."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    env = {**os.environ, "COLUMNS": "80", "TERM": "dumb"}
    subprocess.run([sys.executable, "-m", "logbook", "--db", str(path), "--today", TODAY.isoformat(), "forecast",
                    "--format", "csv", "--out", str(out)], check=True, env=env,
                   stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)  # fmt: skip
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--copies", type=int, default=84, help="copies of the demo fleet (119 pumps each; default 84)")
    ap.add_argument("--repeat", type=int, default=3)
    args = ap.parse_args()
    path = bench_tui.build_db(args.copies)
    with Store(path, create=False, user="bench") as store:
        store.conn.execute("PRAGMA wal_checkpoint(TRUNCATE)")  # every reader then reads the one file
    fleet = columns_read(path)
    batch = fleet_batch(fleet, TODAY)
    assert batch is not None

    def core():
        forecast_batch(batch, fit_batch(batch))

    best = dict.fromkeys(("raw", "columns", "records", "core", "command"), float("inf"))
    with tempfile.TemporaryDirectory() as folder:
        out = Path(folder) / "plan.csv"
        for _ in range(args.repeat):  # interleaved, the least of each
            best["raw"] = min(best["raw"], cpu(lambda: raw_read(path))[1])
            best["columns"] = min(best["columns"], cpu(lambda: columns_read(path))[1])
            best["records"] = min(best["records"], cpu(lambda: records_read(path))[1])
            best["core"] = min(best["core"], cpu(core)[1])
            best["command"] = min(best["command"], command_cpu(path, out))
        lines = len(out.read_text().splitlines())
    print(f"\n{len(fleet.pumps):,} pumps, {len(fleet.readings):,} current readings, {len(fleet.events):,} events; "
          f"batch {batch.x.shape[0]:,} series x {batch.x.shape[1]}; the csv plan has {lines:,} lines")  # fmt: skip
    for name, words in (("raw", "raw sqlite3 read of the same rows"), ("columns", "Store.fleet() (columns)"),
                        ("records", "the former read (a record per reading)"), ("core", "forecast core (fit + forecast)"),
                        ("command", "logbook forecast --format csv (whole process)")):  # fmt: skip
        print(f"{words:48s} {best[name]:8.3f} s CPU (least of {args.repeat})")
    floor = best["raw"] + best["core"]
    ratio = best["command"] / floor
    print(f"Store.fleet() / raw read                         {best['columns'] / best['raw']:8.2f}   (no target: the read's cost over the floor)")
    print(f"former read / raw read                           {best['records'] / best['raw']:8.2f}   (no target: for comparison)")
    print(f"command / (raw read + core)                      {ratio:8.2f}   (target <= {TARGET:g}: "
          f"{'met' if ratio <= TARGET else f'missed by {ratio / TARGET:.2f}x'})")
    print(f"command - (raw read + core)                      {best['command'] - floor:8.3f} s "
          "(imports, costs, fleet life, plan, records, csv)")
    return 0 if ratio <= TARGET else 1


if __name__ == "__main__":
    sys.exit(main())
