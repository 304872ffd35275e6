"""Names the command line was given that the logbook does not know as given: the message says
which known name was meant when one differs only in letter case (``validate.case_match``), what a
pump serial given for a machine (or a machine unit given for a serial) is, and in a meter that runs
backwards the machine to name in the command that records the new meter. Nothing is changed: the
problems stay problems, and nothing is written."""

from __future__ import annotations

import dataclasses
from collections.abc import Collection
from datetime import date

from logbook import meter, validate
from logbook.model import Problem

#: Problem fields that hold a name, and what kind of name.
NAME_FIELDS = {
    "serial": "pumps", "serial_in": "pumps", "--serial-in": "pumps",
    "machine": "machines", "to_machine": "machines", "--machine": "machines", "--to-machine": "machines",
    "model": "models", "--model": "models",
    "site": "sites", "--site": "sites",
}


class Known:
    """The store's names, read when first asked for (a message only)."""

    def __init__(self, store):
        self.store = store
        self._names: dict[str, Collection[str]] = {}
        self._fits: dict[str, list] = {}

    def names(self, what: str) -> Collection[str]:
        """The names of "pumps", "machines", "models" (the store's dicts) or "sites"."""
        if what not in self._names:
            if what == "sites":
                self._names[what] = {m.site for m in self.store.machines().values()}
            else:
                self._names[what] = getattr(self.store, what)()
        return self._names[what]

    def fitments(self, serial: str | None = None, machine: str | None = None) -> list:
        key = f"s:{serial}" if serial is not None else f"m:{machine}"
        if key not in self._fits:
            self._fits[key] = self.store.fitments(serial=serial, machine=machine)
        return self._fits[key]

    def machine_of(self, serial: str, day: date | None) -> tuple[str, date | None] | None:
        """(the machine the pump sat in on ``day`` (else its newest fitting), that day), or None."""
        fits = self.fitments(serial=serial)
        if not fits:
            return None
        if day is not None and (on := meter.fitment_on(fits, day)) is not None:
            return on.machine, day
        newest = max(fits, key=lambda f: (f.fitted_on, f.id or 0))
        return newest.machine, None

    def pumps_in(self, machine: str, day: date | None) -> list[str]:
        """'B-25530 (swing)' for each pump in the machine on ``day`` (else now)."""
        fits = self.fitments(machine=machine)
        if day is None:
            held = [f for f in fits if f.removed_on is None]
        else:
            held = [f for f in fits if f.fitted_on <= day and (f.removed_on is None or day <= f.removed_on)]
        return [f"{f.serial} ({f.position})" for f in sorted(held, key=lambda f: (f.position, f.serial))]


def fitted_words(known: Known, serial: str, day: date | None) -> str:
    """'pump B-25530 sat in EX-311 on 2026-12-01', 'pump B-25530 is in no machine', ..."""
    where = known.machine_of(serial, day)
    if where is None:
        return f"pump {serial} is in no machine"
    machine, on = where
    return f"pump {serial} sat in {machine} on {on.isoformat()}" if on is not None else f"pump {serial} was last in {machine}"


def hinted(problems: list[Problem], known: Known, *, serial: str | None = None, day: date | None = None,
           machine: str | None = None) -> list[Problem]:
    """``problems`` with what the names given can tell added to their words. ``serial``/``day``:
    the pump and date of the reading or event (the machine of a meter that runs backwards), or
    ``machine`` when the event names it."""
    out = []
    for p in problems:
        extra = ""
        what = NAME_FIELDS.get(p.field)
        value = p.value if isinstance(p.value, str) else None
        if what is not None and value:
            names = known.names(what)
            if value not in names:
                extra = validate.did_you_mean(value, names)
                if not extra and what == "machines" and value in known.names("pumps"):
                    where = known.machine_of(value, day)
                    extra = (f"; {value} is a pump serial ({fitted_words(known, value, day)}"
                             + (f": --machine {where[0]}" if where else "") + ")")
                elif not extra and what == "pumps" and value in known.names("machines"):
                    inside = known.pumps_in(value, day)
                    extra = f"; {value} is a machine unit" + (f", fitted with {', '.join(inside)}" if inside else "")
        allowed = p.allowed
        placeholder = f"--machine {validate.SOME_MACHINE} "
        if placeholder in allowed:
            unit = machine
            if unit is None and serial is not None and serial in known.names("pumps"):
                where = known.machine_of(serial, day)
                unit = where[0] if where else None
            if unit is not None:
                allowed = allowed.replace(placeholder, f"--machine {unit} ").replace(
                    "runs backwards: the machine read", f"runs backwards: the machine {unit} read")
        if extra or allowed != p.allowed:
            p = dataclasses.replace(p, allowed=allowed + extra)
        out.append(p)
    return out


def unknown_pump(serial: str, pumps) -> str:
    """'serial 'b-25530' is not a known pump; did you mean B-25530?' (show, history)."""
    return f"serial {serial!r} is not a known pump{validate.did_you_mean(serial, pumps)}"
