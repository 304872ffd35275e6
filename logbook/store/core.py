"""Opening the database: connection settings, migrations, transactions, audit rows,
and what a failure of the file itself (damaged, read-only, disk full) is told as."""

from __future__ import annotations

import contextlib
import getpass
import grp
import json
import os
import pwd
import sqlite3
import stat
import time
from collections import Counter
from dataclasses import dataclass
from datetime import datetime, timezone
from pathlib import Path
from typing import Callable, Iterator, Protocol, Sequence, TypeVar
from urllib.parse import quote

import sqlite_utils

from logbook.store.schema import MIGRATIONS, SCHEMA_VERSION

class CheckOutcome(Protocol):
    """What ``StoreCore._check_then_write`` needs of a check's outcome (``batches.Checked``)."""

    @property
    def problems(self) -> Sequence[object]: ...

    @property
    def items(self) -> Sequence[object]: ...


T = TypeVar("T", bound=CheckOutcome)
R = TypeVar("R")

#: A new database file is readable and writable by its owner and its group, whatever
#: the umask (a umask of 022 or 077 would take the group's write away and leave a
#: second planner unable to write); never by others. SQLite gives the -wal and -shm
#: files it creates beside the database the database file's own mode.
NEW_FILE_MODE = 0o660

# SQLite's primary result codes (https://www.sqlite.org/rescode.html)
_READONLY, _IOERR, _CORRUPT, _FULL, _CANTOPEN, _NOTADB = 8, 10, 11, 13, 14, 26

READS_STILL_WORK = "Reading still works (`logbook pumps`, `show`, `forecast`, `check`)."


class StoreError(Exception):
    """A database problem explained for a person (missing, locked, too new...)."""


class DatabaseMissing(StoreError):
    pass


class DatabaseTooNew(StoreError):
    pass


class DatabaseBusy(StoreError):
    pass


class DatabaseDamaged(StoreError):
    """The file fails SQLite's own checks: nothing is written to it."""


class DatabaseReadOnly(StoreError):
    """This user may read the database but not write it (file, folder or file system)."""


class DiskFull(StoreError):
    pass


def default_user() -> str:
    try:
        return getpass.getuser()
    except Exception:  # no login name in some containers and cron jobs
        return os.environ.get("USER") or "unknown"


def utc_now() -> datetime:
    return datetime.now(timezone.utc).replace(microsecond=0)


# -- telling what went wrong with the file -------------------------------------------
def _account() -> str:
    """The account this process acts as (the login name in the environment can differ: sudo -u, cron)."""
    try:
        return pwd.getpwuid(os.geteuid()).pw_name
    except KeyError:
        return f"user {os.geteuid()}"


def _names(st: os.stat_result) -> tuple[str, str]:
    try:
        owner = pwd.getpwuid(st.st_uid).pw_name
    except KeyError:
        owner = str(st.st_uid)
    try:
        group = grp.getgrgid(st.st_gid).gr_name
    except KeyError:
        group = str(st.st_gid)
    return owner, group


def _described(path: Path) -> str:
    st = path.stat()
    owner, group = _names(st)
    return f"owner {owner}, group {group}, mode {stat.filemode(st.st_mode)[1:]}"


def read_only_reason(path: str | Path) -> str | None:
    """Why the account this process runs as cannot write the database at ``path`` (None:
    nothing found).
    SQLite in WAL mode writes three files: the database, its -wal and its -shm, the last
    two created in the database's folder when they do not exist."""
    file = Path(path).absolute()
    folder = file.parent
    who = _account()
    try:
        if os.statvfs(folder).f_flag & os.ST_RDONLY:
            return f"{file} is on a read-only file system (nothing can be written to it there)"
        if file.exists() and not os.access(file, os.W_OK):
            st = file.stat()
            fix = ("`chmod u+w` gives its owner write access back" if st.st_uid == os.geteuid() else
                   f"its owner can give the group write access (`chmod g+w`) with {who} in the group {_names(st)[1]}")
            return f"the database file {file} is read-only for {who} ({_described(file)}); to write, {fix}"
        for side in (Path(f"{file}-wal"), Path(f"{file}-shm")):
            if side.exists() and not os.access(side, os.W_OK):
                return (f"{side}, which SQLite writes with every change, is read-only for {who} ({_described(side)}); "
                        f"its owner can give the group write access (`chmod g+w {side}`)")
        if not os.access(folder, os.W_OK | os.X_OK):
            return (f"the folder {folder} is not writable for {who} ({_described(folder)}), and SQLite must create "
                    f"{file.name}-wal and {file.name}-shm in it to write; give {who} write access to the folder "
                    "(README: Where the database lives)")
    except OSError:
        return None
    return None


