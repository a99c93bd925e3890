"""What a point mass feels in a field: force, torque about the pivot, stiffness about the axis and energy,
with rigorous error bounds (SI), as numba functions for the point-like pairs and the point-mass model.

For a mass m at centre c in a field with potential U, field g and gradient tensor T there (also exact for
a sphere or shell, by the shell theorem), with r = c - pivot and e the unit axis:
F = m g, torque = r x F, K = -m (e.((e x r) x g) + e.(r x T (e x r))), E = m U.
Rows are [Fx, Fy, Fz, tx, ty, tz, K, E].
"""

from __future__ import annotations

import numpy as np
from numba import njit

EPS = np.finfo(float).eps


@njit(cache=True, inline="always")
def _cross(a0, a1, a2, b0, b1, b2):
    return a1 * b2 - a2 * b1, a2 * b0 - a0 * b2, a0 * b1 - a1 * b0


@njit(cache=True)
def response_into(mass, centre, U, g, T, pivot, axis, out):
    """Write [F, torque, K, E] (8,) of a point mass `mass` (kg) at `centre` (3,) m into `out`, for U (J/kg),
    g (3,) m/s^2 and T (3, 3) 1/s^2 there, the torque about `pivot`, K about the unit `axis`."""
    r0, r1, r2 = centre[0] - pivot[0], centre[1] - pivot[1], centre[2] - pivot[2]
    f0, f1, f2 = mass * g[0], mass * g[1], mass * g[2]
    t0, t1, t2 = _cross(r0, r1, r2, f0, f1, f2)
    e0, e1, e2 = axis[0], axis[1], axis[2]
    x0, x1, x2 = _cross(e0, e1, e2, r0, r1, r2)
    a0, a1, a2 = _cross(x0, x1, x2, g[0], g[1], g[2])
    v0 = T[0, 0] * x0 + T[0, 1] * x1 + T[0, 2] * x2
    v1 = T[1, 0] * x0 + T[1, 1] * x1 + T[1, 2] * x2
    v2 = T[2, 0] * x0 + T[2, 1] * x1 + T[2, 2] * x2
    b0, b1, b2 = _cross(r0, r1, r2, v0, v1, v2)
    dtau = mass * ((e0 * a0 + e1 * a1 + e2 * a2) + (e0 * b0 + e1 * b1 + e2 * b2))
    out[0], out[1], out[2] = f0, f1, f2
    out[3], out[4], out[5] = t0, t1, t2
    out[6] = -dtau
    out[7] = mass * U


@njit(cache=True)
def response_errors_into(mass, centre, pivot, axis, g, T, U, eU, eg, eT, out):
    """Write absolute error bounds (8,) of `response_into` into `out`, given absolute bounds on U, on g
    (vector norm) and on T (Frobenius norm). Each quantity is bounded term by term, with absolute values,
    so that cancellation is covered: K gets m (|e x r| eg + |r| |e x r| eT) from the field's errors, plus
    16 eps times the sum of the two terms' sizes and the rounding of r = centre - pivot (delta) through
    dK/dr."""
    eps = 2.220446049250313e-16
    m = abs(mass)
    r0, r1, r2 = centre[0] - pivot[0], centre[1] - pivot[1], centre[2] - pivot[2]
    nr = np.sqrt(r0 * r0 + r1 * r1 + r2 * r2)
    ng = np.sqrt(g[0] * g[0] + g[1] * g[1] + g[2] * g[2])
    nT = np.sqrt(np.sum(T * T))
    x0, x1, x2 = _cross(axis[0], axis[1], axis[2], r0, r1, r2)
    exr = np.sqrt(x0 * x0 + x1 * x1 + x2 * x2)
    big = 0.0
    for k in range(3):
        big = max(big, abs(centre[k]))
    bigp = 0.0
    for k in range(3):
        bigp = max(bigp, abs(pivot[k]))
    delta = 4.0 * eps * (big + bigp)
    eF = m * eg + 4.0 * eps * m * ng
    etau = nr * eF + m * ng * (8.0 * eps * nr + 2.0 * delta)
    k1 = m * exr * ng
    k2 = m * nr * exr * nT
    eK = m * (exr * eg + nr * exr * eT) + 16.0 * eps * (k1 + k2) + delta * m * (2.0 * ng + 3.0 * (nr + exr) * nT)
    eE = m * eU + 4.0 * eps * m * abs(U)
    out[0] = out[1] = out[2] = eF
    out[3] = out[4] = out[5] = etau
    out[6] = eK
    out[7] = eE


def _vec(x):
    return np.ascontiguousarray(x, dtype=float).reshape(3)


def point_response(mass, centre, U, g, T, pivot, axis):
    """(F (3,) N, torque (3,) N m, K N m/rad, E J) of `response_into`."""
    out = np.empty(8)
    response_into(float(mass), _vec(centre), float(U), _vec(g), np.ascontiguousarray(T, dtype=float).reshape(3, 3),
                  _vec(pivot), _vec(axis), out)
    return out[0:3], out[3:6], float(out[6]), float(out[7])


def point_response_errors(mass, centre, pivot, axis, g, T, U, eU, eg, eT) -> np.ndarray:
    """The bounds (8,) of `response_errors_into`."""
    out = np.empty(8)
    response_errors_into(float(mass), _vec(centre), _vec(pivot), _vec(axis), _vec(g),
                         np.ascontiguousarray(T, dtype=float).reshape(3, 3), float(U), float(eU), float(eg),
                         float(eT), out)
    return out
