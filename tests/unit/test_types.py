"""mypy passes on the typed core: model, units, oil, analysis and plan, and on the store (the files
list of [tool.mypy] in pyproject.toml, so a bare ``mypy`` checks the same), and the modules they
import, which mypy follows."""

import re
import subprocess
import sys
import tomllib
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]

# what the typed target holds: a module dropped from [tool.mypy] files fails here
TYPED = ["logbook/model.py", "logbook/units.py", "logbook/oil.py", "logbook/analysis", "logbook/plan.py", "logbook/store"]


def _target() -> list[str]:
    with open(ROOT / "pyproject.toml", "rb") as f:
        return tomllib.load(f)["tool"]["mypy"]["files"]


def _python_files(paths: list[str]) -> int:
    return sum(len(list((ROOT / p).rglob("*.py"))) if (ROOT / p).is_dir() else 1 for p in paths)


def test_the_typed_target_holds_the_core_and_the_store():
    target = _target()
    assert [p for p in TYPED if p not in target] == [], target


@pytest.mark.slow
def test_mypy_finds_nothing_in_the_typed_core():
    done = subprocess.run([sys.executable, "-m", "mypy"], cwd=ROOT, capture_output=True, text=True, check=False)
    assert done.returncode == 0, done.stdout + done.stderr
    # the configuration was read: the whole target was checked (every file of it, and what it
    # imports), not an empty list
    checked = re.search(r"no issues found in (\d+) source files", done.stdout)
    assert checked and int(checked.group(1)) >= max(20, _python_files(_target())), done.stdout
