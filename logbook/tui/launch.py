"""`logbook` with no command at a terminal: start the fleet view, importing as little
as possible before its first frame (not the store, the analysis or the command modules).

Elsewhere (no terminal, or Textual missing) it prints ``commands.open_ui.print_summary``
instead; that module never imports this one (`logbook demo` starts the view from here too).
"""

from __future__ import annotations

import os
from pathlib import Path


def run(args, ctx) -> int:
    """The app opens the store in a worker after its first frame; a missing database is
    reported here, before the screen is taken over."""
    if not os.isatty(1) or not os.isatty(0):
        return _summary(ctx)
    if not can_draw():
        ctx.err.print(f"logbook: the fleet view needs a terminal that can move the cursor (TERM={os.environ.get('TERM', '')!r} "
                      "cannot); here is the fleet as a list. `logbook pumps`, `logbook show SERIAL` and "
                      "`logbook round` work on any terminal.", markup=False, soft_wrap=True)
        return _summary(ctx)
    if not Path(ctx.db_path).exists():
        ctx.open_store().close()  # raises DatabaseMissing with the store's own words
    try:
        from logbook.tui.app import make_app
        from logbook.tui.gate import StoreOpener
    except ImportError:
        return _summary(ctx)
    app = make_app(StoreOpener(Path(ctx.db_path), ctx.user), today=ctx.today, units=ctx.units,
                   as_of=ctx.as_of)
    try:
        app.run()
    finally:
        app.gate.close()
    return 0


#: Terminals that cannot draw a full-screen view (no cursor addressing): the fleet view
#: would never paint there, so the list is printed instead.
PLAIN_TERMS = frozenset({"dumb", "unknown"})


def can_draw() -> bool:
    return os.environ.get("TERM", "").strip().lower() not in PLAIN_TERMS


def _summary(ctx) -> int:
    from logbook.commands.open_ui import print_summary

    return print_summary(ctx)
