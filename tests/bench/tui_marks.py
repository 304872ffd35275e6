"""Timing marks shared by bench_tui's apps, in this process and in fresh ones (so it
imports nothing but the standard library)."""

from __future__ import annotations

import sys
import time

#: Modules the fleet view must not have imported by its first frame.
HEAVY = ("sqlite_utils", "pandas", "numpy", "scipy", "logbook.store", "logbook.model", "logbook.analysis.fleet")


class Marks:
    """Mixin for a Textual App; call ``start_marks()`` from ``on_mount`` (not an ``on_``
    method here: Textual would call it for every class that defines one).

    - "paint": the first refresh after mount (Textual's footer is still empty then);
    - "frame": the first refresh after the footer's keys were mounted: the whole frame.
    Each mark is kept in ``self.marks`` (``time.time()``) and printed when ``echo`` is set."""

    echo = False
    last_mark = "frame"  # the app exits after this one

    def start_marks(self) -> None:
        self.marks: dict[str, float] = {}
        self.screen.call_after_refresh(self._first_paint)

    def _first_paint(self) -> None:
        self.note("paint")
        self._wait_for_footer()

    def _wait_for_footer(self) -> None:
        if self.screen.query("FooterKey"):
            self.screen.call_after_refresh(self._whole_frame)
        else:
            self.screen.call_after_refresh(self._wait_for_footer)

    def _whole_frame(self) -> None:
        self.heavy = ",".join(m for m in HEAVY if m in sys.modules) or "-"
        if self.echo:
            print("heavy_at_frame", self.heavy, flush=True)
        self.note("frame")

    def note(self, name: str) -> None:
        if name in self.marks:
            return
        self.marks[name] = time.time()
        if self.echo:
            print(name, self.marks[name], flush=True)
        if set(self.marks) >= {"frame", self.last_mark}:
            self.exit()
