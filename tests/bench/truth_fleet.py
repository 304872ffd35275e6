"""Fleets of invented pumps whose true condition is known, for measuring the forecast from outside.

Written apart from the engine and from ``demo_fleet``: its own wear paths, its own oil
viscosity (ASTM D341, below), its own calendar of machine hours. Pure numpy and the
standard library; the same seed gives the same fleet. ``make_truth_fleet`` returns the
``logbook.model.Fleet`` the store would hand to the analysis (readings before the cut
date only) and a truth table: per pump and reading kind, the hours in the wear segment
and the calendar date at which the noise-free condition, at the pump model's reference
conditions, crosses the model's limit.

True condition paths (h = operating hours since the pump was fitted new):
  linear         y0 + b h
  power3         y0 (1 + h/tau)^3: laminar leakage through a clearance grows with the cube
                 of the gap (Hagen-Poiseuille annulus, Q = pi D c^3 dp / (12 mu L)), so a
                 clearance opening at a steady rate gives this convex power law
  paris          y0 (1 - h/hc)^(-p), p = 2/(m - 2): the closed form of Paris-law crack growth
                 da/dN = C (dK)^m with dK ~ sqrt(a) (Paris and Erdogan, J. Basic Eng. 85, 1963;
                 the degradation path of Lu and Meeker, Technometrics 35, 1993); it runs away
                 at hc, faster than any exponential
  exponential    y0 exp(h/tau)
  servo_falling  s0 - b h (servo pressure, falling to its lower limit)
  drift_growing  d0 + b h (|neutral drift|; readings are signed, noise additive)
  stable         constant (a kind that does not wear within the horizon: never crosses)

Measurement: case drain is read at the reading's oil temperature and test pressure, so the
measured flow is the reference value times (dp / dp_ref) * (nu_ref / nu_meas), laminar
leakage being proportional to dp / mu; times lognormal noise exp(sigma * e). Servo pressure
carries the same multiplicative noise; neutral drift additive noise of sd sigma * limit.
Failure modes mixed in: a unit mix-up (a case drain x 3.785, a gallon entered as a litre;
a servo pressure / 14.5, a bar value entered as psi), a broken part (a step of +40 %, or of
8 sigma on the log scale), sparse series (2-4 readings), machines that stand parked for
months (now, or earlier in the history) and machines that run only in season.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from datetime import date

import numpy as np

from logbook.model import ALL_KINDS, Fitment, Fleet, Kind, Limit, Machine, Pump, PumpModel, Reading

KELVIN_OFFSET = 273.15  # ASTM D341 works in kelvin
GALLON_L = 3.785411784  # US gallon in litres (NIST SP 811); a flow typed in the wrong unit
PSI_PER_BAR = 14.503773773  # (NIST SP 811); a pressure typed in the wrong unit

WEARING_PATHS = ("linear", "power3", "paris", "exponential")  # case drain
PATHS = WEARING_PATHS + ("servo_falling", "drift_growing", "stable")
USAGES = ("steady", "parked_now", "parked_before", "seasonal")
SEASON_MONTHS = (4, 5, 6, 7, 8, 9, 10)  # a seasonal machine runs April to October

#: Oils: (ISO VG, viscosity index) -> kinematic viscosity at 100 C, cSt. The 40 C value is
#: the grade's midpoint (ISO 3448); the 100 C value is the one ASTM D2270 turns into the
#: stated index (solved once, checked against chemicals.viscosity.viscosity_index in
#: tests/unit/test_truth_fleet.py).
OILS: dict[tuple[int, float], float] = {
    (46, 100.0): 6.760,
    (32, 100.0): 5.362,
    (68, 100.0): 8.731,
    (46, 140.0): 7.825,
    (68, 95.0): 8.530,
}
REFERENCE_OIL = (46, 100.0)
OTHER_OILS = ((32, 100.0), (68, 100.0), (46, 140.0), (68, 95.0))


# --- oil: ASTM D341 (Walther), written here so the generator does not lean on logbook.oil ---


def walther_constants(t1_c: float, nu1_cst: float, t2_c: float, nu2_cst: float) -> tuple[float, float]:
    """(A, B) of log10(log10(nu + 0.7)) = A - B log10(T), T in kelvin, through two points (ASTM D341)."""
    z1 = math.log10(math.log10(nu1_cst + 0.7))
    z2 = math.log10(math.log10(nu2_cst + 0.7))
    l1 = math.log10(t1_c + KELVIN_OFFSET)
    l2 = math.log10(t2_c + KELVIN_OFFSET)
    b = (z1 - z2) / (l2 - l1)
    return z1 + b * l1, b


def walther_cst(temp_c, a: float, b: float):
    """Kinematic viscosity (cSt) at ``temp_c`` (scalar or array) from Walther constants."""
    z = a - b * np.log10(np.asarray(temp_c, dtype=float) + KELVIN_OFFSET)
    return 10.0 ** (10.0**z) - 0.7


def oil_cst(temp_c, grade: int, vi: float):
    """Kinematic viscosity (cSt) of one of ``OILS`` at ``temp_c``."""
    return walther_cst(temp_c, *walther_constants(40.0, float(grade), 100.0, OILS[(grade, float(vi))]))


# --- true condition paths ---


def condition(path: str, params: tuple[float, ...], h, step_hours: float = math.inf, step_factor: float = 1.0):
    """The noise-free condition at reference conditions after ``h`` operating hours (array or scalar)."""
    h = np.asarray(h, dtype=float)
    if path in ("linear", "servo_falling", "drift_growing"):
        y0, slope = params
        y = y0 + slope * h
    elif path == "power3":
        y0, tau = params
        y = y0 * (1.0 + h / tau) ** 3
    elif path == "paris":
        y0, hc, p = params
        with np.errstate(invalid="ignore", divide="ignore"):
            y = np.where(h < hc, y0 * np.abs(1.0 - h / hc) ** (-p), np.inf)
    elif path == "exponential":
        y0, tau = params
        y = y0 * np.exp(h / tau)
    elif path == "stable":
        y = np.full(h.shape, params[0])
    else:
        raise ValueError(f"path = {path!r}: allowed {', '.join(PATHS)}")
    return np.where(h >= step_hours, y * step_factor, y)


def path_to(path: str, y0: float, level: float, hours: float, rng: np.random.Generator) -> tuple[float, ...]:
    """Parameters of ``path`` that start at ``y0`` and reach ``level`` at ``hours``."""
    ratio = level / y0
    if path in ("linear", "servo_falling", "drift_growing"):
        return (y0, (level - y0) / hours)
    if path == "power3":
        return (y0, hours / (ratio ** (1.0 / 3.0) - 1.0))
    if path == "paris":
        m = rng.uniform(3.2, 4.5)  # Paris exponent; 3 to 4 is usual for metals (Paris and Erdogan 1963)
        p = 2.0 / (m - 2.0)
        return (y0, hours / (1.0 - ratio ** (-1.0 / p)), p)
    if path == "exponential":
        return (y0, hours / math.log(ratio))
    raise ValueError(f"path = {path!r}: no crossing to build")


def crossing_hours(path: str, params: tuple[float, ...], level: float) -> float:
    """Hours at which the (pre-step) path reaches ``level``, inf if never (closed forms of ``condition``)."""
    if path in ("linear", "servo_falling", "drift_growing"):
        y0, slope = params
        h = (level - y0) / slope if slope != 0 else math.inf
    elif path == "power3":
        y0, tau = params
        h = tau * ((level / y0) ** (1.0 / 3.0) - 1.0)
    elif path == "paris":
        y0, hc, p = params
        h = hc * (1.0 - (level / y0) ** (-1.0 / p))
    elif path == "exponential":
        y0, tau = params
        h = tau * math.log(level / y0)
    else:
        return math.inf
    return h if h >= 0 else math.inf


# --- records ---


@dataclass(frozen=True)
class Truth:
    """What is true of one pump and reading kind (hours are operating hours since the pump was fitted new)."""

    serial: str
    kind: Kind
    model: str
    machine: str
    path: str
    params: tuple[float, ...]
    limit: float
    direction: str  # "above" | "below"
    x_cut: float  # true operating hours at the cut date
    cross_hours: float  # true crossing, inf if never
    cross_on: date | None  # calendar day the true condition crosses (None: never, or beyond the calendar)
    n_readings: int  # readings before the cut
    usage: str  # one of USAGES
    noise: float
    step: str | None = None  # "plus40" | "sigma8"
    step_hours: float = math.inf
    step_factor: float = 1.0
    outlier: str | None = None  # "newest" | "earlier": one reading typed in the wrong unit

    def value(self, h):
        """The true condition at ``h`` hours (reference conditions, magnitude for drift)."""
        return condition(self.path, self.params, h, self.step_hours, self.step_factor)

    @property
    def remaining_hours(self) -> float:
        return self.cross_hours - self.x_cut

    @property
    def readings_class(self) -> str:
        return "2-4" if self.n_readings <= 4 else ("5-7" if self.n_readings <= 7 else "8+")


@dataclass
class TruthFleet:
    fleet: Fleet
    cut: date
    truth: list[Truth]
    noise: float
    seed: int
    true_hours_per_day: dict[str, float] = field(default_factory=dict)  # machine: mean over the year after the cut
    meters: dict[str, tuple[int, np.ndarray]] = field(default_factory=dict)  # machine: (first day ordinal, meter by day)

    def meter_on(self, machine: str, day: date) -> float:
        """The machine's true hour meter at the start of ``day``."""
        first, meter = self.meters[machine]
        return float(meter[day.toordinal() - first])

    def truth_of(self, serial: str, kind: Kind) -> Truth:
        return self._index()[(serial, kind)]

    def _index(self) -> dict:
        if not hasattr(self, "_by_key"):
            self._by_key = {(t.serial, t.kind): t for t in self.truth}
        return self._by_key


