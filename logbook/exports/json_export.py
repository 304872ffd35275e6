"""JSON export: provenance, plan settings and lines, fleet life, and one record per pump and reading.

Schema ``logbook.forecast``, ``schema_version`` as the listings (docs/json.md,
docs/logbook.schema.json); a status is a code with words and symbol.

Keys keep a fixed order; floats are rounded (values 4 decimals, hours 1) and
non-finite numbers become null, so the same report always gives the same text.
"""

from __future__ import annotations

import json

from logbook.analysis.results import KindForecast, PumpForecast
from logbook.exports import PROBABILITY_NOTE, in_units, unit_of
from logbook.exports.common import METRIC, plan_lines, reason, retest_reason
from logbook.exports.listings import SCHEMA_VERSION, status_json, units_json
from logbook.exports.listings import _d, _f  # one rounding rule for every JSON document

from logbook.plan import PlanLine, month_label
from logbook.units import UnitPrefs

#: The logbook's own units (``--units metric``); each line and record also names its ``unit``.
CANONICAL_UNITS = units_json(METRIC)


def _line(line: PlanLine, units: UnitPrefs = METRIC) -> dict:
    return {
        "serial": line.serial,
        "model": line.model,
        "machine": line.machine,
        "site": line.site,
        "month": month_label(line.month) if line.month else None,
        "latest_month": month_label(line.target_month),
        "work": ("shop" if line.shop else "on machine") if line.month else "does not fit",
        "kind": line.kind.value,
        "unit": unit_of(line.kind, units),
        "outcome": line.outcome.value,
        "latest_value": _f(in_units(line.latest_value, line.kind, units)),
        "limit": _f(in_units(line.limit_value, line.kind, units)),
        "p10_hours": _f(line.p10_hours, 1),
        "p50_hours": _f(line.p50_hours, 1),
        "p90_hours": _f(line.p90_hours, 1),
        "p10_date": _d(line.p10_date),
        "p50_date": _d(line.p50_date),
        "p90_date": _d(line.p90_date),
        "chance_by_month_start": _f(line.chance_by_month_start),
        "chance_by_month_end": _f(line.chance_by_month_end),
        "months_early": line.months_early,
        "expected_cost": _f(line.expected_cost, 2),
        "expected_cost_month_earlier": _f(line.cost_month_earlier, 2),
        "expected_cost_month_later": _f(line.cost_month_later, 2),
        "also_due": [k.value for k in line.also_due],
        "action": line.action,
        "reason": reason(line, units),
        "note": line.note,
    }


def _kind(pf: PumpForecast, kf: KindForecast, planned: PlanLine | None, units: UnitPrefs = METRIC) -> dict:
    def shown(value):
        return in_units(value, kf.kind, units)

    return {
        "serial": pf.serial,
        "model": pf.model,
        "machine": pf.machine,
        "position": pf.position,
        "site": pf.site,
        "kind": kf.kind.value,
        "unit": unit_of(kf.kind, units),
        "limit": _f(shown(kf.limit.value)) if kf.limit else None,
        "limit_direction": kf.limit.direction if kf.limit else None,
        "latest_value": _f(shown(kf.latest_value)),
        "latest_raw": _f(shown(kf.latest_raw)),
        "latest_on": _d(kf.latest_on),
        "percent_of_limit": _f(kf.percent_of_limit, 1),
        "percent_of_theoretical_flow": _f(kf.percent_of_theoretical, 2),
        "n_readings": kf.n_readings,
        "segment_start": _d(kf.segment_start),
        "hours_in_segment": _f(kf.hours_in_segment, 1),
        "path": kf.path,
        "path_share": _f(kf.path_share, 3),
        "band_checked_on_readings": kf.calibrated_on,
        "outcome": kf.outcome.value,
        "p10_hours": _f(kf.p10_hours, 1),
        "p50_hours": _f(kf.p50_hours, 1),
        "p90_hours": _f(kf.p90_hours, 1),
        "p10_date": _d(kf.p10_date),
        "p50_date": _d(kf.p50_date),
        "p90_date": _d(kf.p90_date),
        "rate_per_1000h": _f(shown(kf.rate_per_1000h)),
        "status": status_json(pf.status),
        "flags": sorted(kf.flags),
        "planned_month": month_label(planned.month) if planned and planned.month else None,
        "plan": (("shop" if planned.shop else "on machine") if planned.month else "does not fit") if planned else None,
        "drives_plan": bool(planned and planned.kind is kf.kind),
    }


