"""The logbook's SQLite store: the only package that speaks SQL.

    store = Store("fleet.db")            # creates and migrates if needed
    store = Store(":memory:")            # for tests
    fleet = store.fleet()                # a consistent snapshot for the analysis
    store.add_reading(reading, today=date.today())   # validated, one transaction
"""

from __future__ import annotations

from logbook.store.core import DatabaseBusy, DatabaseMissing, DatabaseTooNew, StoreCore, StoreError
from logbook.store.reads import ReadMixin
from logbook.store.records import RecordsMixin
from logbook.store.writes import WriteMixin


class Store(RecordsMixin, WriteMixin, ReadMixin, StoreCore):
    """A logbook database. Reads return domain records; writes validate first and
    then commit all-or-nothing, recording who and when in the audit table."""


__all__ = ["Store", "StoreError", "DatabaseMissing", "DatabaseTooNew", "DatabaseBusy"]
