"""Writing a file the user named: every export, round sheet and backup goes through here.

What it guarantees (standard library only):

- the logbook database, its ``-wal``, ``-shm`` and ``-journal`` files, and any name that
  leads to them (a relative path, a symbolic link, a hard link) are refused with a
  message naming the path and why; nothing is written;
- ``-`` means standard output;
- a character device or a named pipe (``/dev/null``, a FIFO) is opened and written to,
  never replaced; a block device, a socket or a folder is refused;
- a symbolic link to a file is followed: the file it points to is replaced, the link stays;
- a file is replaced atomically: a temporary file beside it (hidden, named
  ``.NAME.logbook-partial-PID-XXXXXXXX``) is written, flushed to disk (fsync) and renamed
  over it; on any error the temporary file is removed and the old file is untouched;
- a new file gets the mode the user's umask gives (0o666 & ~umask); a replaced file
  keeps its mode (and, where allowed, its owner and group);
- temporary files left by a killed writer (its process is gone, or the file has not
  changed for STALE_SECONDS) are removed by the next write to the same file.
"""

from __future__ import annotations

import contextlib
import errno
import os
import re
import secrets
import stat
import sys
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Callable, Iterable, TypeVar

T = TypeVar("T")

PARTIAL_TAG = ".logbook-partial-"
STALE_SECONDS = 600  # a partial file untouched this long is a leftover even if its PID is in use again
SIDECARS = {
    "": "the database itself",
    "-wal": "the database's write-ahead log",
    "-shm": "the database's shared-memory index",
    "-journal": "the database's rollback journal",
}
_NAME_KEEP = 100  # characters of the target's name kept in a temporary file's name (names stay < 255 bytes)
_PLAIN = {
    errno.ENOSPC: "the disk is full",
    errno.EDQUOT: "the disk quota is used up",
    errno.EACCES: "permission denied",
    errno.EPERM: "permission denied",
    errno.EROFS: "the file system is read-only",
    errno.ENOENT: "the folder does not exist",
    errno.EIO: "the disk failed (input/output error)",
}


class OutputError(Exception):
    """A file could not be written; the message names the path and why, for a person."""


class OutputRefused(OutputError):
    """The target is refused before anything is written (the database, a folder...);
    ``why`` is the reason alone, for a message that names the option itself."""

    def __init__(self, message: str, why: str = ""):
        super().__init__(message)
        self.why = why or message


class OutputFailed(OutputError):
    """Writing failed (disk full, permission...); the old file is untouched."""


@dataclass(frozen=True)
class Target:
    """Where a write goes: ``given`` as typed, ``path`` the file actually written."""

    given: str
    path: Path | None  # None: standard output
    stream: bool  # a character device or named pipe: written through, never replaced
    exists: bool

    @property
    def stdout(self) -> bool:
        return self.path is None


def plain_error(exc: OSError) -> str:
    """An OS error in plain words, with the system's own wording beside them."""
    words = _PLAIN.get(exc.errno or -1)
    system = exc.strerror or str(exc)
    return f"{words} ({system})" if words and words.lower() != system.lower() else system


def _protected(databases: Iterable[str | Path | None]) -> list[tuple[Path, str, Path]]:
    """(path, what it is, database) for every database given and each of its sidecar
    files, under the name given and under its resolved name."""
    out = []
    for db in databases:
        if not db or str(db) == ":memory:":
            continue
        given = Path(os.path.abspath(os.path.expanduser(str(db))))
        for base in {given, Path(os.path.realpath(given))}:
            for suffix, what in SIDECARS.items():
                out.append((Path(f"{base}{suffix}"), what, given))
    return out


def _refuse(label: str, given: str, why: str) -> OutputRefused:
    return OutputRefused(f"{label} {given}: not written - {why}", f"not written - {why}")


def resolve(out: str | Path, *, protect: Iterable[str | Path | None] = (), label: str = "--out",
            streams: bool = True) -> Target:
    """Look at what ``out`` is before anything is written; raise ``OutputRefused`` with
    the reason when it must not be written. ``protect``: database files (with their
    sidecars) that no output may land on. ``streams=False`` refuses devices and pipes
    (a backup must be a regular file)."""
    given = str(out)
    if given == "-":
        return Target(given, None, stream=True, exists=True)
    absolute = Path(os.path.abspath(os.path.expanduser(given)))
    real = Path(os.path.realpath(absolute))
    try:
        st = os.stat(real)
    except FileNotFoundError:
        st = None
    except OSError as exc:
        raise _refuse(label, given, f"cannot look at it: {plain_error(exc)}") from exc
    how = "" if real == absolute else f" (the name leads to {real})"
    for path, what, db in _protected(protect):
        same = real == path
        if not same and st is not None:
            with contextlib.suppress(OSError):
                other = os.stat(path)
                same = (other.st_dev, other.st_ino) == (st.st_dev, st.st_ino)
                if same and not how:
                    how = f" (another name of the same file, {path})"
        if same:
            where = how or f" ({db if what == SIDECARS[''] else path})"
            raise _refuse(label, given, f"it is {what}{where}; writing there would destroy the logbook. "
                          "Give another file name")
    if st is None:
        if not real.parent.is_dir():
            raise _refuse(label, given, f"the folder {real.parent} does not exist; give a file in an existing folder, "
                          "or - for standard output")
        return Target(given, real, stream=False, exists=False)
    mode = st.st_mode
    if stat.S_ISDIR(mode):
        raise _refuse(label, given, "it is a directory; give a file name in it")
    if stat.S_ISCHR(mode) or stat.S_ISFIFO(mode):
        if not streams:
            raise _refuse(label, given, "it is a device or a pipe; give a regular file")
        return Target(given, real, stream=True, exists=True)
    if not stat.S_ISREG(mode):
        kind = "a block device (a disk)" if stat.S_ISBLK(mode) else "not a regular file"
        raise _refuse(label, given, f"it is {kind}; give a regular file")
    if not os.access(real, os.W_OK):
        raise _refuse(label, given, f"the file {real} is read-only for you; it was left as it was")
    return Target(given, real, stream=False, exists=True)