def _life(fig) -> dict:
    return {
        "model": fig.model,
        "intervals": fig.intervals,
        "overhauls": fig.failures,
        "running": fig.censored,
        "shape": _f(fig.fit.shape) if fig.fit else None,
        "scale_hours": _f(fig.fit.scale_hours, 1) if fig.fit else None,
        "loglik": _f(fig.fit.loglik) if fig.fit else None,
        "confidence": fig.confidence,
        "b10_hours": _f(fig.b10_hours, 1),
        "b10_bounds_hours": [_f(v, 1) for v in fig.b10_bounds] if fig.b10_bounds else None,
        "median_hours": _f(fig.median_hours, 1),
        "median_bounds_hours": [_f(v, 1) for v in fig.median_bounds] if fig.median_bounds else None,
        "running_in_horizon": fig.running,
        "horizon_hours": _f(fig.horizon_hours, 1),
        "expected_overhauls": _f(fig.expected_overhauls, 3),
        "expected_sd": _f(fig.expected_sd, 3),
        "note": fig.reason,
        "method": fig.method,
    }


def _economy(eco) -> dict:
    opt = eco.optimum
    return {
        "model": eco.model,
        "planned_cost": _f(eco.planned, 2),
        "failure_cost": _f(eco.failure, 2),
        "weibull_shape": _f(eco.shape, 6),
        "weibull_scale_hours": _f(eco.scale_hours, 3),
        "optimal_age_hours": _f(opt.age_hours, 1) if opt else None,
        "cost_per_hour_at_optimal_age": _f(opt.cost_per_hour, 6) if opt else None,
        "run_to_failure_cost_per_hour": _f(opt.run_to_failure_cost_per_hour, 6) if opt else None,
        "method": "age replacement, C(T) = [Cp R(T) + Cf F(T)] / integral_0^T R (Barlow and Proschan 1965); "
                  "job costs without downtime",
        "note": eco.note,
    }


def _costs(report) -> dict:
    plan = report.plan
    out = {"currency": plan.currency or None, "placement": plan.placement, "placement_note": plan.placement_note,
           "models": [_economy(e) for e in report.economies.values()]}
    if plan.costs is not None:
        labels = {i: month_label(m) for i, m in enumerate(plan.settings.months)}
        out["policies"] = {k: _f(v, 2) for k, v in plan.costs.policies.items()}
        out["spend_per_month"] = {month_label(m): _f(v, 2) for m, v in sorted(plan.spend_per_month().items())}
        out["sensitivity"] = [{"serial": s, "ratio_factor": f, "month": labels.get(b) if b is not None else None,
                               "moves_to": labels.get(m) if m is not None else None}
                              for s, f, b, m in plan.costs.sensitivity]
    return out


def report_dict(report) -> dict:
    plan = report.plan
    s = plan.settings
    by_serial = {line.serial: line for line in plan_lines(report)}
    return {
        "schema": "logbook.forecast",
        "schema_version": SCHEMA_VERSION,
        "today": report.forecast.today.isoformat(),
        "units": units_json(report.units),
        "provenance": report.provenance.as_dict(report.units),
        "forecast_date": report.forecast.today.isoformat(),
        "notes": list(report.forecast.notes) + list(report.notes),
        "plan": {
            "start_month": month_label(s.start_month),
            "horizon_months": s.horizon_months,
            "capacity_per_month": s.capacity_per_month,
            "site_capacity": dict(sorted(s.site_capacity.items())),
            "exchange_on_hand": dict(sorted(s.exchange_on_hand.items())),
            "turnaround_months": s.turnaround_months,
            "on_machine_kinds": [k.value for k in s.on_machine_kinds],
            "probability_model": PROBABILITY_NOTE,
            "shop_load": {month_label(m): n for m, n in sorted(plan.shop_load.items())},
            "lines": [_line(line, report.units) for line in plan.lines],
            "does_not_fit": [_line(line, report.units) for line in plan.unplaced],
            "test_again_first": [{"serial": r.serial, "model": r.model, "site": r.site, "machine": r.machine,
                                  "kind": r.kind.value, "unit": unit_of(r.kind, report.units),
                                  "set_aside_value": _f(in_units(r.reading, r.kind, report.units)),
                                  "taken_on": _d(r.taken_on), "trend_outcome": r.trend_outcome.value,
                                  "why": retest_reason(r, report.units)} for r in plan.retests],
        },
        "life": [_life(fig) for fig in report.life],
        "costs": _costs(report),
        "forecasts": [_kind(pf, kf, by_serial.get(pf.serial), report.units) for pf in report.forecast.pumps
                      for kf in pf.kinds],
    }


def render_json(report) -> str:
    return json.dumps(report_dict(report), indent=1, ensure_ascii=False, allow_nan=False) + "\n"
