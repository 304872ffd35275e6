"""Backups (SQLite's online backup API) and consistency checks of a logbook database."""

from __future__ import annotations

import sqlite3
from collections import defaultdict
from dataclasses import dataclass
from datetime import date
from pathlib import Path

from logbook import meter
from logbook.plausible import meter_doubt
from logbook.store.base import StorePart
from logbook.store.core import StoreError, integrity_summary

BACKUP_MODE = 0o660
MAX_LISTED = 20  # findings listed per check before "... and N more"


@dataclass(frozen=True)
class Finding:
    """One problem found by ``Store.check``: which check, and what is wrong where."""

    check: str  # integrity | foreign keys | hour meter | fitment | limits | schema
    message: str


@dataclass(frozen=True)
class BackupResult:
    path: Path
    counts: dict[str, int]
    integrity: str


COUNTED = ("models", "machines", "pumps", "fitments", "readings", "events", "audit")


class MaintenanceMixin(StorePart):
    """backup(dest) and check()."""

    def backup(self, dest: str | Path, *, force: bool = False) -> BackupResult:
        """Copy the database to ``dest`` as one consistent snapshot, even while others
        write (one backup step under a read transaction; WAL lets writers go on).

        Nothing at ``dest`` changes until a good copy exists: the source is checked first
        (SQLite's quick check), the copy is written to a hidden file beside ``dest``
        (``logbook.outfile``), checked with ``integrity_check`` and only then renamed over
        ``dest``. A damaged source or a failed copy leaves ``dest`` as it was. ``dest`` may
        not be the database or one of its -wal, -shm, -journal files, under any name. A new
        copy is readable and writable by owner and group only; a replaced one keeps its mode."""
        from logbook.outfile import OutputError, OutputRefused, replace, resolve

        dest = Path(dest)
        label = "backup destination"
        try:
            target = resolve(dest, protect=[self.path], label=label, streams=False)
        except OutputRefused as exc:
            raise StoreError(str(exc)) from exc
        if target.exists and not force:
            raise StoreError(f"backup destination {dest} already exists; give --force to replace it")
        kept = f"{dest} was left as it was" if target.exists else "no backup was written"
        self._source_sound(kept)
        try:
            counts = replace(target, lambda fd, tmp: self._copy_checked(tmp, kept), label=label, new_mode=BACKUP_MODE)
        except OutputError as exc:
            raise StoreError(str(exc)) from exc
        except sqlite3.Error as exc:
            raise StoreError(f"backup to {dest} failed: {exc}; {kept}") from exc
        return BackupResult(dest, counts, "ok")

    def _source_sound(self, kept: str) -> None:
        """Refuse to back up a file SQLite's quick check finds damaged: the copy would carry
        the damage, and replacing a good earlier backup with it would lose that backup."""
        from logbook.store.core import RESTORE

        try:
            found = [row[0] for row in self.conn.execute("PRAGMA quick_check(4)").fetchall()]
        except sqlite3.DatabaseError as exc:  # too damaged for the check to get through
            found = [str(exc)]
        if found != ["ok"]:
            raise StoreError(
                f"{self.path} is damaged (SQLite's quick check: {integrity_summary(found)}): {kept}. Run "
                f"`logbook check --db {self.path}` to see what is wrong, and {RESTORE}. To keep the damaged file "
                "as it is for a closer look, copy it with cp while nobody writes."
            )

    def _copy_checked(self, tmp: Path, kept: str) -> dict[str, int]:
        """The online backup into ``tmp`` (an empty file), made self-contained and checked;
        the row counts of the copy. Raises, leaving ``tmp`` to be removed, when the copy
        fails ``integrity_check``."""
        target = sqlite3.connect(tmp, isolation_level=None)
        try:
            self.conn.backup(target)  # pages=-1: all pages in one step, one snapshot
            target.execute("PRAGMA journal_mode = DELETE")  # a single self-contained file
            found = [row[0] for row in target.execute("PRAGMA integrity_check").fetchall()]
            if found != ["ok"]:
                raise StoreError(f"the copy failed SQLite's integrity check ({integrity_summary(found)}): {kept}; "
                                 f"run `logbook check --db {self.path}`")
            return {t: target.execute(f"SELECT count(*) FROM {t}").fetchone()[0] for t in COUNTED}  # constant names
        finally:
            target.close()

    def check(self) -> list[Finding]:
        """Every problem found by SQLite's own checks and the logbook's domain rules,
        read in one snapshot. An empty list means the database is sound."""
        try:
            return self._check()
        except sqlite3.DatabaseError as exc:  # a damaged file can fail the checks themselves
            if self.conn.in_transaction:
                self.conn.execute("ROLLBACK")
            try:  # the quick check skips what stopped the full one, and may still say where
                found = [row[0] for row in self.conn.execute("PRAGMA quick_check(20)").fetchall()]
            except sqlite3.DatabaseError:
                found = []
            where = f": {integrity_summary(found, MAX_LISTED)}" if found and found != ["ok"] else ""
            return [Finding("integrity", f"SQLite cannot read the file through ({exc}){where}. Nothing will be "
                            "written to it; restore the database from a backup (docs/shared-use.md says how)")]

    def _check(self) -> list[Finding]:
        findings: list[Finding] = []
        self.conn.execute("BEGIN")
        try:
            for (msg,) in self.conn.execute("PRAGMA integrity_check").fetchall():
                if msg != "ok":
                    findings.append(Finding("integrity", msg))
            if findings:
                return findings  # a damaged file: the domain checks would only add noise
            for table, rowid, parent, _ in self.conn.execute("PRAGMA foreign_key_check").fetchall():
                findings.append(Finding("foreign keys", f"{table} row {rowid} points to a missing {parent} row"))
            findings += self._check_hour_meters()
            findings += self._check_fitments()
            for code in [r[0] for r in self.conn.execute(
                    "SELECT code FROM models WHERE code NOT IN (SELECT model FROM limits) ORDER BY code")]:
                findings.append(Finding("limits", f"model {code} has no limits: none of its pumps can be forecast "
                                        f"(set one with `logbook model {code} --limit case_drain=...`)"))
        finally:
            self.conn.execute("COMMIT")
        return findings

    def _check_hour_meters(self) -> list[Finding]:
        """Per machine and meter era, no record may show fewer hours than an earlier-dated one."""
        reps: dict[str, list[date]] = defaultdict(list)
        for machine, on in self.conn.execute(
            "SELECT machine, happened_on FROM events WHERE kind = 'meter_replaced' AND removed_reason IS NULL"
        ):
            reps[machine].append(date.fromisoformat(on))
        points: dict[str, list[tuple[date, float, str]]] = defaultdict(list)
        queries = (
            ("SELECT machine, taken_on, machine_hours, 'reading ' || id FROM readings "
             "WHERE superseded_by IS NULL AND removed_reason IS NULL"),
            ("SELECT machine, happened_on, hours, kind || ' event ' || id FROM events "
             "WHERE hours IS NOT NULL AND kind != 'meter_replaced' AND removed_reason IS NULL AND machine IS NOT NULL"),
            ("SELECT to_machine, happened_on, to_hours, 'move event ' || id || ' (arrival)' FROM events "
             "WHERE kind = 'move' AND to_hours IS NOT NULL AND removed_reason IS NULL"),
            "SELECT machine, fitted_on, machine_hours_at_fit, 'fitment ' || id || ' (fitted)' FROM fitments",
            ("SELECT machine, removed_on, machine_hours_at_removal, 'fitment ' || id || ' (removed)' FROM fitments "
             "WHERE removed_on IS NOT NULL AND machine_hours_at_removal IS NOT NULL"),
        )
        for sql in queries:
            for machine, on, hours, what in self.conn.execute(sql):
                points[machine].append((date.fromisoformat(on), float(hours), what))
        findings: list[Finding] = []
        for machine in sorted(points):
            tl = meter.MeterTimeline(reps.get(machine, ()))
            by_era: dict[int, list[tuple[date, float, str]]] = defaultdict(list)
            for p in points[machine]:
                by_era[tl.era(p[0])].append(p)
            bad, jumps = [], []
            for era_points in by_era.values():
                era_points.sort(key=lambda p: (p[0], p[1]))
                highest = None
                for p in era_points:
                    if highest is not None and p[1] < highest[1] - 1e-9:
                        bad.append(f"{machine}: {p[1]:g} h on {p[0]} ({p[2]}) after {highest[1]:g} h on {highest[0]} ({highest[2]})")
                    elif highest is not None and (doubt := meter_doubt(p[0], p[1], highest[:2], None)) is not None:
                        jumps.append(f"{machine}: {p[1]:g} h on {p[0]} ({p[2]}) after {highest[1]:g} h on {highest[0]} "
                                     f"({highest[2]}): {doubt.reason}")
                    if highest is None or p[1] > highest[1]:
                        highest = p
            findings += [Finding("hour meter", f"runs backwards on {b}") for b in bad[:MAX_LISTED]]
            if len(bad) > MAX_LISTED:
                findings.append(Finding("hour meter", f"{machine}: ... and {len(bad) - MAX_LISTED} more"))
            findings += [Finding("hour meter", f"jumps implausibly on {j}; correct the reading if it was "
                                 "mistyped") for j in jumps[:MAX_LISTED]]
            if len(jumps) > MAX_LISTED:
                findings.append(Finding("hour meter", f"{machine}: ... and {len(jumps) - MAX_LISTED} more jumps"))
        return findings

    def _check_fitments(self) -> list[Finding]:
        """Readings lie inside a fitment of their pump, on the machine recorded; no pump
        sits in two places and no position holds two pumps at once."""
        fits = self.fitments()
        by_serial = defaultdict(list)
        for f in fits:
            by_serial[f.serial].append(f)
        findings, outside = [], []
        for rid, serial, on, machine in self.conn.execute(
            "SELECT id, serial, taken_on, machine FROM readings WHERE superseded_by IS NULL AND removed_reason IS NULL ORDER BY id"
        ):
            fit = meter.fitment_on(by_serial.get(serial, ()), date.fromisoformat(on))
            if fit is None:
                outside.append(f"reading {rid} of {serial} on {on} lies outside every fitment of the pump")
            elif fit.machine != machine:
                outside.append(f"reading {rid} of {serial} on {on} is filed under {machine}, but the pump sat in {fit.machine}")
        findings += [Finding("fitment", m) for m in outside[:MAX_LISTED]]
        if len(outside) > MAX_LISTED:
            findings.append(Finding("fitment", f"... and {len(outside) - MAX_LISTED} more readings outside a fitment"))

        def overlap(a, b) -> bool:  # periods [fitted_on, removed_on); a move day belongs to the new fitment
            a_end, b_end = a.removed_on or date.max, b.removed_on or date.max
            return a.fitted_on < b_end and b.fitted_on < a_end

        for serial, fl in sorted(by_serial.items()):
            for i, a in enumerate(fl):
                for b in fl[i + 1:]:
                    if overlap(a, b):
                        findings.append(Finding("fitment", f"pump {serial} sits in {a.machine} and {b.machine} at once "
                                                f"(fitments {a.id} and {b.id})"))
        by_position = defaultdict(list)
        for f in fits:
            by_position[(f.machine, f.position)].append(f)
        for (machine, position), fl in sorted(by_position.items()):
            for i, a in enumerate(fl):
                for b in fl[i + 1:]:
                    if a.serial != b.serial and overlap(a, b):
                        findings.append(Finding("fitment", f"position {position} on {machine} holds {a.serial} and {b.serial} "
                                                f"at once (fitments {a.id} and {b.id})"))
        return findings
