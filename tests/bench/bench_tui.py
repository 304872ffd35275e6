"""Benchmark of the interface start (a script, not a test): run with the project's python.

A 2,000-pump database is made by scaling the demo fleet: its CSV files are written
once, repeated with every serial and machine unit renamed per copy, and imported
through ``logbook.imports`` (cached in the temp folder for the next run).

Then, in one run, alternating, each in a fresh ``python -c`` process timed from spawn
(Python start, imports, first frame: what a person waits for), headless at one size:
(a) the baseline, a bare Textual app: one line of text and a footer;
(t) a bare DataTable app holding the same rows: the pumps in service read with plain
    sqlite3 (serial, model, machine, site, position) and added as rows ("rows"), then
    the fleet read and forecast by the same store and engine calls in a thread and
    the P10/P50 cells filled ("forecasts"): the same work with no logbook interface,
    the honest floor for the fleet view's rows and forecasts;
(b) ``logbook --db FILE`` through ``logbook.cli.main`` as typed at a terminal (argument
    parsing, the fleet view), with only the terminal swapped for a headless one of the
    same size. Marks (tests/bench/tui_marks.py), the same for both apps where they apply:
    - whole first frame: the first refresh after Textual filled the footer with its keys
      (it does so a refresh after the rest). For the fleet view: title, filter line, the
      table's column headers, "Reading the logbook…" and the footer. No pump rows, no
      figures: the store (sqlite_utils imports pandas and numpy), the model and the
      analysis are not imported yet; the script checks and prints that;
    - rows listed: every pump in service in the table, without forecast figures;
    - forecasts shown: every row with its forecast (P50, P10, status), the view settled.
    Also printed: each app's very first paint (footer still empty).
Targets: (b) whole first frame <= 1.5 x (a)'s; (b) rows listed <= 1.5 x (t)'s rows and
(b) forecasts shown against (t)'s forecasts (reported). Ratios name their baseline.
For information also the same marks with the modules already imported (this process).

    python tests/bench/bench_tui.py [--copies 18] [--repeat 7] [--size 120x40]
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
from dataclasses import replace
from datetime import date
from pathlib import Path

from textual.app import App
from textual.widgets import Footer, Static

import demo_fleet
from logbook.imports import import_bytes
from logbook.store import Store
from logbook.tui.app import LogbookApp
from logbook.tui.gate import StoreOpener
from tui_marks import HEAVY, Marks  # beside this script

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


class BareApp(Marks, App):
    """The baseline: a Textual app with a line of text and a footer."""

    def compose(self):
        yield Static("bare app")
        yield Footer()

    def on_mount(self) -> None:
        self.start_marks()


class TimedLogbook(Marks, LogbookApp):
    """The logbook app with marks for rows listed and forecasts shown too. Textual calls
    the base class's handlers as well, so these only add marks (no super() calls)."""

    last_mark = "forecasts"

    def on_mount(self) -> None:
        self.start_marks()

    def on_fleet_read(self, message) -> None:
        self.call_later(self.screen.call_after_refresh, self.note, "rows")

    def on_data_loaded(self, message) -> None:
        self.pumps = len(message.forecast.pumps)
        self.call_later(self.screen.call_after_refresh, self.note, "forecasts")


async def time_bare(size) -> dict:
    app = BareApp()
    started = time.time()
    await app.run_async(headless=True, size=size)
    return {k: v - started for k, v in app.marks.items()}


async def time_logbook(db: Path, size) -> dict:
    app = TimedLogbook(StoreOpener(db), today=TODAY, poll_seconds=0, blink=False)
    started = time.time()
    await app.run_async(headless=True, size=size)
    app.gate.close()
    return {k: v - started for k, v in app.marks.items()} | {"pumps": app.pumps}


COLD_BARE = """
import sys
sys.path.insert(0, {here!r})
from textual.app import App
from textual.widgets import Footer, Static
from tui_marks import Marks
class Bare(Marks, App):
    echo = True
    def compose(self):
        yield Static("bare app")
        yield Footer()
    def on_mount(self):
        self.start_marks()
Bare().run(headless=True, size=({w}, {h}))
"""

