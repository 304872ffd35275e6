"""logbook: a terminal maintenance logbook that forecasts pump overhauls."""

__version__ = "0.1.0"