def write_bytes(out: str | Path | Target, data: bytes, *, protect: Iterable[str | Path | None] = (),
                label: str = "--out") -> Target:
    """Write ``data`` to ``out`` (``-``: standard output) with every guarantee above."""
    target = out if isinstance(out, Target) else resolve(out, protect=protect, label=label)
    if target.stdout:
        sys.stdout.flush()  # text printed before stays before
        sys.stdout.buffer.write(data)
        sys.stdout.buffer.flush()
        return target
    if target.stream:
        assert target.path is not None  # a device or a pipe is a named file, never standard output
        try:
            fd = os.open(target.path, os.O_WRONLY)  # no O_CREAT, no O_TRUNC: the device stays what it is
            try:
                _write_all(fd, data)
            finally:
                os.close(fd)
        except OSError as exc:
            raise OutputFailed(f"cannot write {label} {target.given}: {plain_error(exc)}") from exc
        return target
    replace(target, lambda fd, tmp: _write_all(fd, data), label=label)
    return target


def _write_all(fd: int, data: bytes) -> None:
    view = memoryview(data)
    while view:
        written = os.write(fd, view)
        view = view[written:]


def replace(target: Target, fill: Callable[[int, Path], T], *, label: str = "--out", new_mode: int | None = None) -> T:
    """Replace the regular file ``target.path`` atomically. ``fill(fd, tmp)`` writes the
    temporary file, through the open descriptor or by its path (an SQLite backup);
    whatever it returns is returned. An exception from ``fill`` (or an OS error) removes
    the temporary file and its SQLite sidecars and leaves the old file as it was;
    OS errors become ``OutputFailed``. ``new_mode``: the mode of a new file instead of
    the umask's (a replaced file keeps its own)."""
    path = target.path
    assert path is not None and not target.stream
    remove_stale(path)
    tmp = path.with_name(f".{path.name[:_NAME_KEEP]}{PARTIAL_TAG}{os.getpid()}-{secrets.token_hex(4)}")
    old = None
    with contextlib.suppress(FileNotFoundError):
        old = os.stat(path)
    try:
        fd = os.open(tmp, os.O_CREAT | os.O_EXCL | os.O_WRONLY, 0o666)  # the umask applies
    except OSError as exc:
        raise OutputFailed(f"cannot write {label} {target.given}: {plain_error(exc)}; {_kept(old)}") from exc
    try:
        try:
            if old is not None:
                os.fchmod(fd, stat.S_IMODE(old.st_mode))
                if (old.st_uid, old.st_gid) != (os.geteuid(), os.getegid()):
                    with contextlib.suppress(OSError):
                        os.fchown(fd, old.st_uid, old.st_gid)
            elif new_mode is not None:
                os.fchmod(fd, new_mode)
            result = fill(fd, tmp)
            os.fsync(fd)
        finally:
            os.close(fd)
        os.replace(tmp, path)
    except BaseException as exc:
        for leftover in (tmp, *(Path(f"{tmp}{s}") for s in SIDECARS if s)):
            with contextlib.suppress(OSError):
                os.unlink(leftover)
        if isinstance(exc, OSError):
            raise OutputFailed(f"cannot write {label} {target.given}: {plain_error(exc)}; {_kept(old)}") from exc
        raise
    _sync_folder(path.parent)
    return result


def _kept(old: os.stat_result | None) -> str:
    return "the file there was left as it was" if old is not None else "nothing was written"


def _sync_folder(folder: Path) -> None:
    """Make the rename itself durable (best effort: not every file system allows it)."""
    with contextlib.suppress(OSError):
        fd = os.open(folder, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except OSError:  # someone else's process: alive
        return True
    return True


def remove_stale(path: Path) -> list[Path]:
    """Remove the temporary files a killed writer left beside ``path``: its process is
    gone, or the file has not changed for STALE_SECONDS. Also the older backup partial
    name (``.NAME.PID.partial``). Returns what was removed."""
    name = path.name
    ours = re.compile(re.escape(f".{name[:_NAME_KEEP]}{PARTIAL_TAG}") + r"(\d+)-[0-9a-f]+(-journal|-wal|-shm)?")
    older = re.compile(re.escape(f".{name}.") + r"(\d+)\.partial(-journal|-wal|-shm)?")
    removed: list[Path] = []
    now = time.time()
    try:
        entries = list(os.scandir(path.parent))
    except OSError:
        return removed
    for entry in entries:
        match = ours.fullmatch(entry.name) or older.fullmatch(entry.name)
        if not match:
            continue
        try:
            if not entry.is_file(follow_symlinks=False):
                continue
            age = now - entry.stat(follow_symlinks=False).st_mtime
            pid = int(match.group(1))
            if (pid != os.getpid() and not _alive(pid)) or age > STALE_SECONDS:
                os.unlink(entry.path)
                removed.append(Path(entry.path))
        except (OSError, ValueError):
            continue
    return removed