def _disk_full(path: str | Path) -> bool:
    try:
        fs = os.statvfs(Path(path).absolute().parent)
    except OSError:
        return False
    return fs.f_bavail * fs.f_frsize < 64 * 1024  # less than a few pages left


def integrity_summary(found: list[str], shown: int = 2) -> str:
    """SQLite's integrity or quick check rows in a few words: the first problems, and how many more."""
    lines = [" ".join(line.split()) for row in found for line in row.splitlines()]
    lines = [line for line in lines if line and not line.startswith("*** in database")]
    more = f" (and {len(lines) - shown} more)" if len(lines) > shown else ""
    return "; ".join(lines[:shown]) + more


RESTORE = "restore the database from a backup (`logbook backup DEST` makes one; docs/shared-use.md says how to put one back)"


def damaged_message(path: str | Path, detail: str, *, opens: bool = True) -> str:
    look = (f"Run `logbook check --db {path}` to see what is wrong, and {RESTORE}." if opens else
            f"SQLite cannot open it, so `logbook check` cannot look into it either: {RESTORE}.")
    return f"{path} is damaged ({detail}): nothing was written, and the logbook writes nothing to a damaged file. {look}"


def explain(exc: BaseException, path: str | Path, *, opening: bool = False) -> StoreError | None:
    """A failure of SQLite itself told for a person: the disk is full, the file is
    read-only for this user, or it is damaged. None for anything else."""
    if not isinstance(exc, sqlite3.Error):
        return None
    code = getattr(exc, "sqlite_errorcode", None)
    primary = code & 0xFF if isinstance(code, int) else None
    if primary == _FULL or (primary == _IOERR and _disk_full(path)):
        return DiskFull(f"the disk holding {Path(path).absolute().parent} is full: nothing was written (the change "
                        f"was rolled back). Free some space there and try again. {READS_STILL_WORK}")
    if primary == _READONLY or (primary == _CANTOPEN and read_only_reason(path)):
        why = read_only_reason(path) or f"SQLite says: {exc}"
        return DatabaseReadOnly(f"cannot write the logbook database: {why}. Nothing was written. {READS_STILL_WORK}")
    if primary == _NOTADB:
        return DatabaseDamaged(f"{path} is not a usable logbook database: {exc} (a damaged file, or not a logbook "
                               f"database at all); nothing was written. If it is your logbook, {RESTORE}; "
                               "`logbook check` cannot look into a file SQLite does not recognize.")
    if primary == _CORRUPT:
        return DatabaseDamaged(damaged_message(path, f"SQLite says: {exc}", opens=not opening))
    if primary == _IOERR:
        return StoreError(f"the disk failed while reading or writing {path} ({exc}): nothing was written; "
                          f"run `logbook check --db {path}`")
    return None


