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
from collections.abc import Sequence

import numpy as np

from logbook.model import Kind, PumpModel, Reading
from logbook.oil import oil_walther, viscosity_cst, walther_viscosity
from logbook.units import theoretical_flow_lpm

__all__ = [
    "annulus_leakage_exact_lpm", "annulus_leakage_lpm", "at_reference", "case_drain_at_reference",
    "case_drain_percent", "normalized_value", "reference_viscosity_cst", "theoretical_flow_lpm", "trended_values",
]


def at_reference(q, dp, nu, ref_dp, ref_nu):
    """Q_ref = Q_meas * (dp_ref / dp_meas) * (nu_meas / nu_ref): the one formula, on scalars or arrays."""
    return q * (ref_dp / dp) * (nu / ref_nu)


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
    out = at_reference(q, dp, viscosity_cst(temp, grade, vi), model.ref_pressure_bar, reference_viscosity_cst(model))
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


def trended_values(kind: Kind, raw: np.ndarray, conditions: "ReadingConditions | None") -> np.ndarray:
    """``normalized_value`` of many readings of one kind at once (``conditions`` of the same readings,
    needed for case drain only)."""
    if kind is Kind.NEUTRAL_DRIFT:
        return np.abs(raw)
    if kind is Kind.SERVO_PRESSURE or not len(raw):
        return raw
    assert conditions is not None, "case drain readings are normalized with their conditions"
    return conditions.case_drain_at_reference(raw)


class ReadingConditions:
    """Test pressure, oil temperature and oil of many case drain readings, the model's reference
    conditions filled in where a reading gives none (NaN temperature or pressure, None oil)."""

    def __init__(self, dp, temp, grade, vi, models: Sequence[PumpModel], model_of: np.ndarray, refuse):
        """``model_of``: index into ``models`` of each reading; ``refuse(i)`` raises the one-reading
        error of reading ``i`` (called for the first reading that cannot be normalized)."""
        self.models, self.model_of, self.refuse = models, model_of, refuse
        self.dp = self._filled(dp, "ref_pressure_bar", np.isfinite)
        self.temp = self._filled(temp, "ref_temp_c", np.isfinite)
        self.grade = self._filled(grade, "oil_grade", lambda v: ~np.isnan(v))
        self.vi = self._filled(vi, "oil_vi", lambda v: ~np.isnan(v))

    def _filled(self, got: np.ndarray, model_field: str, keep) -> np.ndarray:
        own = np.array([getattr(m, model_field) for m in self.models], dtype=float)[self.model_of]
        return np.where(keep(got), got, own)

    def case_drain_at_reference(self, raw: np.ndarray) -> np.ndarray:
        bad = self.dp <= 0
        nu = np.full(len(raw), np.nan)
        for mine in _oil_groups(self.grade, self.vi):
            try:
                a, b = oil_walther(int(self.grade[mine[0]]), float(self.vi[mine[0]]))
            except (TypeError, ValueError):
                bad[mine] = True
                continue
            nu[mine] = walther_viscosity(self.temp[mine], a, b)
        ref_nu = np.full(len(self.models), np.nan)
        for c, m in enumerate(self.models):
            try:
                ref_nu[c] = reference_viscosity_cst(m)
            except (TypeError, ValueError):
                bad |= self.model_of == c
        if bad.any():  # refuse as the one-reading code does, naming the field and the value
            self.refuse(int(np.flatnonzero(bad)[0]))
        ref_dp = np.array([m.ref_pressure_bar for m in self.models], dtype=float)[self.model_of]
        return at_reference(raw, self.dp, nu, ref_dp, ref_nu[self.model_of])


def _oil_groups(grade: np.ndarray, vi: np.ndarray) -> list[np.ndarray]:
    """Indices of the readings of each oil (grade, viscosity index); a NaN grade or index is an oil of its own."""
    todo = np.ones(len(grade), dtype=bool)
    groups: list[np.ndarray] = []
    while todo.any() and len(groups) < 16:  # peel one oil at a time: a fleet uses a handful
        i = int(np.argmax(todo))
        mine = todo & (grade == grade[i]) & (vi == vi[i])
        mine[i] = True
        todo &= ~mine
        groups.append(np.flatnonzero(mine))
    if todo.any():  # many oils: group the rest by sorting
        rest = np.flatnonzero(todo)
        _, inverse = np.unique(np.stack([grade[rest], vi[rest]], axis=1), axis=0, return_inverse=True)
        inverse = inverse.reshape(-1)
        order = np.argsort(inverse, kind="stable")
        groups += np.split(rest[order], np.flatnonzero(np.diff(inverse[order])) + 1)
    return groups


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