def _models() -> list[tuple[PumpModel, str]]:
    """Four invented pump models, each with the case drain path most of its fleet follows."""
    out = []
    for code, cc, dominant in (("TV-45", 45.0, "linear"), ("TV-75", 75.0, "power3"), ("TV-110", 110.0, "paris"),
                               ("TV-180", 180.0, "exponential")):  # fmt: skip
        q_th = cc * 1800.0 / 1000.0  # theoretical flow, L/min, at the test speed
        limits = (Limit(Kind.CASE_DRAIN, round(0.06 * q_th, 2), "above"), Limit(Kind.SERVO_PRESSURE, 18.0, "below"),
                  Limit(Kind.NEUTRAL_DRIFT, 6.0, "above"))  # fmt: skip
        out.append((PumpModel(code=code, description="invented test model", displacement_cc=cc, rated_pressure_bar=400.0,
                              max_speed_rpm=2400.0, ref_temp_c=50.0, ref_pressure_bar=250.0, oil_grade=REFERENCE_OIL[0],
                              oil_vi=REFERENCE_OIL[1], test_speed_rpm=1800.0, test_temp_min_c=40.0, test_temp_max_c=60.0,
                              reading_interval_hours=500.0, reading_interval_days=90, limits=limits), dominant))  # fmt: skip
    return out


