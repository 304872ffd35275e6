"""One store connection shared by the interface and its worker threads, one user at a time."""

from __future__ import annotations

import contextlib
import sqlite3
import threading
from typing import Iterator

from logbook.model import InputRejected


class StoreGate:
    """Serializes access to the app's single Store (its connection allows other
    threads, but two threads must not use it at once)."""

    def __init__(self, store):
        self.store = store
        self._lock = threading.RLock()

    @contextlib.contextmanager
    def open(self) -> Iterator:
        with self._lock:
            yield self.store

    def try_open(self):
        """The store when free right now, else None (for the change poll: never wait)."""
        if self._lock.acquire(blocking=False):
            return _Held(self)
        return None


class _Held:
    def __init__(self, gate: StoreGate):
        self.gate = gate

    def __enter__(self):
        return self.gate.store

    def __exit__(self, *exc) -> None:
        self.gate._lock.release()


def trouble_text(exc: BaseException) -> str:
    """A sentence for a person instead of a traceback (store errors already are one)."""
    from logbook.store import StoreError

    if isinstance(exc, InputRejected):
        return "; ".join(str(p) for p in exc.problems)
    if isinstance(exc, StoreError):
        return str(exc)
    if isinstance(exc, sqlite3.OperationalError) and ("locked" in str(exc) or "busy" in str(exc)):
        return "the logbook database is locked by another user; nothing was written, try again in a moment"
    if isinstance(exc, sqlite3.Error):
        return f"the logbook database could not be read: {exc}"
    return f"{type(exc).__name__}: {exc}"
