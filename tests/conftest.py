"""Settings every test shares."""

from __future__ import annotations

import os

# The command-line output's width follows $COLUMNS (as a terminal user would want). The suite runs in
# parallel workers (pytest-xdist) that set COLUMNS=80 while a plain run has none: tests that want a
# width set it themselves (monkeypatch.setenv), so the same test prints the same table either way.
for _name in ("COLUMNS", "LINES"):
    os.environ.pop(_name, None)