def _calendar(rng, usage: str, n_days: int, cut_i: int, days, months) -> tuple[np.ndarray, dict]:
    """Hours run on each day of the calendar, and the parked span (day indices) if any."""
    rate = rng.uniform(4.0, 16.0)
    hours = rate * np.clip(1.0 + 0.25 * rng.standard_normal(n_days), 0.0, 2.0)
    weekday = days % 7  # date.toordinal() % 7: 0 is Sunday, 6 Saturday
    hours = np.where((weekday == 0) | (weekday == 6), hours * 0.3, hours)
    info: dict = {}
    if usage == "seasonal":
        hours = np.where(np.isin(months, SEASON_MONTHS), rng.uniform(10.0, 16.0) * np.clip(1 + 0.2 * rng.standard_normal(n_days), 0, 1.6), 0.0)
    elif usage == "parked_now":
        start, end = cut_i - int(rng.uniform(90, 270)), cut_i + int(rng.uniform(30, 300))
        hours[start:end] = 0.0
        info["parked"] = (start, end)
    elif usage == "parked_before":
        end = cut_i - int(rng.uniform(45, 150))
        start = end - int(rng.uniform(120, 270))
        hours[start:end] = 0.0
        info["parked"] = (start, end)
    return np.minimum(hours, 24.0), info


