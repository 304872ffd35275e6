"""What the trend engine hands to the views, the plan and the exports (pure)."""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import date
from functools import cached_property
from enum import Enum
from typing import TYPE_CHECKING

from logbook.model import Kind, Limit

if TYPE_CHECKING:
    from logbook.analysis.paths import PathMixture


class Outcome(str, Enum):
    """How a (pump, reading kind) forecast came out; every case is explicit."""

    PAST_LIMIT = "past_limit"  # latest normalized value is already beyond the limit
    CROSSING = "crossing"  # a crossing is forecast: p10/p50/p90 are set
    NO_CROSSING = "no_crossing"  # no trend toward the limit within the horizon
    TOO_FEW = "too_few"  # not enough readings in the current segment
    NO_LIMIT = "no_limit"  # the model has no limit for this kind
    NO_DATA = "no_data"  # no reading of this kind at all


OUTCOME_WORDS = {
    Outcome.PAST_LIMIT: "past limit",
    Outcome.CROSSING: "crossing forecast",
    Outcome.NO_CROSSING: "no crossing in horizon",
    Outcome.TOO_FEW: "too few readings",
    Outcome.NO_LIMIT: "no limit set",
    Outcome.NO_DATA: "no readings",
}

def outcome_words(kf) -> str:
    """The outcome as the quantiles shown beside it have it: a P10 date inside the horizon with the
    P50 beyond it is 'P50 beyond the horizon', not 'no crossing' (NO_CROSSING means no P50 crossing
    within the horizon); a crossing whose P90 lies beyond it says so too."""
    if kf.outcome is Outcome.NO_CROSSING and kf.p10_date is not None:
        return "P50 beyond the horizon"
    if kf.outcome is Outcome.CROSSING and kf.p90_date is None:
        return "P90 beyond the horizon"
    return OUTCOME_WORDS[kf.outcome]


# Flags the engine may raise on a forecast.
FLAG_OUTLIER = "outlier_dropped"  # a reading was down-weighted as a wild value
FLAG_STEP = "step_detected"  # a sudden step (breakage?) rather than wear
FLAG_POOLED = "pooled"  # the wear rate borrowed strength from the model's fleet
FLAG_JUMP = "last_reading_jumped"  # the newest reading is far from the trend


@dataclass(frozen=True, slots=True)
class FitDetail:
    """Enough of the fit to draw it: points, which were used, the path and its band.

    ``path`` is "linear" (y = a + b x) or "exponential" (y = exp(a + b x)) on the
    trended value (for servo pressure the engine may fit the drop; ``band`` always
    returns values on the reading's own scale).
    """

    x_hours: tuple[float, ...]  # operating hours since segment start, per reading
    y_value: tuple[float, ...]  # normalized values
    used: tuple[bool, ...]  # False where a reading was dropped as an outlier
    path: str
    params: tuple[float, ...]  # (a, b)
    cov: tuple[tuple[float, float], tuple[float, float]]  # covariance of (a, b)
    sigma: float  # residual standard deviation on the fitted scale
    dof: int
    # the forecast's path mixture and this series' row in it: band() then draws the same mixture that
    # gives P50 and the P10-P90 dates (not compared: the figures above are the fit itself)
    mixture: PathMixture | None = field(default=None, compare=False, repr=False)
    row: int = field(default=-1, compare=False, repr=False)
    x_days: tuple[int, ...] = field(default=(), compare=False, repr=False)  # day ordinal of each reading (charts)

    def below(self, x, value, *, reading: bool = False):
        """P(the value at hours ``x`` is below ``value``), for many points in one call: the
        distribution whose quantiles ``band`` draws (a value lies outside the central band of
        coverage c exactly when this is below (1 - c) / 2 or above (1 + c) / 2). ``reading``:
        of a new reading (the fitted path's prediction band, measurement scatter included),
        not of the true condition."""
        import numpy as np
        from scipy import special

        xs, vs = np.atleast_1d(np.asarray(x, dtype=float)), np.atleast_1d(np.asarray(value, dtype=float))
        if self.mixture is not None and self.row >= 0 and not reading:
            return self.mixture._value_cdf(np.maximum(vs, 1e-9)[None, :], xs[None, :], np.array([self.row]))[0]
        a, b = self.params
        var_mean = self.cov[0][0] + 2 * xs * self.cov[0][1] + xs * xs * self.cov[1][1]
        se = np.sqrt(np.maximum(var_mean + self.sigma**2, 0.0))
        with np.errstate(divide="ignore", invalid="ignore"):
            shown = np.log(np.maximum(vs, 1e-300)) if self.path == "exponential" else vs
            return special.stdtr(max(self.dof, 1), (shown - (a + b * xs)) / se)  # = scipy.stats.t.cdf

    def bounds(self, x, coverage: float = 0.8, *, reading: bool = False):
        """(lower, upper) of ``band`` without its middle; ``reading`` as in ``below``."""
        import numpy as np

        lo, _, hi = self.band(x, coverage, reading=reading)
        return np.asarray(lo, dtype=float), np.asarray(hi, dtype=float)

    def band(self, x: "list[float] | tuple[float, ...]", coverage: float = 0.8, *, reading: bool = False):
        """(lower, middle, upper) band on the reading's scale at hours ``x``: of the true condition under
        the path mixture when the forecast kept it, else (or with ``reading``) the prediction band of the
        least-squares path, where a new reading is expected."""
        import numpy as np
        from scipy import special

        xs = np.asarray(x, dtype=float)
        if self.mixture is not None and self.row >= 0 and not reading:
            return self.mixture.band_of(self.row, xs, coverage)
        a, b = self.params
        mid = a + b * xs
        var_mean = self.cov[0][0] + 2 * xs * self.cov[0][1] + xs * xs * self.cov[1][1]
        se = np.sqrt(np.maximum(var_mean + self.sigma**2, 0.0))
        t = special.stdtrit(max(self.dof, 1), 0.5 + coverage / 2)  # = scipy.stats.t.ppf
        lo, hi = mid - t * se, mid + t * se
        if self.path == "exponential":
            return np.exp(lo), np.exp(mid), np.exp(hi)
        return lo, mid, hi


