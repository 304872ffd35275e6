"""Opening the database: connection settings, migrations, transactions, audit rows."""

from __future__ import annotations

import contextlib
import getpass
import json
import os
import sqlite3
import time
from datetime import datetime, timezone
from pathlib import Path
from typing import Callable, Iterator, TypeVar

import sqlite_utils

from logbook.store.schema import MIGRATIONS, SCHEMA_VERSION

T = TypeVar("T")
R = TypeVar("R")


class StoreError(Exception):
    """A database problem explained for a person (missing, locked, too new...)."""


class DatabaseMissing(StoreError):
    pass


class DatabaseTooNew(StoreError):
    pass


class DatabaseBusy(StoreError):
    pass


def default_user() -> str:
    try:
        return getpass.getuser()
    except Exception:  # no login name in some containers and cron jobs
        return os.environ.get("USER") or "unknown"


def utc_now() -> datetime:
    return datetime.now(timezone.utc).replace(microsecond=0)


class StoreCore:
    """Connection, schema and transaction handling shared by the store's parts."""

    #: Bounded retry for writes that meet a lock held past the busy timeout.
    WRITE_ATTEMPTS = 8
    BUSY_TIMEOUT_MS = 5000

    def __init__(
        self,
        path: str | Path,
        *,
        create: bool = True,
        user: str | None = None,
        clock: Callable[[], datetime] = utc_now,
    ):
        self.path = str(path)
        if user is not None and (not user.strip() or len(user) > 64 or any(ord(ch) < 32 for ch in user)):
            raise StoreError(f"--as {user[:40]!r}: a name must be 1-64 characters on one line")
        self.user = user.strip() if user else default_user()
        self.clock = clock
        memory = self.path == ":memory:"
        if not memory:
            file = Path(self.path)
            if not file.exists():
                if not create:
                    raise DatabaseMissing(
                        f"no logbook database at {self.path}: create one with `logbook init` "
                        "(or `logbook demo` for the demo fleet), or give --db PATH"
                    )
                file.parent.mkdir(parents=True, exist_ok=True)
                # Readable and writable by owner and group only.
                try:
                    fd = os.open(self.path, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o660)
                    os.close(fd)
                except FileExistsError:
                    pass  # another process created it a moment ago; its migration is serialized below
            elif not os.access(self.path, os.R_OK):
                raise StoreError(f"cannot read the logbook database at {self.path}: permission denied")
        try:
            conn = sqlite3.connect(self.path, timeout=self.BUSY_TIMEOUT_MS / 1000, isolation_level=None, check_same_thread=False)
            self.db = sqlite_utils.Database(conn, execute_plugins=False)
            conn.execute(f"PRAGMA busy_timeout = {self.BUSY_TIMEOUT_MS}")
            conn.execute("PRAGMA foreign_keys = ON")
            if not memory:
                conn.execute("PRAGMA journal_mode = WAL")
                conn.execute("PRAGMA synchronous = NORMAL")
            self._migrate()
        except sqlite3.DatabaseError as exc:
            raise StoreError(f"{self.path} is not a usable logbook database: {exc}") from exc

    @property
    def conn(self) -> sqlite3.Connection:
        return self.db.conn

    def close(self) -> None:
        self.db.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc) -> None:
        self.close()

    # -- schema -----------------------------------------------------------------
    def schema_version(self) -> int:
        return int(self.conn.execute("PRAGMA user_version").fetchone()[0])

    def _migrate(self) -> None:
        version = self.schema_version()
        if version > SCHEMA_VERSION:
            raise DatabaseTooNew(
                f"{self.path} has schema version {version}, newer than this logbook understands "
                f"({SCHEMA_VERSION}); upgrade logbook before opening it"
            )
        if version == SCHEMA_VERSION:
            return
        with self.transaction():
            # Re-read inside the write lock: another process may have migrated meanwhile.
            version = self.schema_version()
            for number in range(version, SCHEMA_VERSION):
                for statement in MIGRATIONS[number].split(";"):
                    if statement.strip():
                        self.conn.execute(statement)
                self.conn.execute(f"PRAGMA user_version = {number + 1}")

    # -- transactions -----------------------------------------------------------
    @contextlib.contextmanager
    def transaction(self) -> Iterator[sqlite3.Connection]:
        """One write transaction (BEGIN IMMEDIATE), retried a bounded number of
        times while another process holds the write lock."""
        delay = 0.05
        for attempt in range(self.WRITE_ATTEMPTS):
            try:
                self.conn.execute("BEGIN IMMEDIATE")
                break
            except sqlite3.OperationalError as exc:
                if "locked" not in str(exc) and "busy" not in str(exc):
                    raise
                if attempt == self.WRITE_ATTEMPTS - 1:
                    raise DatabaseBusy(
                        f"the logbook database {self.path} stayed locked by another user; nothing was written, try again"
                    ) from exc
                time.sleep(delay)
                delay = min(delay * 2, 1.0)
        try:
            yield self.conn
            self.conn.execute("COMMIT")
        except BaseException:
            if self.conn.in_transaction:
                self.conn.execute("ROLLBACK")
            raise

    def _check_then_write(self, check: Callable[[], T], write: Callable[[T], R], *, dry_run: bool = False) -> tuple[T, R | None]:
        """Validate without holding the write lock, then write under it. ``check`` returns
        something with ``.problems`` and ``.items``; when another connection committed in
        between, the check runs again inside the write transaction, so a write never rests
        on stale reads (two cron jobs importing one file: the second finds it all present)."""
        version = self.data_version()
        checked = check()
        if checked.problems or dry_run or not checked.items:
            return checked, None  # nothing to write (a re-import of rows already present writes nothing)
        with self.transaction():
            if self.data_version() != version:
                checked = check()
                if checked.problems or not checked.items:
                    return checked, None
            return checked, write(checked)

    def data_version(self) -> int:
        """Changes whenever another connection (any process) commits: PRAGMA data_version.
        Unchanged by this connection's own commits."""
        return int(self.conn.execute("PRAGMA data_version").fetchone()[0])

    def change_count(self) -> int:
        """A cheap fingerprint of the content that rises with every committed write by
        anyone, in any process (each write adds audit rows, never removes them). The
        fleet view polls it every few seconds and reloads when it moves."""
        return int(self.conn.execute("SELECT coalesce(max(id), 0) FROM audit").fetchone()[0])  # O(log n)

    # -- audit ------------------------------------------------------------------
    def _now_text(self) -> str:
        return self.clock().isoformat()

    def _audit(
        self, action: str, table: str, key: object, serial: str | None, before: dict | None, after: dict | None,
        reason: str | None = None,
    ) -> None:
        """One audit row: who (the store's user), when, what, before and after, why."""
        self.conn.execute(
            "INSERT INTO audit (at, who, action, table_name, row_key, serial, before_json, after_json, reason) "
            "VALUES (?,?,?,?,?,?,?,?,?)",
            (
                self._now_text(),
                self.user,
                action,
                table,
                str(key),
                serial,
                json.dumps(before, sort_keys=True, default=str) if before is not None else None,
                json.dumps(after, sort_keys=True, default=str) if after is not None else None,
                reason,
            ),
        )
