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

The oil's viscosity at the test temperature comes from ASTM D341 (Walther) through the
reading's measured viscosity at 40 C (and 100 C) when it has one, else through its ISO VG
grade's midpoint and viscosity index (``logbook.oil.oil_constants``).

The correction is trusted only within a range (docs/conditions.md): the viscosity factor
nu_meas / nu_ref within 1/3 to 3 and the pressure factor dp_ref / dp_meas within 1/2 to 2
(common practice, no published source: beyond them the clearances and the oil's
temperature in the gaps differ too much from the reference test for the laminar scaling
to carry the value over), and the oil at the test temperature no thinner than
``oil.WALTHER_MIN_CST`` (ASTM D341's plain form). A case drain reading outside that range is
kept as recorded but not trended (``untrusted``, ``untrusted_reason``).
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from logbook.model import Kind, PumpModel, Reading
from logbook.oil import WALTHER_MIN_CST, oil_constants, viscosity_cst, walther_viscosity
from logbook.units import theoretical_flow_lpm

__all__ = [
    "TRUSTED_PRESSURE_FACTOR", "TRUSTED_VISCOSITY_FACTOR", "annulus_leakage_exact_lpm", "annulus_leakage_lpm",
    "at_reference", "case_drain_at_reference", "case_drain_percent", "normalized_value", "reference_viscosity_cst",
    "theoretical_flow_lpm", "trended_values", "untrusted", "untrusted_reason",
]

#: The laminar correction is trusted for nu_meas / nu_ref within 1/F to F and dp_ref / dp_meas
#: within 1/G to G (module docstring; common practice, no published source).
TRUSTED_VISCOSITY_FACTOR = 3.0
TRUSTED_PRESSURE_FACTOR = 2.0

#: Why a reading is not trended (``untrusted``'s codes, 0 = trusted).
TRUSTED, THIN_OIL, VISCOSITY_FACTOR, PRESSURE_FACTOR = 0, 1, 2, 3


def untrusted(nu, dp, ref_nu, ref_dp) -> np.ndarray:
    """Per reading: 0 where the correction is trusted, else the code of the first reason it is not
    (oil thinner than ASTM D341's plain form, viscosity factor, pressure factor)."""
    nu, dp = np.asarray(nu, dtype=float), np.asarray(dp, dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        v, p = nu / ref_nu, ref_dp / dp
        out = np.where(nu < WALTHER_MIN_CST, THIN_OIL,
                       np.where((v > TRUSTED_VISCOSITY_FACTOR) | (v < 1.0 / TRUSTED_VISCOSITY_FACTOR), VISCOSITY_FACTOR,
                                np.where((p > TRUSTED_PRESSURE_FACTOR) | (p < 1.0 / TRUSTED_PRESSURE_FACTOR),
                                         PRESSURE_FACTOR, TRUSTED)))  # fmt: skip
    return out.astype(np.int8)


def _reason(code: int, nu: float, dp: float, ref_nu: float, ref_dp: float, model: PumpModel) -> str | None:
    if code == THIN_OIL:
        return (f"the oil was {nu:.2f} cSt at its test temperature, thinner than the {WALTHER_MIN_CST:g} cSt ASTM D341's "
                "viscosity equation holds to")
    if code == VISCOSITY_FACTOR:
        return (f"the oil was {nu:.1f} cSt at its test temperature against {ref_nu:.1f} cSt at the reference "
                f"{model.ref_temp_c:g} C (factor {nu / ref_nu:.2f}; normalization is trusted from "
                f"{1 / TRUSTED_VISCOSITY_FACTOR:.2f} to {TRUSTED_VISCOSITY_FACTOR:g})")
    if code == PRESSURE_FACTOR:
        return (f"the test pressure {dp:g} bar is far from the reference {ref_dp:g} bar (factor {ref_dp / dp:.2f}; "
                f"normalization is trusted from {1 / TRUSTED_PRESSURE_FACTOR:g} to {TRUSTED_PRESSURE_FACTOR:g})")
    return None


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
    nu40_cst: float | None = None,
    nu100_cst: float | None = None,
):
    """Case drain scaled to the model's reference pressure and oil viscosity (scalars or arrays; NaN = reference).
    ``nu40_cst`` (and ``nu100_cst``): the oil's measured viscosity, used instead of its grade's midpoint."""
    q = np.asarray(case_drain_lpm, dtype=float)
    dp, temp = _conditions_of(test_pressure_bar, oil_temp_c, model)
    out = at_reference(q, dp, _viscosity(temp, model, oil_grade, oil_vi, nu40_cst, nu100_cst), model.ref_pressure_bar,
                       reference_viscosity_cst(model))  # fmt: skip
    return float(out) if np.ndim(out) == 0 else out


def _conditions_of(test_pressure_bar, oil_temp_c, model: PumpModel) -> tuple[np.ndarray, np.ndarray]:
    dp = np.asarray(test_pressure_bar, dtype=float)
    temp = np.asarray(oil_temp_c, dtype=float)
    dp = np.where(np.isfinite(dp), dp, model.ref_pressure_bar)
    if np.any(dp <= 0):
        raise ValueError(f"test_pressure_bar = {test_pressure_bar!r}: must be above 0 bar")
    return dp, np.where(np.isfinite(temp), temp, model.ref_temp_c)


def _viscosity(temp, model: PumpModel, oil_grade, oil_vi, nu40_cst, nu100_cst):
    grade = model.oil_grade if oil_grade is None else oil_grade
    vi = model.oil_vi if oil_vi is None else oil_vi
    if nu40_cst is None:
        return viscosity_cst(temp, grade, vi)
    return walther_viscosity(temp, *oil_constants(grade, vi, nu40_cst, nu100_cst))


def untrusted_reason(reading: Reading, model: PumpModel) -> str | None:
    """Why ``reading``'s case drain is not trended (module docstring), or None when it is (or has none)."""
    if reading.case_drain_lpm is None:
        return None
    dp, temp = _conditions_of(np.nan if reading.test_pressure_bar is None else reading.test_pressure_bar,
                              np.nan if reading.oil_temp_c is None else reading.oil_temp_c, model)  # fmt: skip
    nu = float(_viscosity(temp, model, reading.oil_grade, reading.oil_vi, _measured(reading, "nu40_cst"),
                          _measured(reading, "nu100_cst")))  # fmt: skip
    ref_nu, ref_dp = reference_viscosity_cst(model), model.ref_pressure_bar
    code = int(untrusted(nu, float(dp), ref_nu, ref_dp))
    return _reason(code, nu, float(dp), ref_nu, ref_dp, model)


def _measured(reading: Reading, name: str) -> float | None:
    return getattr(reading, name, None)


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
            _measured(reading, "nu40_cst"),
            _measured(reading, "nu100_cst"),
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
    conditions filled in where a reading gives none (NaN temperature or pressure, None oil).
    ``nu40``/``nu100``: measured viscosity of each reading's oil (NaN for none)."""

    def __init__(self, dp, temp, grade, vi, models: Sequence[PumpModel], model_of: np.ndarray, refuse,
                 nu40=None, nu100=None):  # fmt: skip
        """``model_of``: index into ``models`` of each reading; ``refuse(i)`` raises the one-reading
        error of reading ``i`` (called for the first reading that cannot be normalized)."""
        self.models, self.model_of, self.refuse = models, model_of, refuse
        self.dp = self._filled(dp, "ref_pressure_bar", np.isfinite)
        self.temp = self._filled(temp, "ref_temp_c", np.isfinite)
        self.grade = self._filled(grade, "oil_grade", lambda v: ~np.isnan(v))
        self.vi = self._filled(vi, "oil_vi", lambda v: ~np.isnan(v))
        n = len(self.dp)
        self.nu40 = np.full(n, np.nan) if nu40 is None else np.asarray(nu40, dtype=float)
        self.nu100 = np.full(n, np.nan) if nu100 is None else np.asarray(nu100, dtype=float)
        self.trust: np.ndarray = np.zeros(n, dtype=np.int8)  # ``untrusted`` codes, set by case_drain_at_reference
        self.nu: np.ndarray = np.full(n, np.nan)

    def _filled(self, got: np.ndarray, model_field: str, keep) -> np.ndarray:
        own = np.array([getattr(m, model_field) for m in self.models], dtype=float)[self.model_of]
        return np.where(keep(got), got, own)

    def case_drain_at_reference(self, raw: np.ndarray) -> np.ndarray:
        bad = self.dp <= 0
        nu = np.full(len(raw), np.nan)
        measured = np.isfinite(self.nu40)
        plain = np.flatnonzero(~measured)
        for group in _oil_groups(self.grade[plain], self.vi[plain]):
            mine = plain[group]
            try:
                a, b = oil_constants(int(self.grade[mine[0]]), float(self.vi[mine[0]]))
            except (TypeError, ValueError):
                bad[mine] = True
                continue
            nu[mine] = walther_viscosity(self.temp[mine], a, b)
        for i in np.flatnonzero(measured).tolist():  # measured oils: few, one at a time
            try:
                a, b = oil_constants(int(self.grade[i]), float(self.vi[i]), float(self.nu40[i]), float(self.nu100[i]))
            except (TypeError, ValueError):
                bad[i] = True
                continue
            nu[i] = walther_viscosity(self.temp[i], a, b)
        ref_nu = np.full(len(self.models), np.nan)
        for c, m in enumerate(self.models):
            try:
                ref_nu[c] = reference_viscosity_cst(m)
            except (TypeError, ValueError):
                bad |= self.model_of == c
        if bad.any():  # refuse as the one-reading code does, naming the field and the value
            self.refuse(int(np.flatnonzero(bad)[0]))
        ref_dp = np.array([m.ref_pressure_bar for m in self.models], dtype=float)[self.model_of]
        self.nu = nu
        self.trust = untrusted(nu, self.dp, ref_nu[self.model_of], ref_dp)
        return at_reference(raw, self.dp, nu, ref_dp, ref_nu[self.model_of])

    def reason(self, i: int) -> str | None:
        """Words for why reading ``i`` is not trended (after ``case_drain_at_reference``), None when it is."""
        m = self.models[int(self.model_of[i])]
        return _reason(int(self.trust[i]), float(self.nu[i]), float(self.dp[i]), reference_viscosity_cst(m),
                       m.ref_pressure_bar, m)  # fmt: skip


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