@dataclass(frozen=True, slots=True)
class KindForecast:
    """Forecast for one pump and one reading kind."""

    serial: str
    kind: Kind
    limit: Limit | None
    outcome: Outcome
    latest_value: float | None  # normalized (reference conditions); drift as magnitude
    latest_raw: float | None  # as measured, canonical units
    latest_on: date | None
    n_readings: int  # readings in the current segment
    segment_start: date | None
    hours_in_segment: float | None  # operating hours since segment start, today (estimated)
    path: str  # words for the heaviest wear path of the mixture (paths.PATH_WORDS), "none" without one
    p10_hours: float | None  # remaining operating hours to the limit (from today)
    p50_hours: float | None
    p90_hours: float | None
    p10_date: date | None
    p50_date: date | None
    p90_date: date | None
    flags: frozenset[str] = frozenset()
    fit: FitDetail | None = None
    rate_per_1000h: float | None = None  # wear rate near today, units per 1000 h (sign as reading)
    path_share: float | None = None  # weight of that path in the mixture (0..1)
    calibrated_on: int = 0  # later readings of the model's fleet the band's width was checked on
    percent_of_theoretical: float | None = None  # case drain only: latest value as % of theoretical flow
    not_used: tuple[str, ...] = ()  # readings kept but not trended, "YYYY-MM-DD: why" (normalize.untrusted)

    @property
    def percent_of_limit(self) -> float | None:
        if self.limit is None or self.latest_value is None or self.limit.value == 0:
            return None
        return 100.0 * self.latest_value / self.limit.value


@dataclass(frozen=True, slots=True)
class PumpForecast:
    """One pump in service: where it is and its forecasts, worst first."""

    serial: str
    model: str
    machine: str | None
    position: str | None
    site: str | None
    hours_since_overhaul: float | None
    hours_per_day: float | None  # utilisation of the machine it sits in
    kinds: tuple[KindForecast, ...]  # one per reading kind
    worst: KindForecast | None = None  # the kind closest to its limit
    status: str = ""  # words, from logbook.analysis.status
    last_reading_on: date | None = None
    utilisation_basis: str = ""  # how its machine's hours run ahead when not plainly (parked, by season)


@dataclass(frozen=True)
class FleetForecast:
    today: date
    pumps: tuple[PumpForecast, ...]
    source: str = ""
    notes: tuple[str, ...] = field(default_factory=tuple)

    def pump(self, serial: str) -> PumpForecast | None:
        """The pump's forecast (a dict built on the first call: no search per pump); the first on a repeat."""
        return self._by_serial.get(serial)

    @cached_property
    def _by_serial(self) -> dict[str, PumpForecast]:
        index: dict[str, PumpForecast] = {}
        for p in self.pumps:
            index.setdefault(p.serial, p)
        return index