COLD_TABLE = """
import sys, sqlite3, threading
sys.path.insert(0, {here!r})
from datetime import date
from textual.app import App
from textual.widgets import DataTable, Footer
from tui_marks import Marks
SQL = ("SELECT p.serial, p.model, f.machine, m.site, f.position FROM pumps p JOIN fitments f "
       "ON f.serial = p.serial AND f.removed_on IS NULL JOIN machines m ON m.unit = f.machine ORDER BY p.serial")
class Table(Marks, App):
    echo = True
    last_mark = "forecasts"
    def compose(self):
        yield DataTable(id="t")
        yield Footer()
    def on_mount(self):
        self.start_marks()
        threading.Thread(target=self.load, daemon=True).start()
    def load(self):
        con = sqlite3.connect({db!r})
        rows = con.execute(SQL).fetchall()
        con.close()
        self.call_from_thread(self.show_rows, rows)
        from logbook.store import Store
        from logbook.analysis.fleet import forecast_fleet
        with Store({db!r}, create=False) as store:
            fleet = store.fleet()
        fc = forecast_fleet(fleet, date(2026, 12, 1))
        print("pumps", len(fc.pumps), flush=True)
        self.call_from_thread(self.show_forecasts, fc)
    def show_rows(self, rows):
        t = self.query_one(DataTable)
        t.add_columns("Serial", "Model", "Machine", "Site", "Pos", "P10", "P50")
        for row in rows:
            t.add_row(*row, "", "", key=row[0])
        self.screen.call_after_refresh(self.note, "rows")
    def show_forecasts(self, fc):
        t = self.query_one(DataTable)
        cols = list(t.columns)
        for p in fc.pumps:
            if p.serial in t.rows:
                w = p.worst
                t.update_cell(p.serial, cols[5], str(w.p10_date or ""))
                t.update_cell(p.serial, cols[6], str(w.p50_date or ""))
        self.screen.call_after_refresh(self.note, "forecasts")
Table().run(headless=True, size=({w}, {h}))
"""

# `logbook --db FILE --today ...` through the real CLI; only the terminal is swapped for a
# headless one (os.isatty says yes, run() gets headless=True and the size) and marks added.
COLD_LOGBOOK = """
import sys
sys.path.insert(0, {here!r})
import logbook.tui.launch as launch
import logbook.tui.app as tui
from logbook.cli import main
from tui_marks import Marks
class Timed(Marks, tui.LogbookApp):
    echo = True
    last_mark = "forecasts"
    def on_mount(self):
        self.start_marks()
    def on_fleet_read(self, message):
        self.call_later(self.screen.call_after_refresh, self.note, "rows")
    def on_data_loaded(self, message):
        print("pumps", len(message.forecast.pumps), flush=True)
        self.call_later(self.screen.call_after_refresh, self.note, "forecasts")
    def run(self, **options):
        return super().run(headless=True, size=({w}, {h}))
launch.os.isatty = lambda fd: True
tui.make_app = lambda store, **options: Timed(store, poll_seconds=0, **options)
sys.exit(main(["--db", {db!r}, "--today", "2026-12-01"]))
"""

class SavingLogbook(LogbookApp):
    """Saves readings once the forecasts are shown and times what follows each save:
    with the record (the saved pump first, then the fleet) or, as before, without it
    (the fleet only). Handlers only add marks (Textual calls the base class's too)."""

    def __init__(self, *args, plan: list[bool], **options) -> None:
        super().__init__(*args, **options)
        self.plan = list(plan)  # per save: hand the record to reload (True) or not
        self.saves: dict[str, list[float]] = {"pump": [], "fleet": []}
        self.started = 0.0

    def on_data_loaded(self, message) -> None:
        self.call_later(self.screen.call_after_refresh, self._after_fleet)

    def on_pump_updated(self, message) -> None:
        self.call_later(self.screen.call_after_refresh, self._took, "pump")

    def _took(self, what: str) -> None:
        self.saves[what].append(time.perf_counter() - self.started)

    def _after_fleet(self) -> None:
        if self.started:
            self._took("fleet")
        if not self.plan:
            self.exit()
            return
        with_record = self.plan.pop(0)
        in_service = [p for p in self.forecast.pumps if p.machine]
        pump = in_service[(len(self.plan) * 97) % len(in_service)]
        last = self.fleet.history(pump.serial).readings[-1]
        meter = max(r.machine_hours for r in self.fleet.readings if r.machine == last.machine)
        reading = replace(last, id=None, taken_on=TODAY, machine_hours=meter + 5.0, machine=None, entered_by="",
                          entered_at=None, note="bench")
        with self.gate.open() as store:
            saved = store.add_reading(reading, today=TODAY)
        self.started = time.perf_counter()
        self.reload("saved", saved if with_record else None)


def time_saves(db: Path, size, repeat: int) -> tuple[dict, list[float]]:
    """Seconds from a saved reading to its pump's forecast on screen and to the whole
    fleet's, and (the way before) to the whole fleet's with no pump first."""
    with tempfile.TemporaryDirectory() as folder:
        copy = Path(folder) / "saves.db"
        with Store(db, create=False) as store:
            store.backup(str(copy))
        app = SavingLogbook(StoreOpener(copy, "bench"), today=TODAY, poll_seconds=0, blink=False,
                            plan=[True, False] * repeat)
        asyncio.run(app.run_async(headless=True, size=size))
        app.gate.close()
    with_record = {"pump": app.saves["pump"], "fleet": app.saves["fleet"][0::2]}
    return with_record, app.saves["fleet"][1::2]


