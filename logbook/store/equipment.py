"""Pump models and limits, machines, pumps and fitments (the equipment the readings are
about). Every call checks all its records first, then writes them all in one
transaction, or writes nothing and raises/reports every problem."""

from __future__ import annotations

import dataclasses
from datetime import date
from typing import Sequence

from logbook.model import (
    Fitment,
    ImportReport,
    InputRejected,
    Kind,
    Limit,
    Machine,
    Problem,
    Pump,
    PumpModel,
)
from logbook.store.base import StorePart
from logbook.store.batches import Checked, _line, _row_id, _shown, _with_line
from logbook.validate import check_hour_meter

MODEL_COLUMNS = (
    "code description displacement_cc rated_pressure_bar max_speed_rpm ref_temp_c ref_pressure_bar oil_grade oil_vi "
    "test_speed_rpm test_temp_min_c test_temp_max_c reading_interval_hours reading_interval_days"
).split()



#: Model fields as models.csv names them (the stored names without their unit).
_MODEL_CSV_NAMES = {c: c.removesuffix("_cc").removesuffix("_bar").removesuffix("_rpm").removesuffix("_c")
                    for c in MODEL_COLUMNS if c != "code"}
#: Fields no command changes once a model is entered (they define the pump).
_FIXED_MODEL_FIELDS = ("displacement", "rated_pressure", "max_speed")


def _model_differences(old: PumpModel, new: PumpModel) -> list[tuple[str, object, object]]:
    """(models.csv column, stored value, new value) for every field and limit that differs."""
    diffs = [(name, getattr(old, c), getattr(new, c)) for c, name in _MODEL_CSV_NAMES.items() if getattr(old, c) != getattr(new, c)]
    for kind in Kind:
        a, b = old.limit(kind), new.limit(kind)
        if (a and (a.value, a.direction)) != (b and (b.value, b.direction)):
            diffs.append((f"{kind.value}_limit", a.value if a else None, b.value if b else None))
    return diffs


def _model_change_message(code: str, diffs: list[tuple[str, object, object]]) -> str:
    """Which values differ and the audited way to change each (an import changes nothing)."""
    names = [name for name, _, _ in diffs]
    hows = []
    limits = []  # with the canonical unit written out, whatever --units says
    for name, _, new in diffs:
        if name.endswith("_limit"):
            kind = Kind(name.removesuffix("_limit"))
            limits.append(f"--limit {kind.value}=" + ("none" if new is None else _shown(new) + kind.unit.replace("L/min", "lpm")))
    if limits:
        hows.append(f"change a limit with `logbook model {code} {' '.join(limits)}` (audited)")
    editable = [n for n in names if not n.endswith("_limit") and n not in _FIXED_MODEL_FIELDS]
    if editable:
        hows.append(f"change {', '.join(editable)} in the fleet view: Models (key m), Enter on the model (audited)")
    fixed = [n for n in names if n in _FIXED_MODEL_FIELDS]
    if fixed:
        hows.append(f"{', '.join(fixed)} cannot be changed once entered: give the other pump model its own code")
    return ("already exists with other values (" + "; ".join(f"{n}: stored {_shown(a)}, file {_shown(b)}" for n, a, b in diffs)
            + "); an import does not change a model: " + "; ".join(hows))


