"""Benchmark of the readings import (a script, not a test): run with the project's python.

100,000 readings (100 pumps x 1,000, invented) as one CSV file, timed in one run:
(a) ``logbook.imports.import_bytes`` -- parse, check every cell and the hour meters,
    write in one transaction -- into a fresh database;
(b) the baseline: raw ``sqlite3`` ``executemany`` of the same rows, already parsed to
    tuples, into a fresh database of the same schema (same indexes, WAL, one transaction).
(c) end to end: ``logbook import readings FILE`` run in this process (``cli.main``: read the
    logbook, parse, check, write, read again, the second look of every new reading against
    its pump's trend as it stood, the plausibility checks, the report with its capped list
    and the whole list written beside the file) into a database that already holds 200
    readings a pump, the same number of new rows with measurement noise, against (b) on
    those rows.
Target: the import's rate is at least half the raw rate (ratio >= 0.5). Each side is
timed --repeat times, interleaved, on a fresh database each time; the best wall time
and the best CPU time of each side are compared (the machine is shared).

    python tests/bench/bench_import.py [--rows 100000] [--repeat 3] [--profile] [--no-e2e]
"""

from __future__ import annotations

import argparse
import cProfile
import io
import pstats
import sqlite3
import tempfile
import time
from datetime import date, timedelta
from pathlib import Path

from logbook.imports import import_bytes
from logbook.store import Store
from logbook.store.readings import READING_COLUMNS

TODAY = date(2026, 1, 1)
START = date(2020, 1, 1)


def fleet_csvs(pumps: int) -> dict[str, bytes]:
    models = (
        "model,displacement,rated_pressure,max_speed,test_speed,case_drain_limit,servo_pressure_limit\n"
        "BX-100,100,400,2400,2000,12,18\n"
    )
    machines = "unit,site\n" + "".join(f"U-{i:03d},Bench Yard\n" for i in range(pumps))
    pumps_csv = "serial,model,machine,position,fitted_on,machine_hours_at_fit\n" + "".join(
        f"P-{i:03d},BX-100,U-{i:03d},main,2019-12-01,100\n" for i in range(pumps)
    )
    return {"models": models.encode(), "machines": machines.encode(), "pumps": pumps_csv.encode()}


def readings_rows(pumps: int, per_pump: int) -> list[tuple]:
    """(serial, date, machine, hours, case drain, servo, drift, oil temp, test pressure, test speed)."""
    rows = []
    for p in range(pumps):
        for k in range(per_pump):
            day = START + timedelta(days=k * 2)
            rows.append((
                f"P-{p:03d}", day.isoformat(), f"U-{p:03d}", 200.0 + 12.5 * k, round(2.0 + 0.001 * k + 0.01 * (p % 7), 3),
                round(27.0 - 0.002 * k, 3), round(0.5 + 0.003 * k, 3), 50.0 + (k % 9), 380.0, 2000.0,
            ))
    return rows


def readings_csv(rows: list[tuple]) -> bytes:
    out = io.StringIO()
    out.write("serial,date,machine,machine_hours,case_drain,servo_pressure,neutral_drift,oil_temp,test_pressure,test_speed\n")
    for r in rows:
        out.write(",".join(str(v) for v in r) + "\n")
    return out.getvalue().encode()


def fresh_store(folder: Path, name: str, pumps: int) -> Store:
    store = Store(folder / name, user="bench")
    for table, data in fleet_csvs(pumps).items():
        report = import_bytes(store, table, data, name=f"{table}.csv", today=TODAY)
        assert not report.problems, report.problems
    return store


