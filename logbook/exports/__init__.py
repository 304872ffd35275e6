"""Exports of the forecast and the overhaul plan: csv, md, html, json (text in, bytes out).

Every export is a pure function of a ``Report``: the same report always gives the
same bytes. The only date written is ``Provenance.made_on``.

    report = Report(forecast, plan, life, Provenance.from_models(db, made_on, models))
    data = render(report, "html")  # bytes
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import date

from logbook.analysis.life import LifeFigures
from logbook.analysis.results import FleetForecast
from logbook.cautions import SAFETY, Safety
from logbook.model import Kind, Limit, PumpModel
from logbook.plan import Plan
from logbook.units import UnitPrefs, from_canonical

FORMATS = ("csv", "md", "html", "json")

PROBABILITY_NOTE = (
    "Chance of crossing: split lognormal on days from the forecast date through the "
    "P10, P50 and P90 dates (below the median the spread comes from P10, above it from P90)."
)


def unit_of(kind: Kind, units: UnitPrefs) -> str:
    """The unit a reading kind is shown in: the flow unit for case drain, the pressure unit for
    servo pressure and neutral drift (``--units``)."""
    return units.flow if kind.unit == "L/min" else units.pressure if kind.unit == "bar" else kind.unit


def in_units(value: float | None, kind: Kind, units: UnitPrefs) -> float | None:
    """A value of ``kind`` in its canonical unit, in the unit ``unit_of`` gives (None stays None)."""
    if value is None:
        return None
    unit = unit_of(kind, units)
    return value if unit == kind.unit else from_canonical(value, unit)


@dataclass(frozen=True)
class Provenance:
    """Where an export came from: database, date made, limits used; and the safety list."""

    database: str
    made_on: date
    limits: dict[str, tuple[Limit, ...]]  # pump model code -> its limits
    safety: Safety = SAFETY
    program: str = "logbook"

    @classmethod
    def from_models(cls, database: str, made_on: date, models: dict[str, PumpModel]) -> "Provenance":
        return cls(database=database, made_on=made_on, limits={code: m.limits for code, m in sorted(models.items())})

    def limit_lines(self, units: UnitPrefs = UnitPrefs()) -> list[tuple[str, str]]:
        """(model, "case drain above 8.00 L/min; ...") per model, sorted by model, in ``units``."""
        out = []
        for model in sorted(self.limits):
            words = "; ".join(
                f"{lim.kind.label} {lim.direction} {in_units(lim.value, lim.kind, units):.2f} {unit_of(lim.kind, units)}"
                for lim in self.limits[model]
            )
            out.append((model, words or "no limits set"))
        return out

    def as_dict(self, units: UnitPrefs = UnitPrefs()) -> dict:
        return {
            "database": self.database,
            "made_on": self.made_on.isoformat(),
            "program": self.program,
            "limits": {
                model: [
                    {"kind": lim.kind.value, "value": round(in_units(lim.value, lim.kind, units), 6),
                     "unit": unit_of(lim.kind, units), "direction": lim.direction}
                    for lim in self.limits[model]
                ]
                for model in sorted(self.limits)
            },
            "safety": self.safety.as_dict(),
        }


@dataclass(frozen=True)
class Report:
    """Everything an export shows."""

    forecast: FleetForecast
    plan: Plan
    life: tuple[LifeFigures, ...]
    provenance: Provenance
    charts: bool = True  # html only: one chart per planned pump ...
    max_charts: int = 200  # ... for the first this many planned pumps (plan order); the page says so
    notes: tuple[str, ...] = field(default_factory=tuple)
    economies: dict = field(default_factory=dict)  # model -> costing.ModelEconomy, when costs are set
    units: UnitPrefs = UnitPrefs()  # the units values are shown in (``logbook --units``)


def render(report: Report, fmt: str) -> bytes:
    """The report as bytes in format ``fmt`` (one of FORMATS)."""
    if fmt == "csv":
        from logbook.exports.csv_export import render_csv

        return render_csv(report)
    if fmt == "md":
        from logbook.exports.md import render_md

        return render_md(report).encode("utf-8")
    if fmt == "html":
        from logbook.exports.html import render_html

        return render_html(report).encode("utf-8")
    if fmt == "json":
        from logbook.exports.json_export import render_json

        return render_json(report).encode("utf-8")
    raise ValueError(f"format {fmt!r}: allowed are {', '.join(FORMATS)}")
