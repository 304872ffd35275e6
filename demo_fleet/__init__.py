"""Demo fleet: a deterministic, invented operator (Corvane Aggregates) for fixtures, screenshots and manual runs.

``write_csvs(dest_dir, today, seed)`` writes the five CSV files of docs/csv-formats.md;
``load(store, today, seed)`` imports them. Scenario pumps are listed in
``demo_fleet.scenario.SCENARIOS`` and in demo_fleet/README.md.
"""

from demo_fleet.generate import IMPORT_ORDER, build, load, write_csvs
from demo_fleet.scenario import COMPANY, SCENARIOS

__all__ = ["COMPANY", "IMPORT_ORDER", "SCENARIOS", "build", "load", "write_csvs"]
