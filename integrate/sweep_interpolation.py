"""A long directly integrated sweep from fewer engine values: Chebyshev interpolation with a bounded error.

The torque, stiffness and force along a turn or shift of rigid bodies that never touch are analytic
in the sweep value, so their Chebyshev series converge geometrically. The engine integrates the sweep
at the M + 1 = 17 Chebyshev-Lobatto points c + h cos(pi k / M) of the sweep's range, and each row is
the degree-M interpolant there (numpy.polynomial.chebyshev). Its error is at most twice the sum of
the series' coefficients past M (aliasing; Trefethen, Approximation Theory and Approximation
Practice, 2013, Theorem 4.2), which is estimated from the interpolant's own coefficients in the upper
half of the degrees: a straight line through log |a_k| (those above the engine's noise) gives the
decay rate r per degree, and the tail is a_M r / (1 - r). A rate above MAX_RATE, or a rising series,
means the sweep is not resolved and the route is refused. On top comes the engine's largest error at
the points times the Lebesgue constant of the 17 points, at most (2 / pi) ln 16 + 1 = 2.77 (Chebyshev
extrema; Brutman, Annals of Numerical Mathematics 4, 1997, from memory), so a row's estimate may
exceed the engine's own at the points by that factor. The interpolants are used only when, for every
quantity (torque about the axis, stiffness, force), the tail is within TAIL_SHARE of the tolerance
of the sweep's largest value (or the series sits at the engine's noise, as a net force that vanishes
by symmetry does), and when direct integration at CHECKS further values, between the points, agrees
within twice the two estimates (the multipole path's test). Otherwise, or where a point finds the
bodies overlapping or the engine misses its tolerance, every value is integrated directly.
Units: the rows' (N m, N m/rad, N); sweep values rad or m.
"""

from __future__ import annotations

import math

import numpy as np

DEGREE = 16
"""Degree of the interpolant: DEGREE + 1 Chebyshev-Lobatto points."""

MAX_RATE = 0.7
"""Slowest decay per degree of the upper coefficients for which the tail estimate is trusted."""

TAIL_SHARE = 0.3
"""Share of the tolerance (of the sweep's largest value) the interpolation's error may take."""

CHECKS = 2
"""Sweep values between the points also integrated directly to check the interpolant."""

MAX_FRACTION = 0.6
"""The route is taken only when its engine values (points plus checks) are at most this fraction of the sweep's."""


def lebesgue_bound(m: int) -> float:
    """Upper bound of the Lebesgue constant of the m + 1 Chebyshev-Lobatto points: (2 / pi) ln m + 1."""
    return 2.0 / math.pi * math.log(m) + 1.0


def lobatto_points(lo: float, hi: float, m: int) -> np.ndarray:
    """The m + 1 Chebyshev-Lobatto points of [lo, hi], ascending."""
    return 0.5 * (lo + hi) - 0.5 * (hi - lo) * np.cos(math.pi * np.arange(m + 1) / m)


def worth_it(n_values: int) -> bool:
    """Whether a sweep of n values costs fewer engine runs this way."""
    return DEGREE + 1 + CHECKS <= MAX_FRACTION * n_values


def check_values(values, points, k: int = CHECKS) -> list[float]:
    """The k sweep values farthest from every point (spread over the range)."""
    v = np.asarray(values, float)
    gap = np.min(np.abs(v[:, None] - np.asarray(points)[None, :]), axis=1)
    chosen: list[float] = []
    for i in np.argsort(-gap, kind="stable"):
        if gap[i] <= 0 or len(chosen) == k:
            break
        if all(abs(v[i] - c) > 0.25 * (v.max() - v.min()) for c in chosen):
            chosen.append(float(v[i]))
    return chosen


def _columns(rows) -> np.ndarray:
    return np.array([[r.exact_torque_axis, r.exact_stiffness_axis, *np.asarray(r.force, float)] for r in rows])


def _errors(rows) -> np.ndarray:
    return np.array([[r.error_torque_axis, r.error_stiffness_axis, r.error_force] for r in rows])


def tail_estimate(a, floor: float) -> float | None:
    """Sum of |coefficients| past the last of `a` (|a_k|, k = 0..M) from the decay of the upper half's (those
    above 2 `floor`, the engine's noise); None when they do not decay faster than MAX_RATE."""
    a = np.abs(np.asarray(a, float))
    M = len(a) - 1
    k = np.arange(M + 1)
    upper = k >= M // 2
    sel = upper & (a > 2.0 * floor)
    if np.count_nonzero(sel) < 3:           # the series reaches the engine's noise: the tail is noise too
        return float(a[upper].max())
    slope, icpt = np.polyfit(k[sel], np.log(a[sel]), 1)
    r = math.exp(slope)
    if r >= MAX_RATE:
        return None
    return max(math.exp(icpt + slope * M), float(a[M])) * r / (1.0 - r)


def interpolate_sweep(values, rows_at_points, points, rtol: float):
    """(values (n, 5): torque, stiffness, force x, y, z; errors (n, 3): torque, stiffness, |force|) at the
    sweep values from the rows at the DEGREE + 1 `points` (ascending Chebyshev-Lobatto points), or None
    when the series is not resolved within the tolerance (module docstring)."""
    from numpy.polynomial import chebyshev

    y = _columns(rows_at_points)
    e = _errors(rows_at_points)
    lo, hi = float(points[0]), float(points[-1])
    t = lambda x: (2.0 * np.asarray(x, float) - lo - hi) / (hi - lo)        # noqa: E731
    coef = chebyshev.chebfit(t(points), y, DEGREE)                          # (DEGREE + 1, 5)
    e_max = e.max(axis=0)
    floors = np.array([e_max[0], e_max[1], e_max[2], e_max[2], e_max[2]])
    tails = [tail_estimate(coef[:, j], floors[j]) for j in range(5)]
    if any(x is None for x in tails):
        return None
    interp = 2.0 * np.array([tails[0], tails[1], math.sqrt(sum(x * x for x in tails[2:]))])
    sizes = np.array([np.abs(y[:, 0]).max(), np.abs(y[:, 1]).max(), np.linalg.norm(y[:, 2:], axis=1).max()])
    noise = sizes <= 2.0 * e_max
    if np.any((interp > TAIL_SHARE * rtol * sizes) & ~noise):
        return None
    engine = lebesgue_bound(DEGREE) * e_max
    fine = chebyshev.chebval(t(values), coef).T
    err = np.broadcast_to(interp + engine, (len(fine), 3)).copy()
    return fine, err