def make_truth_fleet(seed: int, n_pumps: int = 200, noise: float = 0.04, cut: date = date(2026, 2, 2),
                     usage_shares=(0.6, 0.1, 0.1, 0.2), class_shares=(0.3, 0.3, 0.4)) -> TruthFleet:  # fmt: skip
    """An invented fleet of about ``n_pumps`` pumps (1 or 2 per machine) with readings before ``cut``."""
    rng = np.random.default_rng(seed)
    models = _models()
    back, ahead = 7 * 365, 15 * 365
    day0 = cut.toordinal() - back
    days = np.arange(day0, cut.toordinal() + ahead)
    n_days, cut_i = len(days), back
    months = np.array([date.fromordinal(int(d)).month for d in days])
    machines, pumps, fitments, readings, truth = {}, {}, [], [], []
    true_rate: dict[str, float] = {}
    meters: dict[str, tuple[int, np.ndarray]] = {}
    reading_id, m_no = 0, 0
    while len(pumps) < n_pumps:
        m_no += 1
        unit = f"U-{seed:02d}{m_no:03d}"
        usage = USAGES[rng.choice(4, p=usage_shares)]
        hours, info = _calendar(rng, usage, n_days, cut_i, days, months)
        meter = rng.uniform(500.0, 20000.0) + np.r_[0.0, np.cumsum(hours)]  # meter[d]: at the start of day d
        model, dominant = models[rng.integers(len(models))]
        cls = rng.choice(3, p=class_shares)
        n = int(rng.integers(2, 5) if cls == 0 else rng.integers(5, 8) if cls == 1 else rng.integers(8, 16))
        # the pumps were fitted new on one day; readings on days the machine ran, the newest shortly before the cut
        earliest = 250 if usage == "steady" else 450
        parked = info.get("parked")
        latest_read = parked[0] - 1 if usage == "parked_now" else cut_i - int(rng.uniform(1, 45))
        fit_i = cut_i - int(rng.uniform(earliest, 1800))
        if parked is not None:
            fit_i = min(fit_i, parked[0] - 150)
        running = np.flatnonzero(hours[: latest_read + 1] > 0.0)
        running = running[running >= fit_i + 3]
        if len(running) < n + 2:
            continue
        pos = np.linspace(0, len(running) - 1, n)
        pos[1:-1] += rng.uniform(-0.3, 0.3, n - 2) * (len(running) - 1) / max(n - 1, 1)
        read_i = np.unique(running[np.clip(np.round(pos).astype(int), 0, len(running) - 1)])
        if len(read_i) < n:
            continue
        true_rate[unit] = float(hours[cut_i : cut_i + 365].mean())
        meters[unit] = (day0, meter)
        machines[unit] = Machine(unit=unit, site=("North yard", "South yard", "Quarry")[m_no % 3])
        fit_day = date.fromordinal(int(days[fit_i]))
        x_read = meter[read_i] - meter[fit_i]
        x_cut = float(meter[cut_i] - meter[fit_i])
        n_here = 1 if rng.random() < 0.7 else 2
        temps = np.round(rng.uniform(40.0, 60.0, n), 1)  # as recorded: the flow follows the recorded conditions
        dps = np.round(rng.uniform(200.0, 300.0, n), 1)
        oil_pick = [REFERENCE_OIL if rng.random() < 0.9 else OTHER_OILS[rng.integers(len(OTHER_OILS))] for _ in range(n)]
        for slot in range(n_here):
            serial = f"T{seed:02d}-{len(pumps) + 1:04d}"
            pumps[serial] = Pump(serial=serial, model=model.code)
            fitments.append(Fitment(id=len(fitments) + 1, serial=serial, machine=unit, position=("front", "rear")[slot],
                                    fitted_on=fit_day, removed_on=None, machine_hours_at_fit=float(round(meter[fit_i], 1)),
                                    pump_hours_at_fit=0.0))  # fmt: skip
            values: dict[Kind, np.ndarray] = {}
            for kind in ALL_KINDS:
                lim = model.limit(kind)
                t = _truth_for(rng, kind, lim, model, dominant, serial, unit, usage, noise, n, x_cut, x_read, meter,
                               fit_i, days)  # fmt: skip
                truth.append(t)
                values[kind] = _measure(rng, t, x_read, temps, dps, oil_pick, model, noise)
            for j, d in enumerate(read_i.tolist()):
                reading_id += 1
                grade, vi = oil_pick[j]
                other = (grade, vi) != REFERENCE_OIL
                readings.append(Reading(
                    id=reading_id, serial=serial, taken_on=date.fromordinal(int(days[d])),
                    machine_hours=float(round(meter[d], 1)), case_drain_lpm=float(round(values[Kind.CASE_DRAIN][j], 3)),
                    servo_pressure_bar=float(round(values[Kind.SERVO_PRESSURE][j], 2)),
                    neutral_drift_bar=float(round(values[Kind.NEUTRAL_DRIFT][j], 3)),
                    oil_temp_c=float(round(temps[j], 1)), test_pressure_bar=float(round(dps[j], 1)),
                    test_speed_rpm=model.test_speed_rpm, oil_grade=grade if other else None, oil_vi=vi if other else None,
                    technician="bench", machine=unit,
                ))  # fmt: skip
            if len(pumps) >= n_pumps:
                break
    fleet = Fleet(models={m.code: m for m, _ in models}, machines=machines, pumps=pumps, fitments=tuple(fitments),
                  readings=tuple(readings), events=(), source=f"truth fleet seed {seed}")  # fmt: skip
    return TruthFleet(fleet=fleet, cut=cut, truth=truth, noise=noise, seed=seed, true_hours_per_day=true_rate,
                      meters=meters)


