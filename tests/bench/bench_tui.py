"""Benchmark of the interface start (a script, not a test): run with the project's python.

A 2,000-pump database is made by scaling the demo fleet: its CSV files are written
once, repeated with every serial and machine unit renamed per copy, and imported
through ``logbook.imports`` (cached in the temp folder for the next run).

Then, in one run, alternating, each in a fresh ``python -c`` process timed from spawn
(Python start, imports, first frame: what a person waits for), headless at one size:
(a) the baseline, a bare Textual app: one line of text and a footer, first paint;
(b) ``logbook --db FILE`` through ``logbook.cli.main`` exactly as typed at a terminal
    (argument parsing, every command module registered, the fleet view), with only the
    terminal swapped for a headless one of the same size; three marks:
    - first paint: the fleet view's FRAME: title, filter line, the table's column
      headers, the line "Reading the logbook…" and the footer. No pump rows, no figures:
      the store (sqlite_utils, which imports pandas and numpy) and the analysis
      (numpy, scipy) are not imported yet; the script checks and prints that.
    - rows listed: every pump in service in the table, without forecast figures;
    - forecasts shown: every row with its forecast (P50, P10, status), the view settled.
Target (issue): (b) first paint <= 1.5 x (a). Every ratio is printed against (a).
For information also the same marks with the modules already imported (this process).

    python tests/bench/bench_tui.py [--copies 18] [--repeat 5] [--size 120x40]
"""

from __future__ import annotations

import argparse
import asyncio
import csv
import io
import statistics
import subprocess
import sys
import tempfile
import time
from datetime import date
from pathlib import Path

from textual.app import App
from textual.widgets import Footer, Static

import demo_fleet
from logbook.imports import import_bytes
from logbook.store import Store
from logbook.tui.app import LogbookApp
from logbook.tui.gate import StoreOpener

TODAY = date(2026, 12, 1)
RENAMED = {"serial", "machine", "unit", "to_machine"}
HEAVY = ("sqlite_utils", "pandas", "numpy", "scipy", "logbook.store", "logbook.analysis.fleet")


def scaled_csvs(copies: int) -> dict[str, bytes]:
    """The demo fleet's CSV files with ``copies`` renamed copies of every pump and machine."""
    with tempfile.TemporaryDirectory() as folder:
        paths = demo_fleet.write_csvs(Path(folder), TODAY, seed=7)
        texts = {table: path.read_text(encoding="utf-8") for table, path in paths.items()}
    out = {}
    for table, text in texts.items():
        rows = list(csv.DictReader(io.StringIO(text)))
        fields = list(rows[0].keys()) if rows else []
        buffer = io.StringIO()
        writer = csv.DictWriter(buffer, fieldnames=fields, lineterminator="\n")
        writer.writeheader()
        for copy in range(copies if table != "models" else 1):
            for row in rows:
                writer.writerow({k: (f"{v}/{copy}" if k in RENAMED and v and table != "models" else v) for k, v in row.items()})
        out[table] = buffer.getvalue().encode("utf-8")
    return out


def build_db(copies: int) -> Path:
    path = Path(tempfile.gettempdir()) / f"logbook-bench-tui-{copies}.db"
    if path.exists():
        with Store(path, create=False) as store:
            if store.counts()["pumps"] == 119 * copies:
                return path
        for suffix in ("", "-wal", "-shm"):
            Path(str(path) + suffix).unlink(missing_ok=True)
    started = time.perf_counter()
    with Store(path, create=True, user="bench") as store:
        data = scaled_csvs(copies)
        for table in demo_fleet.IMPORT_ORDER:
            report = import_bytes(store, table, data[table], name=f"{table}.csv", today=TODAY)
            if report.problems:
                raise SystemExit(f"{table}: {len(report.problems)} problems, first: {report.problems[0]}")
        counts = store.counts()
    print(f"built {path}: {counts['pumps']} pumps, {counts['readings']} readings in {time.perf_counter() - started:.1f} s")
    return path


class BareApp(App):
    """The baseline: a Textual app with a line of text and a footer."""

    def compose(self):
        yield Static("bare app")
        yield Footer()


async def time_bare(size) -> float:
    app = BareApp()
    marks = {}

    def painted():
        marks["paint"] = time.perf_counter()
        app.exit()

    app.call_later(lambda: app.call_after_refresh(painted))
    started = time.perf_counter()
    await app.run_async(headless=True, size=size)
    return marks["paint"] - started


class TimedLogbook(LogbookApp):
    """The logbook app noting first paint, rows listed and forecasts shown. Textual calls
    the base class's handlers as well, so these only add marks (no super() calls)."""

    def on_mount(self) -> None:
        self.marks = {}
        self.screen.call_after_refresh(self._mark, "paint")

    def on_fleet_read(self, message) -> None:
        self.call_later(self.screen.call_after_refresh, self._mark, "rows")

    def on_data_loaded(self, message) -> None:
        self.marks["pumps"] = len(message.forecast.pumps)
        self.call_later(self.screen.call_after_refresh, self._mark, "forecasts")

    def _mark(self, name: str) -> None:
        self.marks.setdefault(name, time.perf_counter())
        if name == "forecasts":
            self.exit()


