"""The engine's entry points: a whole fleet (or one pump, as a fleet of one) forecast in one batch.

Steps, each in its own module: ``timeline`` (fitments, meters, readings as columns and
their pump hours) -> ``utilisation`` (hours per day of each machine) -> ``segments``
(current wear segment of each pump and kind) -> ``normalize`` (readings at reference
conditions) -> ``series`` (the TrendBatch) -> ``fit`` (robust paths, steps, pooling)
-> ``forecast`` (P10/P50/P90 remaining hours) -> ``records`` (dates, worst kind,
``status``). The only loops over pumps build the result records.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from datetime import date

import numpy as np

from logbook.analysis.batch import TrendBatch
from logbook.analysis.fit import FitOptions, fit_batch
from logbook.analysis.forecast import forecast_batch
from logbook.analysis.records import RowFigures, kind_records, pump_records
from logbook.analysis.results import FleetForecast, PumpForecast
from logbook.analysis.series import FleetPack, pack
from logbook.analysis.status import StatusThresholds
from logbook.analysis.timeline import NEVER, Timeline
from logbook.analysis.utilisation import MachineUse, machine_states
from logbook.model import Fleet, PumpHistory, PumpModel

DEFAULT_HORIZON_HOURS = 20_000.0


@dataclass(slots=True)
class PackedFleet:
    """The pumps to forecast, their models, the fleet's timeline and the packed series."""

    serials: list[str]
    models: list[PumpModel]
    timeline: Timeline
    pack: FleetPack


def pack_fleet(fleet: Fleet, today: date) -> PackedFleet:
    """Pumps to forecast (fitted now, or unfitted with current readings; by serial) and their series."""
    timeline = Timeline.of(fleet)  # shared with the rounds and fleet life of the same snapshot
    fits, current = timeline.fits, timeline.latest
    known = set(np.unique(timeline.serial[current]).tolist()) | set(fits.serial[fits.removed == NEVER].tolist())
    serials = [s for s in sorted(fleet.pumps) if timeline.serial_index.get(s, -1) in known]
    models = [fleet.models[fleet.pumps[s].model] for s in serials]
    fitted = [fits.items[i].machine for i in fits.current(timeline.pump_codes(serials)) if i >= 0]
    uses = machine_states(timeline, fitted, today)
    per_day = {m: u.per_day for m, u in uses.items()}
    return PackedFleet(serials, models, timeline, pack(timeline, serials, models, per_day, today, use=current, uses=uses))


def fleet_batch(fleet: Fleet, today: date) -> TrendBatch | None:
    """The batch that ``forecast_fleet`` fits (for benchmarks); None for a fleet with nothing to forecast."""
    packed = pack_fleet(fleet, today)
    return packed.pack.batch if packed.serials else None


def forecast_fleet(
    fleet: Fleet,
    today: date,
    horizon_hours: float = DEFAULT_HORIZON_HOURS,
    *,
    options: FitOptions | None = None,
    thresholds: StatusThresholds | None = None,
    with_noise: bool = False,
    calibration: bool = True,
) -> FleetForecast:
    """Forecast every pump in service (and unfitted pumps with readings), worst kind and status per pump;
    ``calibration=False`` leaves the bands as the paths give them (no spread factors from later readings)."""
    packed = pack_fleet(fleet, today)
    sites = {unit: m.site for unit, m in fleet.machines.items()}
    pumps = _forecasts(packed.serials, packed.models, packed.pack, today, sites, horizon_hours, options, thresholds,
                       with_noise, calibration) if packed.serials else []  # fmt: skip
    notes: tuple[str, ...] = (f"horizon {horizon_hours:,.0f} operating hours; quantiles beyond it are left blank",
             "dates assume each machine keeps the hours a day its hour meter showed over the last year (days it "
             "stood still left out); the P10 and P90 dates widen by how unevenly it ran between meter readings "
             "(a machine parked since its last reading, with no parked event, moves every date later)")
    notes += _machine_notes(pumps)
    return FleetForecast(today=today, pumps=tuple(pumps), source=fleet.source, notes=notes)


