"""Machine-readable listings of `logbook pumps`, `show`, `history` and `check` (pure).

JSON documents carry ``schema`` (which document), ``schema_version`` and the units
every value is in; docs/json.md describes them and docs/logbook.schema.json is the
JSON Schema they are tested against. Values are in the units chosen (``--units``),
each reading value object names its own unit. A status is a ``code`` (stable, for
programs) with its ``words`` and ``symbol`` (for people).

CSV listings are flat: one header row, one row per item, values without units in
the cells and the unit in the header, e.g. ``case drain (L/min)``.
"""

from __future__ import annotations

import csv
import io
import json
import math
import re
from datetime import date

from logbook import units as unit_conv
from logbook.csvread import quote_formula
from logbook.model import ALL_KINDS, Kind
from logbook.units import UnitPrefs

#: Raised when a document's keys or meaning change (docs/json.md lists the changes).
SCHEMA_VERSION = 1


def status_json(words: str) -> dict:
    """``"✖ over limit"`` -> code ``over_limit``, words ``over limit``, symbol ``✖``."""
    symbol, _, rest = words.partition(" ")
    if not rest:  # no symbol
        symbol, rest = "", words
    return {"code": status_code(words), "words": rest, "symbol": symbol}


def status_code(words: str) -> str:
    """The status's stable code: its words without the symbol, lower case, joined by ``_``."""
    _, _, rest = words.partition(" ")
    return re.sub(r"[^a-z0-9]+", "_", (rest or words).lower()).strip("_")


def _f(value: float | None, digits: int = 4) -> float | None:
    if value is None or not math.isfinite(value):
        return None
    return round(float(value), digits)


def _d(value) -> str | None:
    return value.isoformat() if value is not None else None


def unit_of(kind: Kind, prefs: UnitPrefs) -> str:
    return prefs.flow if kind is Kind.CASE_DRAIN else prefs.pressure


def shown(value: float | None, unit: str, digits: int = 4) -> float | None:
    """A canonical value in ``unit`` (bar -> psi, L/min -> gpm, C -> F), rounded; None stays None."""
    return None if value is None else _f(unit_conv.from_canonical(value, unit), digits)


def units_json(prefs: UnitPrefs) -> dict:
    return {"flow": prefs.flow, "pressure": prefs.pressure, "temperature": prefs.temperature, "hours": "h"}


def _head(schema: str, today: date, prefs: UnitPrefs) -> dict:
    return {"schema": schema, "schema_version": SCHEMA_VERSION, "today": today.isoformat(), "units": units_json(prefs)}


def kind_json(kf, prefs: UnitPrefs) -> dict:
    unit = unit_of(kf.kind, prefs)
    return {
        "kind": kf.kind.value,
        "label": kf.kind.label,
        "unit": unit,
        "latest_value": shown(kf.latest_value, unit),
        "latest_on": _d(kf.latest_on),
        "limit": shown(kf.limit.value, unit) if kf.limit else None,
        "limit_direction": kf.limit.direction if kf.limit else None,
        "percent_of_limit": _f(kf.percent_of_limit, 1),
        "readings_in_segment": kf.n_readings,
        "path": kf.path,
        "p10_date": _d(kf.p10_date),
        "p50_date": _d(kf.p50_date),
        "p90_date": _d(kf.p90_date),
        "p10_hours": _f(kf.p10_hours, 1),
        "p50_hours": _f(kf.p50_hours, 1),
        "p90_hours": _f(kf.p90_hours, 1),
        "outcome": kf.outcome.value,
        "flags": sorted(kf.flags),
    }


def next_reading_json(test, today: date) -> dict | None:
    if test is None:
        return None
    return {"on": _d(test.test_on), "words": test.words(today), "earlier_than_interval": test.earlier,
            "as_soon_as_possible": test.asap, "why": test.reason}


def pump_json(p, test, today: date, prefs: UnitPrefs) -> dict:
    return {
        "serial": p.serial,
        "model": p.model,
        "site": p.site,
        "machine": p.machine,
        "position": p.position,
        "hours_since_overhaul": _f(p.hours_since_overhaul, 1),
        "hours_per_day": _f(p.hours_per_day, 3),
        "last_reading_on": _d(p.last_reading_on),
        "status": status_json(p.status),
        "nearest_limit": p.worst.kind.value if p.worst else None,
        "readings": [kind_json(kf, prefs) for kf in p.kinds],
        "next_reading": next_reading_json(test, today),
    }


def pumps_json(rows, tests, today: date, prefs: UnitPrefs) -> dict:
    return {**_head("logbook.pumps", today, prefs),
            "pumps": [pump_json(p, (tests or {}).get(p.serial), today, prefs) for p in rows]}


PUMP_CSV_HEADER = ("serial", "site", "machine", "position", "model", "hours since overhaul (h)", "status",
                   "status code", "nearest limit", "percent of limit (%)", "P10 date", "P50 date", "P90 date",
                   "next reading on", "next reading")