def time_import(folder: Path, data: bytes, pumps: int, profile: bool) -> tuple[float, float, int]:
    for leftover in folder.glob("import.db*"):
        leftover.unlink()
    store = fresh_store(folder, "import.db", pumps)
    profiler = cProfile.Profile() if profile else None
    start, cpu = time.perf_counter(), time.process_time()
    if profiler:
        profiler.enable()
    report = import_bytes(store, "readings", data, name="readings.csv", today=TODAY)
    if profiler:
        profiler.disable()
    elapsed, cpu = time.perf_counter() - start, time.process_time() - cpu
    assert not report.problems, report.problems[:5]
    count = store.counts()["readings"]
    store.close()
    if profiler:
        pstats.Stats(profiler).sort_stats("cumulative").print_stats(25)
    return elapsed, cpu, count


def time_raw(folder: Path, rows: list[tuple], pumps: int) -> tuple[float, float, int]:
    for leftover in folder.glob("raw.db*"):
        leftover.unlink()
    fresh_store(folder, "raw.db", pumps).close()
    now = "2026-01-01T00:00:00+00:00"
    tuples = [
        (s, d, m, h, cd, sp, nd, None, t, tp, ts, None, None, None, None, None, "", "", "bench", now, None)
        for s, d, m, h, cd, sp, nd, t, tp, ts in rows
    ]
    conn = sqlite3.connect(folder / "raw.db", isolation_level=None)
    conn.execute("PRAGMA journal_mode = WAL")
    conn.execute("PRAGMA synchronous = NORMAL")
    sql = f"INSERT INTO readings ({', '.join(READING_COLUMNS)}) VALUES ({', '.join('?' * len(READING_COLUMNS))})"
    start, cpu = time.perf_counter(), time.process_time()
    conn.execute("BEGIN IMMEDIATE")
    conn.executemany(sql, tuples)
    conn.execute("COMMIT")
    elapsed, cpu = time.perf_counter() - start, time.process_time() - cpu
    count = conn.execute("SELECT count(*) FROM readings").fetchone()[0]
    conn.close()
    return elapsed, cpu, count


def noisy_rows(pumps: int, per_pump: int, first: int, seed: int = 11) -> list[tuple]:
    """Readings ``first``.. ``first + per_pump`` of each pump: the trend of ``readings_rows`` with
    test noise (case drain sd 0.05 L/min, servo 0.15 bar, drift 0.1 bar; invented)."""
    import random

    rng = random.Random(seed)
    rows = []
    for p in range(pumps):
        for k in range(first, first + per_pump):
            day = START + timedelta(days=k)
            rows.append((
                f"P-{p:03d}", day.isoformat(), f"U-{p:03d}", 200.0 + 6.25 * k,
                round(2.0 + 0.0005 * k + 0.01 * (p % 7) + rng.gauss(0, 0.05), 3),
                round(27.0 - 0.001 * k + rng.gauss(0, 0.15), 3), round(0.5 + 0.0015 * k + rng.gauss(0, 0.1), 3),
                50.0, 380.0, 2000.0,
            ))
    return rows


def time_end_to_end(folder: Path, history: bytes, new: list[tuple], pumps: int,
                    profile: bool = False) -> tuple[float, float, int, int]:
    """(wall, CPU, readings in the database, second-look lines) of `logbook import readings` in process;
    ``profile``: print where its time goes (cProfile, by own time)."""
    import contextlib

    from logbook.cli import main as cli

    for leftover in list(folder.glob("e2e.db*")) + list(folder.glob("new.csv*")):
        leftover.unlink()
    store = fresh_store(folder, "e2e.db", pumps)
    report = import_bytes(store, "readings", history, name="history.csv", today=LATER)
    assert not report.problems, report.problems[:3]
    store.close()
    path = folder / "new.csv"
    path.write_bytes(readings_csv(new))
    out = io.StringIO()
    profiler = cProfile.Profile() if profile else None
    start, cpu = time.perf_counter(), time.process_time()
    if profiler:
        profiler.enable()
    with contextlib.redirect_stdout(out):
        code = cli(["--db", str(folder / "e2e.db"), "--today", LATER.isoformat(), "import", "readings", str(path)])
    if profiler:
        profiler.disable()
    elapsed, cpu = time.perf_counter() - start, time.process_time() - cpu
    if profiler:
        pstats.Stats(profiler).sort_stats("cumulative").print_stats(30)
    assert code == 0, out.getvalue()[:500]
    listed = folder / "new.csv.second-look.txt"
    looks = sum(1 for line in listed.read_text().splitlines() if line.startswith("second look")) if listed.exists() else 0
    with Store(folder / "e2e.db") as s:
        count = s.counts()["readings"]
    return elapsed, cpu, count, looks


