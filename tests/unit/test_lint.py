"""The package and its tests pass ruff's pyflakes and syntax checks (config in pyproject.toml)."""

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def test_ruff_finds_nothing():
    done = subprocess.run([sys.executable, "-m", "ruff", "check", "--no-cache", "logbook", "tests", "demo_fleet"], cwd=ROOT,
                          capture_output=True, text=True, check=False)
    assert done.returncode == 0, done.stdout + done.stderr
