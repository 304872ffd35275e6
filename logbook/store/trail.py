"""The audit trail of one pump: who changed what, when, from what to what, and why."""

from __future__ import annotations

import json
from dataclasses import dataclass
from datetime import datetime

from logbook.store.base import StorePart


@dataclass(frozen=True)
class TrailEntry:
    """One line of a pump's history. ``before``/``after`` are the row as it was and
    became (None for an insert's before or a deletion's after)."""

    at: datetime
    who: str
    action: str  # insert | update | correct | remove | import
    table: str  # readings | events | fitments | pumps | models | limits
    key: str  # the row's id (or model code); "import N" for an import
    before: dict | None
    after: dict | None
    reason: str | None = None


def _json(text: str | None) -> dict | None:
    return json.loads(text) if text else None


class TrailMixin(StorePart):
    """pump_trail(serial): the audit rows of a pump, its model's limits, and the imports
    that brought its readings and events (one line per import, via ``import_id``)."""

    def pump_trail(self, serial: str) -> list[TrailEntry]:
        entries: list[tuple[str, int, TrailEntry]] = []
        model = self.conn.execute("SELECT model FROM pumps WHERE serial = ?", (serial,)).fetchone()
        rows = self.conn.execute(
            "SELECT id, at, who, action, table_name, row_key, before_json, after_json, reason FROM audit "
            "WHERE serial = ? OR (serial IS NULL AND table_name IN ('models', 'limits') AND row_key = ?) ORDER BY id",
            (serial, model[0] if model else None),
        ).fetchall()
        for aid, at, who, action, table, key, before, after, reason in rows:
            entries.append((at, aid, TrailEntry(datetime.fromisoformat(at), who, action, table, key, _json(before), _json(after), reason)))
        for table, date_col in (("readings", "taken_on"), ("events", "happened_on")):
            for imp in self.conn.execute(
                f"SELECT i.id, i.file_name, i.file_sha256, i.entered_by, i.entered_at, count(*), min(t.id), max(t.id), "
                f"min(t.{date_col}), max(t.{date_col}), (SELECT max(a.id) FROM audit a WHERE a.action = 'import' "
                "AND a.table_name = i.kind AND a.row_key = CAST(i.id AS TEXT)) "
                f"FROM {table} t JOIN imports i ON i.id = t.import_id WHERE t.serial = ? GROUP BY i.id ORDER BY i.id",
                (serial,),
            ):
                iid, name, sha, who, at, n, lo, hi, first, last, audit_id = imp
                after = {"file": name, "sha256": sha, f"{table} of this pump": n, "ids": f"{lo}..{hi}", "dates": f"{first}..{last}"}
                entries.append((at, audit_id or 0, TrailEntry(datetime.fromisoformat(at), who, "import", table, f"import {iid}", None, after)))
        entries.sort(key=lambda item: (item[0], item[1]))
        return [entry for _, _, entry in entries]

    def writers(self, *, besides: str | None = None) -> list[str]:
        """Everyone who ever wrote to this database (the audit's ``who``), in name order,
        leaving out ``besides`` (``logbook demo`` asks whether anyone but itself did)."""
        rows = self.conn.execute("SELECT DISTINCT who FROM audit WHERE who IS NOT ? ORDER BY who", (besides,))
        return [row[0] for row in rows]
