"""Coverage-interval rules of JCGM 101:2008 (7.7) and its numerical tolerance rule (7.9.2),
checked by the rules' own arithmetic on small hand-made samples and against scipy.stats."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from truepull.integrate.balance import coverage as cov


def test_covered_count_rule():
    # JCGM 101 7.7: q = pM when whole, else int(pM + 1/2)
    assert cov.covered_count(1000, 0.95) == 950
    assert cov.covered_count(999, 0.95) == int(0.95 * 999 + 0.5) == 949
    with pytest.raises(ValueError):
        cov.covered_count(10, 0.95)  # q would be all ten values


def test_symmetric_interval_by_hand():
    # M = 40, p = 0.95: q = 38, M - q = 2, r = 1 -> [y_(1), y_(39)]  (JCGM 101 7.7.1 by hand)
    y = np.arange(1.0, 41.0)
    assert cov.symmetric_interval(y, 0.95) == (1.0, 39.0)
    # M = 41: q = int(38.95 + 0.5) = 39, M - q = 2 -> r = 1 -> [y_(1), y_(40)]
    assert cov.symmetric_interval(np.arange(1.0, 42.0), 0.95) == (1.0, 40.0)
    # M = 1000: q = 950, r = 25 -> [y_(25), y_(975)]
    assert cov.symmetric_interval(np.arange(1.0, 1001.0), 0.95) == (25.0, 975.0)


def test_shortest_interval_by_hand():
    # values crowded on the left: the shortest 50 % interval of these 8 values (q = 4) is
    # [y_(1), y_(5)] = [0, 0.4] (JCGM 101 7.7.2 by hand)
    y = np.array([0.0, 0.1, 0.2, 0.3, 0.4, 2.0, 5.0, 9.0])
    assert cov.shortest_interval(y, 0.5) == (0.0, 0.4)


def test_shortest_interval_of_an_exponential_sample():
    # exponential distribution: the shortest 95 % interval is [0, F^-1(0.95)] (decreasing density);
    # reference scipy.stats.expon; bound 6 standard errors of a sample quantile,
    # sqrt(p (1 - p) / M) / pdf (asymptotic normality of sample quantiles, from memory)
    m = 200_000
    y = np.sort(np.random.default_rng(11).exponential(1.0, m))
    low, high = cov.shortest_interval(y, 0.95)
    q95 = stats.expon.ppf(0.95)
    se = np.sqrt(0.95 * 0.05 / m) / stats.expon.pdf(q95)
    assert abs(high - q95) < 6 * se
    assert 0 <= low < 20 / m  # within the first few order statistics of a density-1 start


def test_min_values():
    assert cov.min_values(0.95) == 20  # smallest M with M - q >= 1 for p = 0.95 (by hand: q = 19)
    cov.covered_count(cov.min_values(0.99), 0.99)


@pytest.mark.parametrize("u, digits, delta", [
    (0.0257, 2, 0.0005),    # 0.0257 -> 26 x 10^-3, delta = 10^-3 / 2 (JCGM 101 7.9.2 rule by hand)
    (0.0257, 1, 0.005),     # 0.0257 -> 3 x 10^-2
    (0.0996, 2, 0.005),     # rounds up to 0.10 = 10 x 10^-2
    (1.5e-15, 2, 5e-17),    # 15 x 10^-16
    (123.0, 3, 0.5),        # 123 x 10^0
    (0.0, 2, 0.0),
])
def test_tolerance_for_digits(u, digits, delta):
    assert cov.tolerance_for_digits(u, digits) == pytest.approx(delta, rel=1e-12)
