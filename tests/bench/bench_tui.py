"""Benchmark of the interface start (a script, not a test): run with the project's python.

A 2,000-pump database is made by scaling the demo fleet: its CSV files are written
once, repeated with every serial and machine unit renamed per copy, and imported
through ``logbook.imports`` (cached in the temp folder for the next run). Then, in
one run, two apps started the same way and timed to their first paint:
(a) the baseline, a bare Textual app (a Static and a Footer);
(b) the logbook app on that database (the fleet view), plus, for information, the
    time until its table holds every pump's forecast.
Two ways of starting, both printed:
- cold: each app in a fresh ``python -c`` process (what a person waits for: Python,
  imports, opening the database, first frame), timed from spawn to first paint;
- warm: in this process, modules already imported (``run_async(headless=True)``).
Target: (b) first paint <= 1.5 x (a) on a cold start. Prints the times and the ratios.

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

TODAY = date(2026, 12, 1)
RENAMED = {"serial", "machine", "unit", "to_machine"}


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
    """The logbook app noting its first paint and the paint after the forecast arrived."""

    def on_mount(self) -> None:
        self.marks = {}
        self.screen.call_after_refresh(self._mark, "paint")
        super().on_mount()

    def _mark(self, name: str) -> None:
        self.marks.setdefault(name, time.perf_counter())
        if name == "full":
            self.exit()

    def on_data_loaded(self, message) -> None:
        super().on_data_loaded(message)
        self.marks["rows"] = len(message.forecast.pumps)
        self.call_after_refresh(self.screen.call_after_refresh, self._mark, "full")


async def time_logbook(db: Path, size) -> tuple[float, float, int]:
    store = Store(db, create=False)
    app = TimedLogbook(store, today=TODAY, poll_seconds=0, blink=False)
    started = time.perf_counter()
    await app.run_async(headless=True, size=size)
    store.close()
    return app.marks["paint"] - started, app.marks["full"] - started, app.marks["rows"]


COLD_BARE = """
import time
from textual.app import App
from textual.widgets import Footer, Static
class Bare(App):
    def compose(self):
        yield Static("bare app")
        yield Footer()
    def on_mount(self):
        self.call_after_refresh(self.painted)
    def painted(self):
        print("PAINT", time.time(), flush=True)
        self.exit()
Bare().run(headless=True, size=({w}, {h}))
"""

COLD_LOGBOOK = """
import time
from datetime import date
started = time.perf_counter()
from logbook.store import Store
print("STORE_IMPORT", time.perf_counter() - started, flush=True)
from logbook.tui.app import LogbookApp
class Timed(LogbookApp):
    def on_mount(self):
        super().on_mount()
        self.screen.call_after_refresh(self.painted)
    def painted(self):
        print("PAINT", time.time(), flush=True)
        self.exit()
store = Store({db!r}, create=False)
Timed(store, today=date(2026, 12, 1), poll_seconds=0).run(headless=True, size=({w}, {h}))
"""


def cold(script: str) -> tuple[float, float]:
    """Seconds from spawning ``python -c script`` to the first paint it reports, and the
    seconds it spent importing logbook.store (0 for the bare app)."""
    started = time.time()
    out = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, check=True).stdout
    painted = next(float(line.split()[1]) for line in out.splitlines() if line.startswith("PAINT"))
    store = next((float(line.split()[1]) for line in out.splitlines() if line.startswith("STORE_IMPORT")), 0.0)
    return painted - started, store


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--copies", type=int, default=18, help="copies of the 119 demo pumps (18: 2,142 pumps, ~2,000 in service)")
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--size", default="120x40")
    args = parser.parse_args()
    size = tuple(int(v) for v in args.size.split("x"))
    db = build_db(args.copies)
    # Warm up both (imports, first-use caches), then alternate to share any machine noise.
    asyncio.run(time_bare(size))
    asyncio.run(time_logbook(db, size))
    bare, paint, full = [], [], []
    for _ in range(args.repeat):
        bare.append(asyncio.run(time_bare(size)))
        p, f, rows = asyncio.run(time_logbook(db, size))
        paint.append(p)
        full.append(f)
    cold_bare, cold_logbook, store_imports = [], [], []
    for _ in range(args.repeat):
        cold_bare.append(cold(COLD_BARE.format(w=size[0], h=size[1]))[0])
        seconds, store_import = cold(COLD_LOGBOOK.format(db=str(db), w=size[0], h=size[1]))
        cold_logbook.append(seconds)
        store_imports.append(store_import)
    b, p, f = statistics.median(bare), statistics.median(paint), statistics.median(full)
    cb, cl, si = statistics.median(cold_bare), statistics.median(cold_logbook), statistics.median(store_imports)
    print(f"size {size[0]}x{size[1]}, {rows} pumps in the fleet view, median of {args.repeat} runs")
    print(f"cold  bare Textual app, first paint:       {cb * 1000:8.1f} ms")
    print(f"cold  logbook fleet view, first paint:     {cl * 1000:8.1f} ms   ratio {cl / cb:.2f} (target <= 1.5)")
    print(f"      of which importing logbook.store:   {si * 1000:8.1f} ms   ratio without it {(cl - si) / cb:.2f}")
    print(f"warm  bare Textual app, first paint:       {b * 1000:8.1f} ms")
    print(f"warm  logbook fleet view, first paint:     {p * 1000:8.1f} ms   ratio {p / b:.2f}")
    print(f"warm  logbook fleet view, every row shown: {f * 1000:8.1f} ms   ratio {f / b:.2f} (information)")


if __name__ == "__main__":
    main()
