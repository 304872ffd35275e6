"""The logbook's SQLite store: the only package that speaks SQL.

    store = Store("fleet.db")            # creates and migrates if needed
    store = Store(":memory:")            # for tests
    fleet = store.fleet()                # a consistent snapshot for the analysis
    store.add_reading(reading, today=date.today())   # validated, one transaction
    store.correct_reading(7, servo_pressure_bar=24.0, reason="typo", today=...)  # keeps the original
    store.remove_reading(7, reason="wrong pump"); store.remove_event(3, reason="...")
    store.pump_trail("S-100")            # who changed what, when, before -> after
    store.backup("copy.db"); store.check()   # online backup; integrity and domain checks
    store.ready_to_write()               # DatabaseReadOnly / DatabaseDamaged (quick check), once per open
    store.commits                        # what this store committed (the CLI tells it after Ctrl-C)
"""

from __future__ import annotations

from sqlite3 import DatabaseError as SQLiteError  # any failure of SQLite itself (damaged file, disk full...)

from logbook.store.bulk import BulkMixin
from logbook.store.core import (
    NEW_FILE_MODE, Commit, DatabaseBusy, DatabaseDamaged, DatabaseMissing, DatabaseReadOnly, DatabaseTooNew, DiskFull,
    StoreCore, StoreError, explain,
)
from logbook.store.corrections import CORRECTABLE, CorrectionsMixin
from logbook.store.costs import CostsMixin
from logbook.store.equipment import EquipmentMixin
from logbook.store.events import EventsMixin
from logbook.store.maintenance import BackupResult, Finding, MaintenanceMixin
from logbook.store.meters import MetersMixin
from logbook.store.plansetup import PlanSetupMixin
from logbook.store.readings import ReadingsMixin
from logbook.store.reads import ReadMixin
from logbook.store.trail import TrailEntry, TrailMixin


class Store(PlanSetupMixin, CostsMixin, CorrectionsMixin, MaintenanceMixin, TrailMixin, BulkMixin, ReadingsMixin, EventsMixin,
            EquipmentMixin, MetersMixin, ReadMixin, StoreCore):
    """A logbook database. Reads return domain records; writes validate first and
    then commit all-or-nothing, recording who and when in the audit table.

    Shared use: any number of processes may open one file. Writes take SQLite's write
    lock with bounded retry (``DatabaseBusy`` when it stays held); reads run in WAL
    snapshots and never wait for a writer. ``change_count()`` rises with every commit
    from any process: poll it to notice another user's changes.

    A file this user cannot write opens for reading (``read_only`` says why); a file
    SQLite's quick check finds damaged is never written. Either is refused at the first
    write with a ``StoreError`` that says so; ``explain(exc, path)`` tells any other
    failure of SQLite itself (damaged, read-only, disk full) the same way."""


__all__ = [
    "Store", "StoreError", "SQLiteError", "DatabaseMissing", "DatabaseTooNew", "DatabaseBusy", "DatabaseDamaged",
    "DatabaseReadOnly", "DiskFull", "Commit", "NEW_FILE_MODE", "explain",
    "TrailEntry", "Finding", "BackupResult", "CORRECTABLE",
]
