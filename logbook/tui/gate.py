"""One store connection shared by the interface and its worker threads, one user at a time.

The gate holds either an open Store or a ``StoreOpener``: then the store (and with it
sqlite_utils, which pulls in pandas and numpy) is opened by the first worker that
needs it, after the fleet view's first frame is on screen.
"""

from __future__ import annotations

import contextlib
import threading
from dataclasses import dataclass
from pathlib import Path
from typing import Iterator


@dataclass(frozen=True)
class StoreOpener:
    """How to open an existing logbook later, in a worker thread (``logbook`` with no command)."""

    path: Path
    user: str | None = None

    def __call__(self):
        from logbook.store import Store

        return Store(self.path, create=False, user=self.user)


def is_store(candidate) -> bool:
    """An open Store (or a test double of one) rather than something that opens one."""
    return hasattr(candidate, "fleet") or not callable(candidate)


class StoreGate:
    """Serializes access to the app's single Store (its connection allows other
    threads, but two threads must not use it at once). Given an opener instead of a
    store, opens it on first use; a failed open is tried again on the next use."""

    def __init__(self, store_or_opener):
        if is_store(store_or_opener):
            self.store, self.opener = store_or_opener, None
        else:
            self.store, self.opener = None, store_or_opener
        self._lock = threading.RLock()

    @property
    def path(self) -> str:
        """The database file, when known before opening it ("" otherwise)."""
        source = self.store if self.store is not None else self.opener
        return str(getattr(source, "path", "") or "")

    def _ensure(self):
        if self.store is None:
            self.store = self.opener()
        return self.store

    @contextlib.contextmanager
    def open(self) -> Iterator:
        with self._lock:
            yield self._ensure()

    def try_open(self):
        """The store when open and free right now, else None (for the change poll: it
        never waits and never opens the store; the load does that)."""
        if self.store is None:
            return None
        if self._lock.acquire(blocking=False):
            return _Held(self)
        return None

    def close(self) -> None:
        """Close the store if this gate opened it (a store handed in is its owner's to close)."""
        with self._lock:
            if self.opener is not None and self.store is not None:
                self.store.close()
                self.store = None


class _Held:
    def __init__(self, gate: StoreGate):
        self.gate = gate

    def __enter__(self):
        return self.gate.store

    def __exit__(self, *exc) -> None:
        self.gate._lock.release()


def trouble_text(exc: BaseException) -> str:
    """A sentence for a person instead of a traceback (store errors already are one)."""
    import sqlite3

    from logbook.model import InputRejected
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
