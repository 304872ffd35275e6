"""Readings brought to the pump model's reference conditions, so that they can be trended.

Case drain is leakage through thin clearances, which is laminar (Q ~ c^3 dp / mu), so
it scales with the test pressure and inversely with the oil's viscosity:
Q_ref = Q_meas * (dp_ref / dp_meas) * (nu_meas / nu_ref). Kinematic viscosity stands
in for dynamic viscosity: the oil's density changes by only a few percent over the
test window, which we ignore.

Servo pressure is not corrected: it is set by the charge relief valve, not by a
leakage path, and no general law links it to oil temperature or system pressure;
take it inside the model's test temperature window and trend it as measured.
Neutral drift (signed A-B pressure at neutral) is not corrected either: it reflects
the adjustment of the control, not a clearance; we trend its magnitude |A-B|.
A reading without oil temperature or test pressure is taken as at the reference
condition (no correction for that factor).
"""

from __future__ import annotations

import math

import numpy as np

from logbook.model import Kind, PumpModel, Reading
from logbook.oil import viscosity_cst


def theoretical_flow_lpm(displacement_cc: float, speed_rpm: float) -> float:
    """Theoretical flow, L/min = cm^3/rev * rpm / 1000."""
    return displacement_cc * speed_rpm / 1000.0


def reference_viscosity_cst(model: PumpModel) -> float:
    """Kinematic viscosity of the model's reference oil at its reference temperature."""
    return float(viscosity_cst(model.ref_temp_c, model.oil_grade, model.oil_vi))


def case_drain_at_reference(
    case_drain_lpm,
    test_pressure_bar,
    oil_temp_c,
    model: PumpModel,
    oil_grade: int | None = None,
    oil_vi: float | None = None,
):
    """Case drain scaled to the model's reference pressure and oil viscosity (scalars or arrays; NaN = reference)."""
    q = np.asarray(case_drain_lpm, dtype=float)
    dp = np.asarray(test_pressure_bar, dtype=float)
    temp = np.asarray(oil_temp_c, dtype=float)
    dp = np.where(np.isfinite(dp), dp, model.ref_pressure_bar)
    if np.any(dp <= 0):
        raise ValueError(f"test_pressure_bar = {test_pressure_bar!r}: must be above 0 bar")
    temp = np.where(np.isfinite(temp), temp, model.ref_temp_c)
    grade = model.oil_grade if oil_grade is None else oil_grade
    vi = model.oil_vi if oil_vi is None else oil_vi
    nu_meas = viscosity_cst(temp, grade, vi)
    out = q * (model.ref_pressure_bar / dp) * (nu_meas / reference_viscosity_cst(model))
    return float(out) if np.ndim(out) == 0 else out


def normalized_value(reading: Reading, kind: Kind, model: PumpModel) -> float | None:
    """The trended value of one reading: case drain at reference, servo pressure as read, |neutral drift|."""
    raw = reading.value(kind)
    if raw is None:
        return None
    if kind is Kind.CASE_DRAIN:
        return case_drain_at_reference(
            raw,
            np.nan if reading.test_pressure_bar is None else reading.test_pressure_bar,
            np.nan if reading.oil_temp_c is None else reading.oil_temp_c,
            model,
            reading.oil_grade,
            reading.oil_vi,
        )
    if kind is Kind.NEUTRAL_DRIFT:
        return abs(raw)
    return float(raw)


def case_drain_percent(case_drain_lpm: float, model: PumpModel, speed_rpm: float | None = None) -> float:
    """Case drain as a percentage of theoretical flow at the test speed (model's test speed by default)."""
    q_th = theoretical_flow_lpm(model.displacement_cc, model.test_speed_rpm if speed_rpm is None else speed_rpm)
    return 100.0 * case_drain_lpm / q_th


def annulus_leakage_lpm(
    diameter_m: float, clearance_m: float, length_m: float, dp_bar: float, viscosity_pa_s: float,
    eccentricity: float = 0.0,
) -> float:  # fmt: skip
    """Laminar leakage through a thin annular gap, L/min: pi D c^3 dp / (12 mu L) * (1 + 1.5 eps^2).

    Hagen-Poiseuille flow in a concentric annulus (Rabie, Fluid Power Engineering, 2009,
    eq. 2.19); the eccentricity factor is from Manring, Hydraulic Control Systems, 2005.
    """
    if not 0.0 <= eccentricity <= 1.0:
        raise ValueError(f"eccentricity = {eccentricity!r}: allowed 0 to 1 (e/c)")
    q_m3s = math.pi * diameter_m * clearance_m**3 * dp_bar * 1e5 / (12.0 * viscosity_pa_s * length_m)
    return q_m3s * (1.0 + 1.5 * eccentricity**2) * 60_000.0


def annulus_leakage_exact_lpm(
    outer_radius_m: float, inner_radius_m: float, length_m: float, dp_bar: float, viscosity_pa_s: float
) -> float:
    """Laminar flow through a concentric annulus without the thin-gap approximation, L/min."""
    ro, ri = outer_radius_m, inner_radius_m
    core = ro**4 - ri**4 - (ro**2 - ri**2) ** 2 / math.log(ro / ri)
    return math.pi * dp_bar * 1e5 / (8.0 * viscosity_pa_s * length_m) * core * 60_000.0
