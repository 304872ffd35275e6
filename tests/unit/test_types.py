"""mypy passes on the typed core: model, units, oil, analysis and plan (the files list of
[tool.mypy] in pyproject.toml, so a bare ``mypy`` checks the same), and the modules they
import, which mypy follows."""

import re
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]


@pytest.mark.slow
def test_mypy_finds_nothing_in_the_typed_core():
    done = subprocess.run([sys.executable, "-m", "mypy"], cwd=ROOT, capture_output=True, text=True, check=False)
    assert done.returncode == 0, done.stdout + done.stderr
    # the configuration was read: the whole target was checked, not an empty list
    checked = re.search(r"no issues found in (\d+) source files", done.stdout)
    assert checked and int(checked.group(1)) >= 20, done.stdout
