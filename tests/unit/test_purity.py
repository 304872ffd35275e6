"""The pure layers must not pull in the UI or the database, and the core not even the
terminal or chart libraries; commands that need no forecast start without scipy.

The modules are found by walking the package: every module outside the layers that
talk to the user or the database (``UI_AND_STORE``) is pure, and the core is the part
named in DEVELOPERS.md (model, units, oil, meter, validate, analysis, plan, rounds).
A new module is covered the moment it is added.
"""

from __future__ import annotations

import pytest

import pkgutil
import subprocess
import sys
from pathlib import Path

import logbook

UI_AND_STORE = ("logbook.cli", "logbook.__main__", "logbook.commands", "logbook.store", "logbook.tui")
CORE = ("logbook.model", "logbook.units", "logbook.oil", "logbook.meter", "logbook.validate", "logbook.analysis",
        "logbook.plan", "logbook.rounds")  # fmt: skip
NOT_PURE = ("textual", "sqlite3", "sqlite_utils")
NOT_CORE = (*NOT_PURE, "rich", "matplotlib")


def _inside(name: str, prefixes: tuple[str, ...]) -> bool:
    return any(name == p or name.startswith(p + ".") for p in prefixes)


def _all_modules() -> list[str]:
    found = ["logbook"]
    for info in pkgutil.walk_packages(logbook.__path__, "logbook."):
        found.append(info.name)
    return sorted(found)


def _importers(modules: list[str], banned: tuple[str, ...]) -> dict[str, list[str]]:
    """In a fresh interpreter, import ``modules`` one after another; for each banned
    library, the first module whose import brought it in."""
    code = (
        "import importlib, sys\n"
        f"banned = {banned!r}\n"
        "seen = {}\n"
        f"for m in {modules!r}:\n"
        "    importlib.import_module(m)\n"
        "    for b in banned:\n"
        "        if b in sys.modules and b not in seen:\n"
        "            seen[b] = m\n"
        "import logbook.analysis as a; a.forecast_fleet\n"
        "for b, m in sorted(seen.items()): print(b, m)\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    got: dict[str, list[str]] = {}
    for line in out.stdout.split("\n"):
        if line.strip():
            lib, module = line.split()
            got.setdefault(lib, []).append(module)
    return got


def test_discovery_finds_the_layers():
    modules = _all_modules()
    pure = [m for m in modules if not _inside(m, UI_AND_STORE)]
    core = [m for m in pure if _inside(m, CORE)]
    on_disk = {p.stem for p in (Path(logbook.__file__).parent / "analysis").glob("*.py")} - {"__init__"}
    assert on_disk and {m.rsplit(".", 1)[1] for m in core if m.startswith("logbook.analysis.")} == on_disk
    assert {"logbook.plan", "logbook.rounds", "logbook.exports", "logbook.oil"} <= set(pure)
    assert not any(_inside(m, ("logbook.store", "logbook.tui")) for m in pure)


@pytest.mark.slow
def test_pure_modules_do_not_import_textual_or_sqlite():
    pure = [m for m in _all_modules() if not _inside(m, UI_AND_STORE)]
    assert len(pure) > 20
    assert _importers(pure, NOT_PURE) == {}, "pure modules imported the UI or the database"


@pytest.mark.slow
def test_the_core_does_not_import_rich_or_matplotlib():
    core = [m for m in _all_modules() if _inside(m, CORE)]
    assert _importers(core, NOT_CORE) == {}, "the core imported a UI, database, terminal or chart library"


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
    # the check above can fail: a command that forecasts does import scipy
    assert _scipy_after(["--db", db, "--today", "2026-01-01", "pumps"]) == "True"
