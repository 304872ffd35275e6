"""Six kinds of damage done to a copy of a sound, closed database file: what a failing
disk, an interrupted copy or a stray write leaves behind. Deterministic (fixed seeds)."""

from __future__ import annotations

import os
import random
import sqlite3
from pathlib import Path

PAGE = 4096  # SQLite's default page size, the one the logbook's files use


def _noise(seed: int, n: int) -> bytes:
    rng = random.Random(seed)
    return bytes(rng.randrange(256) for _ in range(n))


def _rewrite(path: Path, change) -> None:
    data = bytearray(path.read_bytes())
    change(data)
    path.write_bytes(bytes(data))


def truncated(path: Path) -> None:
    """Cut off at half its size (a copy stopped midway)."""
    os.truncate(path, path.stat().st_size // 2)


def torn(path: Path) -> None:
    """One page in the middle missing, the pages after it shifted down one place."""
    middle = path.stat().st_size // PAGE // 2 * PAGE

    def cut(data: bytearray) -> None:
        del data[middle:middle + PAGE]

    _rewrite(path, cut)


def _schema_pages(path: Path) -> set[int]:
    """Page numbers (from 1) that hold the schema, by SQLite's dbstat table."""
    conn = sqlite3.connect(f"file:{path}?mode=ro", uri=True)
    try:
        return {row[0] for row in conn.execute("SELECT pageno FROM dbstat WHERE name = 'sqlite_schema'")}
    finally:
        conn.close()


def scribbled(path: Path) -> None:
    """Two pages of rows near the middle overwritten with noise, the header and the schema
    kept (a schema that grew by ALTER TABLE may sit in the middle too: ``schema_page`` damages it)."""
    schema = _schema_pages(path)
    page = path.stat().st_size // PAGE // 2 + 1  # page numbers count from 1
    while page in schema or page + 1 in schema:
        page += 1
    middle = (page - 1) * PAGE

    def scribble(data: bytearray) -> None:
        data[middle:middle + 2 * PAGE] = _noise(4406, 2 * PAGE)

    _rewrite(path, scribble)


def zeroed(path: Path) -> None:
    """Four pages from the middle on read back as zeros (a lost write of a disk block)."""
    start = path.stat().st_size // PAGE // 2 * PAGE - 2 * PAGE

    def zero(data: bytearray) -> None:
        data[start:start + 4 * PAGE] = bytes(4 * PAGE)

    _rewrite(path, zero)


def garbage_header(path: Path) -> None:
    """The 100-byte file header overwritten: SQLite no longer knows the file."""

    def header(data: bytearray) -> None:
        data[:100] = _noise(1, 100)

    _rewrite(path, header)


def schema_page(path: Path) -> None:
    """The rest of the first page (the table of tables and indexes) overwritten."""

    def schema(data: bytearray) -> None:
        data[100:PAGE] = _noise(2, PAGE - 100)

    _rewrite(path, schema)


KINDS = {f.__name__: f for f in (truncated, torn, scribbled, zeroed, garbage_header, schema_page)}
