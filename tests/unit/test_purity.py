"""The pure layers (model, units, oil, meter, validate, analysis, plan, rounds) must not
pull in the UI or the database."""

import subprocess
import sys

MODULES = [
    "logbook.model",
    "logbook.units",
    "logbook.fmt",
    "logbook.meter",
    "logbook.validate",
    "logbook.plan",
    "logbook.rounds",
    "logbook.cautions",
    "logbook.exports",
    "logbook.oil",
    "logbook.analysis.arrays",
    "logbook.analysis.packing",
    "logbook.analysis.utilisation",
    "logbook.analysis.life",
    "logbook.analysis",
    "logbook.analysis.batch",
    "logbook.analysis.calendar",
    "logbook.analysis.fit",
    "logbook.analysis.fleet",
    "logbook.analysis.forecast",
    "logbook.analysis.hours",
    "logbook.analysis.normalize",
    "logbook.analysis.pooling",
    "logbook.analysis.results",
    "logbook.analysis.segments",
    "logbook.analysis.status",
]


def test_pure_modules_do_not_import_textual_or_sqlite():
    code = (
        "import importlib, sys\n"
        f"for m in {MODULES!r}: importlib.import_module(m)\n"
        "import logbook.analysis as a; a.forecast_fleet\n"
        "bad = sorted(m for m in ('textual', 'sqlite3', 'sqlite_utils') if m in sys.modules)\n"
        "print(','.join(bad))\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "", f"pure modules imported: {out.stdout.strip()}"