def _truth_for(rng, kind, lim, model, dominant, serial, unit, usage, noise, n, x_cut, x_read, meter, fit_i, days) -> Truth:
    """Draw the true path of one pump and kind: the fraction of its life used at the cut, then a path through the limit."""
    step, step_hours, step_factor, outlier = None, math.inf, 1.0, None
    if kind is Kind.CASE_DRAIN:
        others = [p for p in WEARING_PATHS if p != dominant]
        path = dominant if rng.random() < 0.55 else others[rng.integers(3)]
        y0 = rng.uniform(0.2, 0.42) * lim.value  # 1.2 % to 2.5 % of theoretical flow against a limit of 6 %
        if n >= 6 and rng.random() < 0.12:
            step = "plus40" if rng.random() < 0.5 else "sigma8"
            step_factor = 1.4 if step == "plus40" else math.exp(8.0 * noise)
            y0 = min(y0, 0.6 * lim.value / step_factor)
            j = int(rng.integers(2, n - 3))  # at least 3 readings on each side
            step_hours = 0.5 * (x_read[j] + x_read[j + 1])
        if n >= 4 and step is None and rng.random() < 0.07:
            outlier = "newest" if rng.random() < 0.5 else "earlier"
    elif kind is Kind.SERVO_PRESSURE:
        path = "servo_falling" if rng.random() < 0.35 else "stable"
        y0 = rng.uniform(24.0, 28.0)
        if n >= 4 and rng.random() < 0.03:
            outlier = "newest" if rng.random() < 0.5 else "earlier"
    else:
        path = "drift_growing" if rng.random() < 0.35 else "stable"
        y0 = rng.uniform(0.2, 1.0)
    if path == "stable":
        params, cross = (y0,), math.inf
    else:
        used = rng.uniform(0.3, 0.6) if step else rng.uniform(0.35, 0.85)
        used = max(used, x_cut / (x_cut + 18_000.0))  # remaining life within the engine's default horizon
        life = x_cut / used
        params = path_to(path, y0, lim.value / step_factor, life, rng)
        cross = crossing_hours(path, params, lim.value / step_factor)
    cross_on = None
    if math.isfinite(cross):
        i = int(np.searchsorted(meter, meter[fit_i] + cross, side="left")) - 1  # the day during which it crosses
        cross_on = date.fromordinal(int(days[i])) if 0 <= i < len(days) else None
    return Truth(serial=serial, kind=kind, model=model.code, machine=unit, path=path, params=tuple(float(p) for p in params),
                 limit=lim.value, direction=lim.direction, x_cut=x_cut, cross_hours=float(cross), cross_on=cross_on,
                 n_readings=n, usage=usage, noise=noise, step=step, step_hours=step_hours, step_factor=step_factor,
                 outlier=outlier)  # fmt: skip