async def time_logbook(db: Path, size) -> dict:
    app = TimedLogbook(StoreOpener(db), today=TODAY, poll_seconds=0, blink=False)
    started = time.perf_counter()
    await app.run_async(headless=True, size=size)
    app.gate.close()
    marks = {k: v - started for k, v in app.marks.items() if k != "pumps"}
    return marks | {"pumps": app.marks["pumps"]}


COLD_BARE = """
import time
from textual.app import App
from textual.widgets import Footer, Static
class Bare(App):
    def compose(self):
        yield Static("bare app")
        yield Footer()
    def on_mount(self):
        self.screen.call_after_refresh(self.painted)
    def painted(self):
        print("paint", time.time(), flush=True)
        self.exit()
Bare().run(headless=True, size=({w}, {h}))
"""

# `logbook --db FILE --today ...` through the real CLI; only the terminal is swapped for a
# headless one (os.isatty says yes, run() gets headless=True and the size) and marks added.
COLD_LOGBOOK = """
import os, sys, time
import logbook.tui.launch as launch
import logbook.tui.app as tui
from logbook.cli import main
HEAVY = {heavy!r}
class Timed(tui.LogbookApp):
    def on_mount(self):
        self.screen.call_after_refresh(self.mark, "paint")
    def on_fleet_read(self, message):
        self.call_later(self.screen.call_after_refresh, self.mark, "rows")
    def on_data_loaded(self, message):
        print("pumps", len(message.forecast.pumps), flush=True)
        self.call_later(self.screen.call_after_refresh, self.mark, "forecasts")
    def mark(self, name):
        if name == "paint":
            print("heavy_at_paint", ",".join(m for m in HEAVY if m in sys.modules) or "-", flush=True)
        print(name, time.time(), flush=True)
        if name == "forecasts":
            self.exit()
    def run(self, **options):
        return super().run(headless=True, size=({w}, {h}))
launch.os.isatty = lambda fd: True
tui.make_app = lambda store, **options: Timed(store, poll_seconds=0, **options)
sys.exit(main(["--db", {db!r}, "--today", "2026-12-01"]))
"""


def cold(script: str) -> dict:
    """Seconds from spawning ``python -c script`` to each mark it prints (and its notes)."""
    started = time.time()
    out = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, check=True).stdout
    marks = {}
    for line in out.splitlines():
        name, _, value = line.partition(" ")
        if name in ("paint", "rows", "forecasts"):
            marks[name] = float(value) - started
        else:
            marks[name] = value
    return marks


def ms(seconds: float) -> str:
    return f"{seconds * 1000:8.0f} ms"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--copies", type=int, default=18, help="copies of the 119 demo pumps (18: 2,142 pumps, ~2,000 in service)")
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--size", default="120x40")
    args = parser.parse_args()
    size = tuple(int(v) for v in args.size.split("x"))
    db = build_db(args.copies)
    bare_script = COLD_BARE.format(w=size[0], h=size[1])
    logbook_script = COLD_LOGBOOK.format(db=str(db), w=size[0], h=size[1], heavy=HEAVY)
    # Fresh processes: one of each first (disk cache, .pyc files), then alternate to share machine noise.
    cold(bare_script)
    cold(logbook_script)
    cold_bare, cold_runs = [], []
    for _ in range(args.repeat):
        cold_bare.append(cold(bare_script)["paint"])
        cold_runs.append(cold(logbook_script))
    # Modules already imported (this process): the same marks, for information.
    asyncio.run(time_bare(size))
    asyncio.run(time_logbook(db, size))
    warm_bare, warm_runs = [], []
    for _ in range(args.repeat):
        warm_bare.append(asyncio.run(time_bare(size)))
        warm_runs.append(asyncio.run(time_logbook(db, size)))

    def median(runs, key):
        return statistics.median(r[key] for r in runs)

    cb, wb = statistics.median(cold_bare), statistics.median(warm_bare)
    pumps = cold_runs[-1]["pumps"]
    print(f"size {size[0]}x{size[1]}, {pumps} pumps in the fleet view, median of {args.repeat} runs each, alternating")
    print("fresh process, from spawn (Python start, imports, open, first frame):")
    print(f"  bare Textual app, first paint:           {ms(cb)}")
    print(f"  logbook fleet view, first paint (frame): {ms(median(cold_runs, 'paint'))}   "
          f"ratio {median(cold_runs, 'paint') / cb:5.2f}  (target <= 1.5)")
    print(f"  logbook fleet view, rows listed:         {ms(median(cold_runs, 'rows'))}   "
          f"ratio {median(cold_runs, 'rows') / cb:5.2f}")
    print(f"  logbook fleet view, forecasts shown:     {ms(median(cold_runs, 'forecasts'))}   "
          f"ratio {median(cold_runs, 'forecasts') / cb:5.2f}")
    print(f"  heavy modules imported at first paint:   {cold_runs[-1]['heavy_at_paint']}")
    print("  (first paint = the frame: title, filter line, column headers, 'Reading the logbook…', footer;")
    print("   no pump rows or figures yet. Rows and forecasts arrive from a worker after it.)")
    print("modules already imported (in this process, for information):")
    print(f"  bare Textual app, first paint:           {ms(wb)}")
    for key, words in (("paint", "first paint (frame)"), ("rows", "rows listed"), ("forecasts", "forecasts shown")):
        print(f"  logbook fleet view, {words + ':':<20} {ms(median(warm_runs, key))}   ratio {median(warm_runs, key) / wb:5.2f}")


if __name__ == "__main__":
    main()