def _machine_notes(pumps) -> tuple[str, ...]:
    """One note per machine whose hours do not run plainly (parked, by season), and one per pump with
    readings left out of its trend."""
    said = {p.machine: p.utilisation_basis for p in pumps if p.machine is not None and p.utilisation_basis}
    notes = tuple(f"{m} {words}" for m, words in sorted(said.items()))
    left = [(p.serial, k.kind.label, r) for p in pumps for k in p.kinds for r in k.not_used]
    return notes + tuple(f"{serial} {label} reading of {r} - not used in the trend" for serial, label, r in left)


def forecast_histories(
    histories: list[PumpHistory],
    today: date,
    utilisation: dict[str, float | None],
    *,
    horizon_hours: float = DEFAULT_HORIZON_HOURS,
    options: FitOptions | None = None,
    thresholds: StatusThresholds | None = None,
    with_noise: bool = False,
    uses: dict[str, MachineUse] | None = None,
) -> list[PumpForecast]:
    """Forecast the given pumps together (pooling within each pump model and kind); ``uses``: how the
    machines' hours run ahead (``utilisation.machine_states``: parked, by season), when known."""
    if not histories:
        return []
    timeline = _timeline_of(histories)
    serials, models = [h.pump.serial for h in histories], [h.model for h in histories]
    pk = pack(timeline, serials, models, utilisation, today, uses=uses)
    return _forecasts(serials, models, pk, today, {}, horizon_hours, options, thresholds, with_noise)


def _timeline_of(histories: list[PumpHistory]) -> Timeline:
    """The timeline of some pumps' records (each event once, though several pumps share meter events)."""
    events = list({id(e): e for h in histories for e in h.events}.values())
    return Timeline([f for h in histories for f in h.fitments], [r for h in histories for r in h.readings], events)


def _forecasts(serials, models, pk: FleetPack, today, sites, horizon_hours, options, thresholds, with_noise,
               calibration=True):
    """Fit and forecast the packed batch, then the result records."""
    fit = fit_batch(pk.batch, options)
    fc = forecast_batch(pk.batch, fit, horizon_hours=horizon_hours, with_noise=with_noise, calibration=calibration)
    rows = RowFigures.of(pk, fit, fc)
    kinds = kind_records(serials, pk, fit, fc, rows, today)
    return pump_records(serials, models, pk, fit, rows, kinds, today, sites, thresholds)


def forecast_pump(
    history: PumpHistory,
    today: date,
    horizon_hours: float = DEFAULT_HORIZON_HOURS,
    *,
    hours_per_day_now: float | None = None,
    options: FitOptions | None = None,
    thresholds: StatusThresholds | None = None,
) -> PumpForecast:
    """One pump on its own (no fleet pooling): the fleet engine on a fleet of one."""
    current = next((f for f in history.fitments if f.removed_on is None), None)
    per_day = hours_per_day_now
    uses = None
    if per_day is None and current is not None:
        uses = machine_states(_timeline_of([history]), [current.machine], today)
        per_day = uses[current.machine].per_day
    util = {current.machine: per_day} if current is not None else {}
    opt = options or FitOptions(pool=False)
    (pf,) = forecast_histories([history], today, util, horizon_hours=horizon_hours, options=opt, thresholds=thresholds,
                               uses=uses)
    return pf


def forecast_in_fleet(fleet: Fleet, serial: str, today: date, **kwargs) -> PumpForecast:
    """One pump forecast exactly as the fleet view shows it: pooled with the other pumps
    of its model (pooling never crosses models, so only they are fitted)."""
    model = fleet.pumps[serial].model
    subset = replace(fleet, pumps={s: p for s, p in fleet.pumps.items() if p.model == model or s == serial})
    forecast = forecast_fleet(subset, today, **kwargs)
    found = forecast.pump(serial)
    if found is None:  # on the shelf with no readings: forecast on its own
        return forecast_pump(fleet.history(serial), today)
    return found


__all__ = [
    "DEFAULT_HORIZON_HOURS", "PackedFleet", "fleet_batch", "forecast_fleet", "forecast_histories", "forecast_in_fleet",
    "forecast_pump", "pack_fleet",
]
