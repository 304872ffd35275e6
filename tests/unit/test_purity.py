"""The pure layers pull in neither the UI, nor the database, nor the terminal or chart
libraries; commands that need no forecast start without scipy.

The pure modules are found by walking the package: every module outside the layers that
talk to the user or the database (``UI_AND_STORE``) is pure (model, units, oil, meter,
validate, analysis/*, plan, leveller, costing, economics, rounds, exports, ...), and the
walk is checked against the files on disk. A new module is covered the moment it is added.
"""

from __future__ import annotations

import pkgutil
import subprocess
import sys
from pathlib import Path

import pytest

import logbook

UI_AND_STORE = ("logbook.cli", "logbook.__main__", "logbook.commands", "logbook.store", "logbook.tui")
BANNED = ("textual", "sqlite3", "sqlite_utils", "rich", "matplotlib")
PACKAGE = Path(logbook.__file__).parent


def _inside(name: str, prefixes: tuple[str, ...]) -> bool:
    return any(name == p or name.startswith(p + ".") for p in prefixes)


def _all_modules() -> list[str]:
    return sorted(["logbook", *(info.name for info in pkgutil.walk_packages(logbook.__path__, "logbook."))])


def _pure_modules() -> list[str]:
    return [m for m in _all_modules() if not _inside(m, UI_AND_STORE)]


def _on_disk() -> set[str]:
    """Module names of the package's .py files, read from the file system (not through the walk)."""
    names = set()
    for path in PACKAGE.rglob("*.py"):
        parts = ("logbook", *path.relative_to(PACKAGE).with_suffix("").parts)
        names.add(".".join(parts[:-1] if parts[-1] == "__init__" else parts))
    return names


def _importers(modules: list[str], banned: tuple[str, ...]) -> dict[str, list[str]]:
    """In a fresh interpreter, import ``modules`` one after another (and reach the analysis
    package's lazy entry points); for each banned library, the first module whose import
    brought it in."""
    code = (
        "import importlib, sys\n"
        f"banned = {banned!r}\n"
        "seen = {}\n"
        "def note(m):\n"
        "    for b in banned:\n"
        "        if b in sys.modules and b not in seen:\n"
        "            seen[b] = m\n"
        f"for m in {modules!r}:\n"
        "    importlib.import_module(m)\n"
        "    note(m)\n"
        "    if m == 'logbook.analysis':\n"
        "        import logbook.analysis as a; a.forecast_fleet; a.forecast_pump\n"
        "        note(m + ' (lazy entry points)')\n"
        "for b, m in sorted(seen.items()): print(b, m.split()[0])\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    got: dict[str, list[str]] = {}
    for line in out.stdout.split("\n"):
        if line.strip():
            lib, module = line.split()
            got.setdefault(lib, []).append(module)
    return got


def test_discovery_finds_every_module_and_the_layers():
    modules = _all_modules()
    assert set(modules) == _on_disk()  # the walk misses no file (and invents none)
    pure = _pure_modules()
    analysis = {m for m in _on_disk() if m.startswith("logbook.analysis.")}
    assert analysis and analysis <= set(pure)
    assert {"logbook.model", "logbook.units", "logbook.oil", "logbook.meter", "logbook.validate", "logbook.plan",
            "logbook.leveller", "logbook.costing", "logbook.rounds", "logbook.exports"} <= set(pure)  # fmt: skip
    assert not any(_inside(m, ("logbook.cli", "logbook.commands", "logbook.store", "logbook.tui")) for m in pure)


@pytest.mark.slow
def test_pure_modules_import_no_ui_database_terminal_or_chart_library():
    pure = _pure_modules()
    assert len(pure) > 30
    # the check can fail: the store, imported after them, is seen bringing in the database libraries
    got = _importers([*pure, "logbook.store"], BANNED)
    assert got == {"sqlite3": ["logbook.store"], "sqlite_utils": ["logbook.store"]}, \
        "a pure module imported the UI, the database, the terminal or a chart library"


def _scipy_after(argv: list[str]) -> str:
    code = (
        "import sys\n"
        "from logbook.cli import main\n"
        "try:\n"
        f"    main({argv!r})\n"
        "except SystemExit:\n"
        "    pass\n"
        "print('scipy' in sys.modules)\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    return out.stdout.strip().split("\n")[-1]


@pytest.mark.slow
def test_help_and_a_command_without_forecast_import_no_scipy(tmp_path):
    db = str(tmp_path / "t.db")
    assert _scipy_after(["--help"]) == "False"
    assert _scipy_after(["--db", db, "init"]) == "False"
    assert _scipy_after(["--db", db, "model", "list"]) == "False"
    assert _scipy_after(["--db", db, "export", "readings"]) == "False"  # the records out: no forecast
    # the check above can fail: a command that forecasts does import scipy
    assert _scipy_after(["--db", db, "--today", "2026-01-01", "pumps"]) == "True"
