"""Dates carry the machine's utilisation uncertainty (logbook.analysis.utilisation.rate_spread / dates_ahead)."""

from datetime import date

import numpy as np
import pytest
from scipy import stats

from logbook.analysis.utilisation import dates_ahead, rate_spread

TODAY = date(2026, 6, 1)


def test_lognormal_crossing_and_lognormal_use_add_in_quadrature():
    # When log(hours to cross) and log(average hours a day) are both normal and independent, log(days)
    # is normal with the variances added: its 10 % and 90 % quantiles (scipy.stats.norm) are exact.
    s1, s2, h50, rate = 0.4, 0.3, 6000.0, 12.0
    z = stats.norm.ppf(0.9)
    remaining = np.array([[h50 * np.exp(-z * s1), h50, h50 * np.exp(z * s1)]])
    # v = s2^2 with L >= D (one block) and a long history (T huge): relative sd s2
    days = dates_ahead(remaining, np.array([rate]), np.array([s2**2]), np.array([1e6]), np.array([1e12]))
    want = h50 / rate * np.exp(stats.norm.ppf([0.1, 0.5, 0.9]) * np.hypot(s1, s2))
    assert days[0] == pytest.approx(np.ceil(want - 1e-9), abs=1)


def test_no_spread_keeps_the_plain_dates_and_no_rate_gives_none():
    remaining = np.array([[1000.0, 2000.0, np.inf], [0.0, 500.0, 900.0]])
    plain = dates_ahead(remaining, np.array([10.0, 10.0]), np.array([np.nan, 0.0]), np.array([30.0, 30.0]),
                        np.array([300.0, 300.0]))
    assert plain.tolist() == [[100, 200, -1], [0, 50, 90]]
    none = dates_ahead(remaining[:1], np.array([np.nan]), np.array([0.1]), np.array([30.0]), np.array([300.0]))
    assert none.tolist() == [[-1, -1, -1]]


def _points(rates, every=30):
    """One machine (code 0): a meter point every ``every`` days at the given hours a day per interval."""
    days, hours, h = [], [], 1000.0
    d = TODAY.toordinal() - every * len(rates)
    days.append(d), hours.append(h)
    for r in rates:
        d += every
        h += r * every
        days.append(d), hours.append(h)
    return np.zeros(len(days), dtype=np.int64), np.array(days), np.array(hours, dtype=float)


def test_rate_spread_is_the_day_weighted_variance_of_interval_rates():
    rates = [10.0, 14.0, 6.0, 10.0, 12.0, 8.0]
    m, d, h = _points(rates)
    (v, length, span, last), = rate_spread(m, d, h, {0: 10.0}, TODAY).values()
    # equal intervals: the day weights cancel, v is the mean squared relative deviation (numpy)
    assert v == pytest.approx(np.mean(((np.array(rates) - 10.0) / 10.0) ** 2))
    assert length == pytest.approx(30.0) and span == pytest.approx(180.0) and last == TODAY.toordinal()


def test_a_machine_with_few_intervals_takes_the_fleets_median():
    m1, d1, h1 = _points([10.0, 14.0, 6.0, 10.0])
    m2, d2, h2 = _points([10.0, 10.0, 10.0, 10.0])
    m3, d3, h3 = _points([9.0])
    m = np.r_[m1, m2 + 1, m3 + 2]
    got = rate_spread(m, np.r_[d1, d2, d3], np.r_[h1, h2, h3], {0: 10.0, 1: 10.0, 2: 9.0}, TODAY)
    assert got[1][0] == pytest.approx(0.0)
    assert got[2][0] == pytest.approx(np.median([got[0][0], got[1][0]]))


def test_uneven_use_widens_the_band_of_dates_but_not_p50():
    remaining = np.array([[3000.0, 5000.0, 8000.0]] * 2)
    days = dates_ahead(remaining, np.array([10.0, 10.0]), np.array([0.0, 0.5]), np.array([60.0, 60.0]),
                       np.array([365.0, 365.0]))
    steady, uneven = days
    assert uneven[1] == steady[1] and uneven[0] < steady[0] and uneven[2] > steady[2]
