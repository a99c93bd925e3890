"""Coverage intervals from Monte Carlo model values, and the numerical tolerance rule (JCGM 101:2008).

Values are in the output quantity's own unit. Interval rules of JCGM 101:2008 section 7.7: with M
sorted values y_(1) <= ... <= y_(M) and coverage probability p, q = pM when that is a whole number,
otherwise int(pM + 1/2); an interval is [y_(r), y_(r+q)] for some r in 1 .. M - q.
"""

from __future__ import annotations

import math

import numpy as np


def covered_count(m: int, p: float) -> int:
    """q: the number of ordered values spanned by a coverage interval of probability p."""
    pm = p * m
    q = round(pm) if math.isclose(pm, round(pm), rel_tol=0, abs_tol=1e-9) else int(pm + 0.5)
    if not 1 <= q < m:
        raise ValueError(f"{m} values are too few for a coverage interval of probability {p}")
    return q


def min_values(p: float) -> int:
    """The fewest values for which a coverage interval of probability p exists (M - q >= 1)."""
    m = max(2, math.ceil(1.0 / (1.0 - p) - 1e-9))
    while True:
        try:
            covered_count(m, p)
            return m
        except ValueError:
            m += 1


def symmetric_interval(sorted_values: np.ndarray, p: float) -> tuple[float, float]:
    """Probabilistically symmetric interval: r = (M - q)/2 if whole, else (M - q + 1)/2 (7.7.1)."""
    y = np.asarray(sorted_values)
    m = y.size
    q = covered_count(m, p)
    r = (m - q) // 2 if (m - q) % 2 == 0 else (m - q + 1) // 2
    r = max(r, 1)
    return float(y[r - 1]), float(y[r + q - 1])


def shortest_interval(sorted_values: np.ndarray, p: float) -> tuple[float, float]:
    """Shortest interval: the r that minimises y_(r+q) - y_(r) (7.7.2)."""
    y = np.asarray(sorted_values)
    m = y.size
    q = covered_count(m, p)
    widths = y[q:] - y[: m - q]
    r0 = int(np.argmin(widths))
    return float(y[r0]), float(y[r0 + q])


def tolerance_for_digits(u: float, digits: int) -> float:
    """delta = 10^l / 2 where u written to `digits` significant digits is c * 10^l, c a
    `digits`-digit whole number (JCGM 101:2008 section 7.9.2). Zero for u = 0."""
    if digits < 1:
        raise ValueError("digits must be at least 1")
    if not u > 0 or not math.isfinite(u):
        return 0.0
    exponent = math.floor(math.log10(u))
    rounded = round(u / 10.0**exponent, digits - 1) * 10.0**exponent
    exponent = math.floor(math.log10(rounded) + 1e-12)
    return 0.5 * 10.0 ** (exponent - digits + 1)
