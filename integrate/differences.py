"""First derivatives by central differences, Richardson-extrapolated, with an error bound.

For each coordinate i with step h_i the model is evaluated at x + k h_i e_i, k = -2, -1, +1, +2.
D(h) = (f(x+h) - f(x-h)) / 2h and D(2h) are second-order central differences; the Richardson
combination (4 D(h) - D(2h)) / 3 = (8 [f(x+h) - f(x-h)] - [f(x+2h) - f(x-2h)]) / 12h is fourth
order. Its error is bounded by |D(h) - D(2h)| / 3 (the error estimate of the second-order D(h);
for a smooth model the extrapolated value is much better, so the bound is conservative) plus the rounding of the model values amplified by the stencil,
1.5 * noise / h with noise = rel_noise * max|f|.
"""

from __future__ import annotations

import numpy as np

# multiples of the step at which the model is evaluated, per coordinate
OFFSETS = (-2.0, -1.0, 1.0, 2.0)

# relative noise assumed in the model's values when the caller states none: a few dozen
# rounding errors of double precision (common practice)
DEFAULT_REL_NOISE = 1e-14


def default_steps(values: np.ndarray, u: np.ndarray) -> np.ndarray:
    """Steps h_i = max(u_i / 100, 1e-6 |x_i|); 1e-6 (in the input's SI unit) when both are zero."""
    values = np.asarray(values, dtype=float)
    u = np.asarray(u, dtype=float)
    h = np.maximum(1e-2 * u, 1e-6 * np.abs(values))
    return np.where(h > 0, h, 1e-6)


def stencil_points(x: np.ndarray, steps: np.ndarray) -> np.ndarray:
    """The 4n points, shape (n, 4, n): points[i, k] = x + OFFSETS[k] * steps[i] * e_i."""
    x = np.asarray(x, dtype=float)
    n = x.size
    points = np.broadcast_to(x, (n, len(OFFSETS), n)).copy()
    for i in range(n):
        points[i, :, i] = x[i] + np.asarray(OFFSETS) * steps[i]
    return points


def derivatives(f_values: np.ndarray, steps: np.ndarray, f_centre: float,
                rel_noise: float = DEFAULT_REL_NOISE) -> tuple[np.ndarray, np.ndarray]:
    """(df/dx_i, error bound) from the model values at the stencil points, shape (n, 4)."""
    f = np.asarray(f_values, dtype=float)
    h = np.asarray(steps, dtype=float)
    fm2, fm1, fp1, fp2 = f[:, 0], f[:, 1], f[:, 2], f[:, 3]
    d_h = (fp1 - fm1) / (2.0 * h)
    d_2h = (fp2 - fm2) / (4.0 * h)
    richardson = (4.0 * d_h - d_2h) / 3.0
    scale = np.maximum(np.max(np.abs(f), axis=1), abs(f_centre))
    rounding = 1.5 * rel_noise * scale / h
    error = np.abs(d_h - d_2h) / 3.0 + rounding
    return richardson, error


def second_derivatives(f_values: np.ndarray, steps: np.ndarray, f_centre: float,
                       rel_noise: float = DEFAULT_REL_NOISE) -> tuple[np.ndarray, np.ndarray]:
    """(d^2 f / dx_i^2, error bound) from the same stencil values as `derivatives`, shape (n, 4).

    S(h) = (f(x+h) - 2 f(x) + f(x-h)) / h^2 and S(2h) are second-order; the Richardson combination
    (4 S(h) - S(2h)) / 3 = (16 [f(x+h) + f(x-h)] - [f(x+2h) + f(x-2h)] - 30 f(x)) / 12 h^2 is
    fourth order. Error bound |S(h) - S(2h)| / 3 plus the rounding, 64/12 * noise / h^2."""
    f = np.asarray(f_values, dtype=float)
    h = np.asarray(steps, dtype=float)
    fm2, fm1, fp1, fp2 = f[:, 0], f[:, 1], f[:, 2], f[:, 3]
    s_h = (fp1 - 2.0 * f_centre + fm1) / h**2
    s_2h = (fp2 - 2.0 * f_centre + fm2) / (4.0 * h**2)
    richardson = (4.0 * s_h - s_2h) / 3.0
    scale = np.maximum(np.max(np.abs(f), axis=1), abs(f_centre))
    rounding = (64.0 / 12.0) * rel_noise * scale / h**2
    return richardson, np.abs(s_h - s_2h) / 3.0 + rounding