@dataclass(frozen=True)
class Commit:
    """One committed write transaction, counted from the audit rows it wrote."""

    changes: tuple[tuple[str, str, int], ...]  # (action, table, rows)
    imported: tuple[str, int] | None = None  # (file name, rows) of an import
    label: str | None = None  # a commit that writes no audit rows (schema set-up)

    _VERBS = {"insert": "added", "correct": "corrected", "remove": "removed", "update": "updated"}

    def describe(self) -> str:
        if self.imported is not None:
            rows = self.imported[1]
            return f"the import was saved: {rows} row{' is' if rows == 1 else 's are'} in ({self.imported[0]})"
        parts = [f"{n} {'row' if n == 1 else 'rows'} of {table} {self._VERBS.get(action, action)}"
                 for action, table, n in self.changes if action != "import"]
        return "the change was saved: " + (", ".join(parts) if parts else (self.label or "no rows"))


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
        #: Why this store can only read (opened read-only because SQLite could not create
        #: its -wal/-shm files: a read-only folder, a full disk); None when it may write.
        self.read_only: str | None = None
        self._refusal: type[StoreError] = DatabaseReadOnly
        #: Write transactions this store committed, oldest first.
        self.commits: list[Commit] = []
        self._writable = False  # checked once (quick check, permissions) before the first write
        self._pending: Counter = Counter()
        self._pending_import: tuple[str, int] | None = None
        self._pending_label: str | None = None
        memory = self.path == ":memory:"
        created = False
        if not memory:
            file = Path(self.path)
            if not file.exists():
                if not create:
                    raise DatabaseMissing(
                        f"no logbook database at {self.path}: create one with `logbook init` "
                        "(or `logbook demo` for the demo fleet), or give --db PATH"
                    )
                created = self._create_file(file)
            elif not os.access(self.path, os.R_OK):
                raise StoreError(f"cannot read the logbook database at {self.path}: permission denied for "
                                 f"{_account()} ({_described(file)})")
        try:
            self.db = sqlite_utils.Database(self._connect(memory), execute_plugins=False)
            self._migrate()
        except BaseException as exc:
            if created:  # a file made here and left empty (a full disk) would read as a database later
                self._remove_if_empty()
            if isinstance(exc, sqlite3.DatabaseError):
                raise explain(exc, self.path, opening=True) or StoreError(
                    f"{self.path} is not a usable logbook database: {exc}") from exc
            raise

    def _remove_if_empty(self) -> None:
        with contextlib.suppress(Exception):
            self.db.close()
        with contextlib.suppress(OSError):
            if os.stat(self.path).st_size == 0:
                for name in (self.path, f"{self.path}-wal", f"{self.path}-shm"):
                    with contextlib.suppress(FileNotFoundError):
                        os.unlink(name)

    def _create_file(self, file: Path) -> bool:
        """Create the empty database file with NEW_FILE_MODE; False when another
        process created it first."""
        try:
            file.parent.mkdir(parents=True, exist_ok=True)
            try:
                fd = os.open(self.path, os.O_CREAT | os.O_EXCL | os.O_WRONLY, NEW_FILE_MODE)
            except FileExistsError:
                return False  # another process created it a moment ago; its migration is serialized below
            try:
                os.fchmod(fd, NEW_FILE_MODE)  # the mode asked for, not narrowed by the umask
            finally:
                os.close(fd)
            return True
        except OSError as exc:
            if _disk_full(file):
                raise DiskFull(f"cannot create {file}: the disk holding it is full; nothing was written") from exc
            raise StoreError(f"cannot create the logbook database {file}: {exc.strerror or exc}"
                             + (f" ({read_only_reason(file)})" if read_only_reason(file) else "")) from exc

    def _connect(self, memory: bool) -> sqlite3.Connection:
        conn = sqlite3.connect(self.path, timeout=self.BUSY_TIMEOUT_MS / 1000, isolation_level=None, check_same_thread=False)
        try:
            self._configure(conn, wal=not memory)
            return conn
        except sqlite3.OperationalError as exc:
            conn.close()
            if memory:
                raise
            return self._connect_read_only(exc)

    def _configure(self, conn: sqlite3.Connection, *, wal: bool) -> None:
        conn.execute(f"PRAGMA busy_timeout = {self.BUSY_TIMEOUT_MS}")
        conn.execute("PRAGMA foreign_keys = ON")
        if wal:  # WAL itself is set by the first write (ready_to_write): setting it writes to the file
            conn.execute("PRAGMA synchronous = NORMAL")
        conn.execute("SELECT count(*) FROM sqlite_master").fetchone()  # the first read: opens the file

    def _connect_read_only(self, first: sqlite3.OperationalError) -> sqlite3.Connection:
        """Read a database that cannot be written now, so that looking still works: when
        this user may not write it, or SQLite cannot create its -wal and -shm files (a
        read-only folder, a full disk). First as an ordinary read-only connection, then as
        an unchanging file, which is only sound while no -wal holds changes not yet in
        the database file."""
        told = explain(first, self.path)
        if not isinstance(told, (DatabaseReadOnly, DiskFull)):
            raise first  # not a matter of permissions or space: told as it is
        uri = f"file:{quote(os.path.abspath(self.path))}?mode=ro"
        wal = Path(f"{self.path}-wal")
        attempts = [uri]
        if not wal.exists() or wal.stat().st_size == 0:
            attempts.append(uri + "&immutable=1")
        for target in attempts:
            conn = sqlite3.connect(target, uri=True, timeout=self.BUSY_TIMEOUT_MS / 1000, isolation_level=None,
                                   check_same_thread=False)
            try:
                self._configure(conn, wal=False)
            except sqlite3.OperationalError:
                conn.close()
                continue
            self.read_only, self._refusal = str(told), type(told)
            return conn
        why = (read_only_reason(self.path) if isinstance(told, DatabaseReadOnly) else None) or str(told).rstrip(".")
        if len(attempts) == 1:
            raise StoreError(
                f"cannot read {self.path} now: {why}; and {wal.name} holds changes not yet folded into the database "
                f"file, which SQLite can only read with {Path(self.path).name}-shm beside it. Anyone who can write "
                "that folder folds them in by running `logbook check` once. Nothing was written.") from first
        raise StoreError(f"cannot read {self.path}: {why}. Nothing was written.") from first

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
                for statement in MIGRATIONS[number]:  # one statement each, run as written
                    self.conn.execute(statement)
                self.conn.execute(f"PRAGMA user_version = {number + 1}")
            self._pending_label = f"the database schema was brought to version {SCHEMA_VERSION}"

    # -- before the first write -------------------------------------------------
    def ready_to_write(self) -> None:
        """Refuse to write when this user cannot write the file or SQLite's quick check
        finds it damaged (``DatabaseReadOnly``, ``DatabaseDamaged``). Checked once per
        open store, before its first write; reads are never refused by it, so a planner
        can still look and run ``logbook check``."""
        if self._writable or self.path == ":memory:":
            return
        if self.read_only:
            raise self._refusal(self.read_only)
        why = read_only_reason(self.path) if not os.access(self.path, os.W_OK) else None
        if why:
            raise DatabaseReadOnly(f"cannot write the logbook database: {why}. Nothing was written. {READS_STILL_WORK}")
        try:
            found = [row[0] for row in self.conn.execute("PRAGMA quick_check(4)").fetchall()]
        except sqlite3.DatabaseError as exc:
            told = explain(exc, self.path)
            if not isinstance(told, DatabaseDamaged):
                raise told or exc  # locked, read-only, disk full: told as such
            found = [str(exc)]  # too damaged for the check to get through
        if found != ["ok"]:
            raise DatabaseDamaged(damaged_message(self.path, f"SQLite's quick check: {integrity_summary(found)}"))
        try:
            if self.conn.execute("PRAGMA journal_mode").fetchone()[0] != "wal":
                self.conn.execute("PRAGMA journal_mode = WAL")  # readers never wait for a writer, nor it for them
        except sqlite3.DatabaseError as exc:
            raise explain(exc, self.path) or exc
        self._writable = True

    # -- transactions -----------------------------------------------------------
    @contextlib.contextmanager
    def transaction(self) -> Iterator[sqlite3.Connection]:
        """One write transaction (BEGIN IMMEDIATE), retried a bounded number of
        times while another process holds the write lock. A failure of the file
        itself (damaged, read-only, disk full) is raised as a ``StoreError`` saying so;
        every commit is remembered in ``commits``."""
        self.ready_to_write()
        delay = 0.05
        for attempt in range(self.WRITE_ATTEMPTS):
            try:
                self.conn.execute("BEGIN IMMEDIATE")
                break
            except sqlite3.OperationalError as exc:
                if "locked" not in str(exc) and "busy" not in str(exc):
                    raise explain(exc, self.path) or exc
                if attempt == self.WRITE_ATTEMPTS - 1:
                    raise DatabaseBusy(
                        f"the logbook database {self.path} stayed locked by another user; nothing was written, try again"
                    ) from exc
                time.sleep(delay)
                delay = min(delay * 2, 1.0)
        self._pending, self._pending_import, self._pending_label = Counter(), None, None
        try:
            yield self.conn
        except BaseException as exc:
            self._roll_back()
            better = explain(exc, self.path)
            if better is None:
                raise
            raise better from exc
        try:
            self.conn.execute("COMMIT")
        except BaseException as exc:
            if isinstance(exc, sqlite3.Error) or self.conn.in_transaction:
                self._roll_back()  # COMMIT failed (disk full, ...): nothing of it is in
                raise explain(exc, self.path) or exc
            self._committed()  # interrupted just after COMMIT returned: it is in
            raise
        self._committed()

    def _roll_back(self) -> None:
        if self.conn.in_transaction:
            with contextlib.suppress(sqlite3.Error):
                self.conn.execute("ROLLBACK")

    def _committed(self) -> None:
        changes = tuple((action, table, n) for (action, table), n in self._pending.items())
        self.commits.append(Commit(changes, self._pending_import, self._pending_label))

    def _check_then_write(self, check: Callable[[], T], write: Callable[[T], R], *, dry_run: bool = False) -> tuple[T, R | None]:
        """Validate without holding the write lock, then write under it. ``check`` returns
        something with ``.problems`` and ``.items``; when another connection committed in
        between, the check runs again inside the write transaction, so a write never rests
        on stale reads (two cron jobs importing one file: the second finds it all present)."""
        if not dry_run:
            self.ready_to_write()  # a damaged file could make the check itself read wrong things
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
        self._pending[(action, table)] += 1
        if action == "import" and after is not None:
            self._pending_import = (str(after.get("file")), int(after.get("rows") or 0))