LATER = date(2030, 1, 1)


def end_to_end(rows: int, repeat: int, profile: bool = False) -> None:
    pumps, history_per = 100, 200
    per_pump = max(1, rows // pumps)
    history = readings_csv(noisy_rows(pumps, history_per, 0))
    new = noisy_rows(pumps, per_pump, history_per, seed=12)
    raw, e2e = [], []
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        for k in range(repeat):
            raw.append(time_raw(folder, new, pumps))
            e2e.append(time_end_to_end(folder, history, new, pumps, profile and k == repeat - 1))
    n = len(new)
    assert all(r[2] == n for r in raw) and all(e[2] == n + pumps * history_per for e in e2e)
    raw_s, raw_cpu = min(r[0] for r in raw), min(r[1] for r in raw)
    e_s, e_cpu = min(e[0] for e in e2e), min(e[1] for e in e2e)
    print(f"\nend to end: `logbook import readings` of {n:,} new rows onto {pumps * history_per:,} stored; best of {repeat}")
    print(f"raw executemany: {raw_s:.3f} s wall, {raw_cpu:.3f} s CPU  ({n / raw_s:,.0f} rows/s)")
    print(f"logbook import:  {e_s:.3f} s wall, {e_cpu:.3f} s CPU  ({n / e_s:,.0f} rows/s); "
          f"{e2e[0][3]:,} second-look lines ({e2e[0][3] / n:.1%} of the rows)")
    ratio, cpu_ratio = raw_s / e_s, raw_cpu / e_cpu
    print(f"ratio import/raw rate: {ratio:.2f} wall, {cpu_ratio:.2f} CPU (target >= 0.50) -> "
          f"{'met' if ratio >= 0.5 else 'MISSED'}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=int, default=100_000)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--profile", action="store_true", help="print a cProfile of the (last) import and end-to-end run")
    parser.add_argument("--no-e2e", action="store_true", help="leave out the end-to-end command import")
    args = parser.parse_args()
    pumps = 100
    per_pump = max(1, args.rows // pumps)
    rows = readings_rows(pumps, per_pump)
    data = readings_csv(rows)
    raw, imp = [], []
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        for k in range(args.repeat):
            raw.append(time_raw(folder, rows, pumps))
            imp.append(time_import(folder, data, pumps, args.profile and k == args.repeat - 1))
    assert all(r[2] == len(rows) for r in raw + imp)
    raw_s, raw_cpu = min(r[0] for r in raw), min(r[1] for r in raw)
    imp_s, imp_cpu = min(r[0] for r in imp), min(r[1] for r in imp)
    n = len(rows)
    print(f"rows: {n:,} ({len(data) / 1e6:.1f} MB of CSV); best of {args.repeat}")
    print(f"raw executemany: {raw_s:.3f} s wall, {raw_cpu:.3f} s CPU  ({n / raw_s:,.0f} rows/s)")
    print(f"import_bytes:    {imp_s:.3f} s wall, {imp_cpu:.3f} s CPU  ({n / imp_s:,.0f} rows/s)")
    ratio, cpu_ratio = raw_s / imp_s, raw_cpu / imp_cpu
    print(f"ratio import/raw rate: {ratio:.2f} wall, {cpu_ratio:.2f} CPU (target >= 0.50) -> "
          f"{'met' if ratio >= 0.5 else 'MISSED'}")
    if not args.no_e2e:
        end_to_end(args.rows, args.repeat, args.profile)


if __name__ == "__main__":
    main()