def _measure(rng, t: Truth, x_read, temps, dps, oils, model: PumpModel, noise: float) -> np.ndarray:
    """Readings as a mechanic would take them: test conditions, noise, and the one typed in the wrong unit."""
    true = t.value(x_read)
    n = len(x_read)
    if t.kind is Kind.CASE_DRAIN:
        nu_ref = oil_cst(model.ref_temp_c, *REFERENCE_OIL)
        nu = np.array([oil_cst(temps[j], *oils[j]) for j in range(n)])
        got = true * (dps / model.ref_pressure_bar) * (nu_ref / nu) * np.exp(noise * rng.standard_normal(n))
    elif t.kind is Kind.SERVO_PRESSURE:
        got = true * np.exp(noise * rng.standard_normal(n))
    else:
        sign = 1.0 if rng.random() < 0.5 else -1.0
        got = sign * true + noise * t.limit * rng.standard_normal(n)
    if t.outlier is not None:
        j = n - 1 if t.outlier == "newest" else int(rng.integers(1, n - 1))
        got = got.copy()
        got[j] = got[j] * GALLON_L if t.kind is Kind.CASE_DRAIN else got[j] / PSI_PER_BAR
    return got


def reference_value(reading: Reading, kind: Kind, model: PumpModel) -> float | None:
    """A reading brought to the model's reference conditions with this module's own oil table
    (for baselines that must not lean on the engine): case drain * (dp_ref/dp) * (nu/nu_ref), |drift|."""
    raw = reading.value(kind)
    if raw is None or kind is not Kind.CASE_DRAIN:  # servo pressure as read, drift as a magnitude
        return None if raw is None else (abs(raw) if kind is Kind.NEUTRAL_DRIFT else raw)
    dp = reading.test_pressure_bar or model.ref_pressure_bar
    temp = model.ref_temp_c if reading.oil_temp_c is None else reading.oil_temp_c
    oil = (reading.oil_grade, float(reading.oil_vi)) if reading.oil_grade is not None else (model.oil_grade, float(model.oil_vi))
    nu, nu_ref = oil_cst(temp, *oil), oil_cst(model.ref_temp_c, model.oil_grade, float(model.oil_vi))
    return float(raw * (model.ref_pressure_bar / dp) * (nu / nu_ref))