TIMES = ("paint", "frame", "rows", "forecasts")


def cold(script: str) -> dict:
    """Seconds from spawning ``python -c script`` to each mark it prints (and its notes)."""
    started = time.time()
    out = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True, check=True).stdout
    marks = {}
    for line in out.splitlines():
        name, _, value = line.partition(" ")
        marks[name] = float(value) - started if name in TIMES else value
    return marks


def ms(seconds: float) -> str:
    return f"{seconds * 1000:8.0f} ms"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--copies", type=int, default=18, help="copies of the 119 demo pumps (18: 2,142 pumps, ~2,000 in service)")
    parser.add_argument("--repeat", type=int, default=7)
    parser.add_argument("--size", default="120x40")
    args = parser.parse_args()
    size = tuple(int(v) for v in args.size.split("x"))
    db = build_db(args.copies)
    here = str(Path(__file__).resolve().parent)
    bare_script = COLD_BARE.format(here=here, w=size[0], h=size[1])
    logbook_script = COLD_LOGBOOK.format(here=here, db=str(db), w=size[0], h=size[1])
    table_script = COLD_TABLE.format(here=here, db=str(db), w=size[0], h=size[1])
    # Fresh processes: one of each first (disk cache, .pyc files), then alternate to share machine noise.
    cold(bare_script)
    cold(logbook_script)
    cold(table_script)
    cold_bare, cold_runs, cold_table = [], [], []
    for _ in range(args.repeat):
        cold_bare.append(cold(bare_script))
        cold_runs.append(cold(logbook_script))
        cold_table.append(cold(table_script))
    # Modules already imported (this process): the same marks, for information.
    asyncio.run(time_bare(size))
    asyncio.run(time_logbook(db, size))
    warm_bare, warm_runs = [], []
    for _ in range(args.repeat):
        warm_bare.append(asyncio.run(time_bare(size)))
        warm_runs.append(asyncio.run(time_logbook(db, size)))

    def median(runs, key):
        return statistics.median(r[key] for r in runs)

    def report(bare, runs, target=""):
        b = median(bare, "frame")
        print(f"  bare Textual app, whole first frame:       {ms(b)}   (its first paint, footer still empty: "
              f"{median(bare, 'paint') * 1000:.0f} ms)")
        for key, words in (("frame", "whole first frame"), ("rows", "rows listed"), ("forecasts", "forecasts shown")):
            note = target if key == "frame" else ""
            print(f"  logbook fleet view, {words + ':':<22} {ms(median(runs, key))}   ratio {median(runs, key) / b:5.2f}{note}")
        print(f"  (logbook's own first paint, footer still empty: {median(runs, 'paint') * 1000:.0f} ms, "
              f"ratio {median(runs, 'paint') / median(bare, 'paint'):.2f} to the bare app's)")

    print(f"size {size[0]}x{size[1]}, {cold_runs[-1]['pumps']} pumps in the fleet view, median of {args.repeat} runs each, "
          "alternating")
    print("fresh process, timed from spawn (Python start, imports, first frame):")
    report(cold_bare, cold_runs, "   (target <= 1.5)")
    for key, words, target in (("rows", "rows listed", "   (target <= 1.5)"), ("forecasts", "forecasts shown", "")):
        t = median(cold_table, key)
        print(f"  bare DataTable, same rows, {words + ':':<16} {ms(t)};  logbook / bare table: "
              f"{median(cold_runs, key) / t:5.2f}{target}")
    print(f"  imported by the whole first frame, of {', '.join(HEAVY)}: {cold_runs[-1]['heavy_at_frame']}")
    print("  'whole first frame' = the first refresh after Textual filled the footer: for the fleet view the title,")
    print("  filter line, column headers, 'Reading the logbook…' and the footer keys; no pump rows or figures yet.")
    print("  Rows and forecasts come from a worker started after that frame.")
    print("modules already imported (this process, for information):")
    report(warm_bare, warm_runs)
    quick, before = time_saves(db, size, args.repeat)
    pump, fleet, old = statistics.median(quick["pump"]), statistics.median(quick["fleet"]), statistics.median(before)
    print(f"after a saved reading ({args.repeat} saves each way, on a copy of the database, median):")
    print(f"  re-read and re-forecast the fleet, as before:  fleet shown {ms(old)}")
    print(f"  the saved pump first (forecast_in_fleet):      pump shown  {ms(pump)}   ratio {pump / old:5.2f}; "
          f"then the fleet {ms(fleet).strip()}")


if __name__ == "__main__":
    main()
