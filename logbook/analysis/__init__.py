"""Pure trend engine on arrays: normalize readings, fit wear paths, forecast limit crossings (numpy/scipy only).

Entry points: ``logbook.analysis.fleet.forecast_fleet`` and ``forecast_pump`` (a fleet
of one); the steps are listed in ``fleet``'s docstring; the array core is
``batch.TrendBatch`` -> ``fit.fit_batch`` -> ``forecast.forecast_batch``.
Submodules are imported on first use so that ``results`` stays cheap to import.
"""

from __future__ import annotations

import importlib

_LAZY = {
    "forecast_fleet": "logbook.analysis.fleet",
    "forecast_pump": "logbook.analysis.fleet",
    "TrendBatch": "logbook.analysis.batch",
    "fit_batch": "logbook.analysis.fit",
    "forecast_batch": "logbook.analysis.forecast",
}


def __getattr__(name: str):
    if name in _LAZY:
        return getattr(importlib.import_module(_LAZY[name]), name)
    raise AttributeError(f"module 'logbook.analysis' has no attribute {name!r}")