class EquipmentMixin(StorePart):
    """Pump models and their limits, machines, pumps and their first fitments: checked, then written."""

    def _report(self, table: str, dry_run: bool, added: int, present: int, problems: list[Problem], flagged=None) -> ImportReport:
        return ImportReport(table, added=added, already_present=present, problems=problems, flagged=list(flagged or []), dry_run=dry_run)

    # -- models and limits -------------------------------------------------------
    def add_models(self, models: Sequence[PumpModel], *, lines: Sequence[int] | None = None, dry_run: bool = False) -> ImportReport:
        def write(checked: Checked) -> None:
            for m in checked.items:
                self._insert_model(m)

        checked, _ = self._check_then_write(lambda: self._check_models(models, lines), write, dry_run=dry_run)
        added = 0 if checked.problems else len(checked.items)
        return self._report("models", dry_run, added, checked.present, checked.problems)

    def _check_models(self, models: Sequence[PumpModel], lines: Sequence[int] | None) -> Checked:
        existing = self.models()
        problems, new, present, seen = [], [], 0, set()
        for i, m in enumerate(models):
            if m.code in seen:
                problems.append(Problem("model", m.code, "appears twice in this file", line=_line(lines, i)))
                continue
            seen.add(m.code)
            old = existing.get(m.code)
            if old is not None:
                diffs = _model_differences(old, m)
                if not diffs:
                    present += 1
                else:
                    problems.append(Problem("model", m.code, _model_change_message(m.code, diffs), line=_line(lines, i)))
                continue
            problems += _with_line(self._check_model(m), _line(lines, i))
            new.append(m)
        return Checked(problems, new, present)

    @staticmethod
    def _check_model(m: PumpModel) -> list[Problem]:
        problems = []
        if m.test_temp_min_c > m.test_temp_max_c:
            problems.append(Problem("test_temp_min", m.test_temp_min_c, f"must not exceed test_temp_max ({m.test_temp_max_c:g} C)", "C"))
        if m.test_speed_rpm > m.max_speed_rpm * 1.15:
            problems.append(Problem("test_speed", m.test_speed_rpm, f"must not exceed max_speed {m.max_speed_rpm:g} rpm (+15 %)", "rpm"))
        for lim in m.limits:
            want = "below" if lim.kind is Kind.SERVO_PRESSURE else "above"
            if lim.direction != want:
                problems.append(Problem(f"{lim.kind.value}_limit", lim.direction, f"direction must be '{want}'"))
        return problems

    def _insert_model(self, m: PumpModel) -> None:
        row = {c: getattr(m, c) for c in MODEL_COLUMNS}
        self.conn.execute(
            f"INSERT INTO models ({', '.join(MODEL_COLUMNS)}) VALUES ({', '.join('?' * len(MODEL_COLUMNS))})",
            [row[c] for c in MODEL_COLUMNS],
        )
        for lim in m.limits:
            self.conn.execute(
                "INSERT INTO limits (model, kind, value, direction) VALUES (?,?,?,?)",
                (m.code, lim.kind.value, lim.value, lim.direction),
            )
        self._audit("insert", "models", m.code, None, None, dataclasses.asdict(m))

    def update_model(self, code: str, **changes) -> PumpModel:
        """Change a model's reference conditions, interval or limits (``limits`` as a
        tuple of Limit). Audited with before and after; read and written in one transaction."""
        unknown = set(changes) - set(MODEL_COLUMNS) - {"limits"} - {"description"}
        if unknown or "code" in changes:
            raise InputRejected([Problem("field", sorted(unknown | ({"code"} & set(changes))), "cannot be changed here")])
        with self.transaction():
            old = self.models().get(code)
            if old is None:
                raise InputRejected([Problem("model", code, "is not a known pump model")])
            new = dataclasses.replace(old, **changes)
            problems = self._check_model(new)
            if problems:
                raise InputRejected(problems)
            self._write_model_update(old, new)
        return new

    def _write_model_update(self, old: PumpModel, new: PumpModel) -> None:
        """Rewrite a model row and its limits; audit the model and the limits apart."""
        sets = [c for c in MODEL_COLUMNS if c != "code"]
        self.conn.execute(
            f"UPDATE models SET {', '.join(f'{c} = ?' for c in sets)} WHERE code = ?",
            [getattr(new, c) for c in sets] + [old.code],
        )
        self.conn.execute("DELETE FROM limits WHERE model = ?", (old.code,))
        for lim in new.limits:
            self.conn.execute(
                "INSERT INTO limits (model, kind, value, direction) VALUES (?,?,?,?)",
                (old.code, lim.kind.value, lim.value, lim.direction),
            )
        if dataclasses.replace(old, limits=()) != dataclasses.replace(new, limits=()):
            self._audit("update", "models", old.code, None, dataclasses.asdict(old), dataclasses.asdict(new))
        if old.limits != new.limits:
            def as_dict(m: PumpModel) -> dict:
                return {lim.kind.value: {"value": lim.value, "direction": lim.direction} for lim in m.limits}

            self._audit("update", "limits", old.code, None, as_dict(old), as_dict(new))

    def set_limit(self, code: str, kind: Kind, value: float | None) -> PumpModel:
        """Set (or with None remove) one limit of a model; the other limits are re-read
        inside the write transaction so a concurrent change to them is not lost."""
        if value is not None and not value > 0:
            raise InputRejected([Problem(f"{kind.value}_limit", value, "must be a positive number", kind.unit)])
        with self.transaction():
            old = self.models().get(code)
            if old is None:
                raise InputRejected([Problem("model", code, "is not a known pump model")])
            limits = [lim for lim in old.limits if lim.kind is not kind]
            if value is not None:
                limits.append(Limit(kind, float(value), "below" if kind is Kind.SERVO_PRESSURE else "above"))
            new = dataclasses.replace(old, limits=tuple(limits))
            self._write_model_update(old, new)
        return new

    # -- machines ----------------------------------------------------------------
    def add_machines(self, machines: Sequence[Machine], *, lines=None, dry_run: bool = False) -> ImportReport:
        def write(checked: Checked) -> None:
            for m in checked.items:
                self.conn.execute("INSERT INTO machines (unit, site, description) VALUES (?,?,?)", (m.unit, m.site, m.description))
                self._audit("insert", "machines", m.unit, None, None, dataclasses.asdict(m))

        checked, _ = self._check_then_write(lambda: self._check_machines(machines, lines), write, dry_run=dry_run)
        return self._report("machines", dry_run, 0 if checked.problems else len(checked.items), checked.present, checked.problems)

    def _check_machines(self, machines: Sequence[Machine], lines) -> Checked:
        existing = self.machines()
        problems, new, present, seen = [], [], 0, set()
        for i, m in enumerate(machines):
            if m.unit in seen:
                problems.append(Problem("unit", m.unit, "appears twice in this file", line=_line(lines, i)))
                continue
            seen.add(m.unit)
            if m.unit in existing:
                if existing[m.unit] == m:
                    present += 1
                else:
                    problems.append(Problem("unit", m.unit, "already exists with another site or description", line=_line(lines, i)))
                continue
            new.append(m)
        return Checked(problems, new, present)

    # -- pumps and their first fitment ------------------------------------------------
    def add_pumps(
        self, pumps: Sequence[tuple[Pump, Fitment | None]], *, lines=None, dry_run: bool = False, today: date | None = None
    ) -> ImportReport:
        def write(checked: Checked) -> None:
            for p, fit in checked.items:
                self.conn.execute("INSERT INTO pumps (serial, model, note) VALUES (?,?,?)", (p.serial, p.model, p.note))
                self._audit("insert", "pumps", p.serial, p.serial, None, dataclasses.asdict(p))
                if fit is not None:
                    self._insert_fitment(fit)

        checked, _ = self._check_then_write(lambda: self._check_pumps(pumps, lines), write, dry_run=dry_run)
        return self._report("pumps", dry_run, 0 if checked.problems else len(checked.items), checked.present, checked.problems)

    def _check_pumps(self, pumps: Sequence[tuple[Pump, Fitment | None]], lines) -> Checked:
        models, machines, existing = self.models(), self.machines(), self.pumps()
        problems, new, present, seen = [], [], 0, set()
        for i, (p, fit) in enumerate(pumps):
            line = _line(lines, i)
            if p.serial in seen:
                problems.append(Problem("serial", p.serial, "appears twice in this file", line=line))
                continue
            seen.add(p.serial)
            if p.serial in existing:
                old_fits = self._fitments_of(p.serial)
                first = old_fits[0] if old_fits else None
                same_fit = (fit is None and first is None) or (
                    fit is not None and first is not None
                    and (first.machine, first.position, first.fitted_on, first.machine_hours_at_fit, first.pump_hours_at_fit)
                    == (fit.machine, fit.position, fit.fitted_on, fit.machine_hours_at_fit, fit.pump_hours_at_fit)
                )
                if existing[p.serial] == p and same_fit:
                    present += 1
                else:
                    problems.append(Problem("serial", p.serial, "already exists with other values", line=line))
                continue
            if p.model not in models:
                problems.append(Problem("model", p.model, "is not a known pump model: " + (", ".join(models) or "none yet"), line=line))
            if fit is not None:
                if fit.machine not in machines:
                    problems.append(Problem("machine", fit.machine, "is not a known machine unit", line=line))
                else:
                    taken = self.conn.execute(
                        "SELECT serial FROM fitments WHERE machine = ? AND position = ? AND removed_on IS NULL",
                        (fit.machine, fit.position),
                    ).fetchone()
                    if taken:
                        problems.append(
                            Problem("position", fit.position, f"on {fit.machine} is already held by pump {taken[0]}", line=line)
                        )
                    else:
                        earlier, later = self._timeline(fit.machine).neighbours(fit.fitted_on)
                        problem = check_hour_meter("machine_hours_at_fit", fit.fitted_on, fit.machine_hours_at_fit, earlier, later)
                        if problem:
                            problems.append(_with_line([problem], line)[0])
            new.append((p, fit))
        batch_positions = [(f.machine, f.position) for _, f in new if f is not None]
        dupes = {bp for bp in batch_positions if batch_positions.count(bp) > 1}
        for machine, position in sorted(dupes):
            problems.append(Problem("position", position, f"on {machine} is given to more than one pump in this file"))
        return Checked(problems, new, present)

    def _insert_fitment(self, fit: Fitment) -> int:
        cur = self.conn.execute(
            "INSERT INTO fitments (serial, machine, position, fitted_on, removed_on, machine_hours_at_fit, pump_hours_at_fit, "
            "machine_hours_at_removal) VALUES (?,?,?,?,?,?,?,?)",
            (
                fit.serial, fit.machine, fit.position, fit.fitted_on.isoformat(),
                fit.removed_on.isoformat() if fit.removed_on else None,
                fit.machine_hours_at_fit, fit.pump_hours_at_fit, fit.machine_hours_at_removal,
            ),
        )
        self._audit("insert", "fitments", cur.lastrowid, fit.serial, None, dataclasses.asdict(fit))
        return _row_id(cur)