def pumps_csv_rows(rows, tests, today: date) -> list[list]:
    out = []
    for p in rows:
        w, t = p.worst, (tests or {}).get(p.serial)
        out.append([p.serial, p.site or "", p.machine or "", p.position or "", p.model,
                    _num(p.hours_since_overhaul, 0), status_json(p.status)["words"], status_code(p.status),
                    w.kind.label if w else "", _num(w.percent_of_limit if w else None, 1),
                    _d(w.p10_date) if w else "", _d(w.p50_date) if w else "", _d(w.p90_date) if w else "",
                    _d(t.test_on) if t else "", t.words(today) if t else ""])
    return out


def _num(value: float | None, digits: int) -> str:
    if value is None or not math.isfinite(value):
        return ""
    return f"{value:.{digits}f}"


# -- show ------------------------------------------------------------------------
READING_FIELDS = (("case_drain", Kind.CASE_DRAIN), ("servo_pressure", Kind.SERVO_PRESSURE),
                  ("neutral_drift", Kind.NEUTRAL_DRIFT))


def reading_json(r, prefs: UnitPrefs) -> dict:
    state = "corrected" if r.superseded_by else "removed" if r.removed_reason else "current"
    out = {"id": r.id, "taken_on": _d(r.taken_on), "machine": r.machine, "machine_hours": _f(r.machine_hours, 1),
           "state": state}
    for key, kind in READING_FIELDS:
        out[key] = shown(r.value(kind), unit_of(kind, prefs))
    out.update({
        "oil_temp": shown(r.oil_temp_c, prefs.temperature, 2),
        "test_pressure": shown(r.test_pressure_bar, prefs.pressure),
        "test_speed_rpm": _f(r.test_speed_rpm, 1),
        "iso4406": r.iso4406,
        "technician": r.technician,
        "entered_by": r.entered_by,
        "note": r.note,
    })
    return out


def show_json(history, readings, forecast, today: date, prefs: UnitPrefs) -> dict:
    m = history.model
    return {
        **_head("logbook.show", today, prefs),
        "serial": forecast.serial,
        "model": {"code": m.code, "displacement_cc_per_rev": _f(m.displacement_cc, 3),
                  "rated_pressure": shown(m.rated_pressure_bar, prefs.pressure, 2)},
        "status": status_json(forecast.status),
        "fitments": [{"machine": f.machine, "position": f.position, "fitted_on": _d(f.fitted_on),
                      "removed_on": _d(f.removed_on), "machine_hours_at_fit": _f(f.machine_hours_at_fit, 1),
                      "pump_hours_at_fit": _f(f.pump_hours_at_fit, 1)} for f in history.fitments],
        "events": [{"happened_on": _d(e.happened_on), "kind": e.kind.value, "machine": e.machine,
                    "hours": _f(e.hours, 1), "serial_in": e.serial_in, "note": e.note} for e in history.events],
        "readings": [reading_json(r, prefs) for r in readings],
        "forecast": [kind_json(kf, prefs) for kf in forecast.kinds],
    }


def show_csv_rows(readings, prefs: UnitPrefs) -> tuple[list[str], list[list]]:
    """The readings of ``show`` as CSV (the table a spreadsheet wants)."""
    header = ["id", "date", "state", "machine", "machine hours (h)"]
    header += [f"{kind.label} ({unit_of(kind, prefs)})" for _, kind in READING_FIELDS]
    header += [f"oil temperature ({prefs.temperature})", f"test pressure ({prefs.pressure})", "technician", "note"]
    rows = []
    for r in readings:
        j = reading_json(r, prefs)
        rows.append([j["id"], j["taken_on"], j["state"], j["machine"] or "", j["machine_hours"],
                     *(j[key] for key, _ in READING_FIELDS), j["oil_temp"], j["test_pressure"], r.technician or r.entered_by,
                     r.note])
    return header, rows


# -- history and check -------------------------------------------------------------
def history_json(serial: str, trail, described, today: date, prefs: UnitPrefs) -> dict:
    return {**_head("logbook.history", today, prefs), "serial": serial, "entries": [
        {"at_utc": e.at.strftime("%Y-%m-%dT%H:%M:%SZ"), "who": e.who, "action": e.action, "table": e.table,
         "key": e.key, "what": what, "change": change, "reason": e.reason, "before": e.before, "after": e.after}
        for e, (what, change) in zip(trail, described)]}


def check_json(path: str, findings, counts, today: date, prefs: UnitPrefs) -> dict:
    return {**_head("logbook.check", today, prefs), "database": path, "ok": not findings,
            "counts": counts, "findings": [{"check": f.check, "message": f.message} for f in findings]}


def to_json(doc: dict) -> str:
    return json.dumps(doc, indent=1, ensure_ascii=False, allow_nan=False, default=str) + "\n"


def to_csv(header, rows) -> str:
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow([quote_formula(str(h)) for h in header])
    w.writerows([[quote_formula("" if v is None else str(v)) for v in row] for row in rows])
    return buf.getvalue()


__all__ = ["SCHEMA_VERSION", "status_json", "status_code", "pumps_json", "show_json", "history_json", "check_json",
           "to_json", "to_csv", "ALL_KINDS"]
