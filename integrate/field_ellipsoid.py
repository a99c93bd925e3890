"""Gravity of a homogeneous triaxial ellipsoid, inside and outside, by the classical formulas with
Carlson's symmetric elliptic integrals (scipy.special.elliprf, elliprd), SI units.

The ellipsoid has semi-axes (a, b, c) along the local x, y, z axes and is centred at the origin;
points are given in that frame. Sign convention: U = -G rho * integral dV'/|x - x'| (J/kg),
g = -grad U (m/s^2, toward the mass).

With lambda the largest root of sum x_i^2 / (a_i^2 + lambda) = 1 outside (0 inside) and
A_i = a_i^2 + lambda,
    U   = -pi G rho a b c [ 2 R_F(A_x, A_y, A_z) - (2/3) sum_i x_i^2 R_D(A_j, A_k, A_i) ]
    g_i = -(4/3) pi G rho a b c x_i R_D(A_j, A_k, A_i)
since int_lambda^inf du / Delta(u) = 2 R_F and int_lambda^inf du / ((a_i^2 + u) Delta(u)) =
(2/3) R_D with Delta(u) = sqrt((a^2 + u)(b^2 + u)(c^2 + u)) (Chandrasekhar 1969, Ellipsoidal
Figures of Equilibrium, ch. 3; Carlson 1995, Numer. Algorithms 10:13). Spheroids and spheres are
ordinary cases (Carlson's integrals accept equal arguments).

lambda is found by Newton's method started at max(0, r^2 - a_max^2), where the function is still
positive; as sum x_i^2 / (a_i^2 + lambda) - 1 is convex and decreasing, the iterates rise
monotonically to the root without overshooting, and stop at full precision.
"""

from __future__ import annotations

import numpy as np
from scipy.special import elliprd, elliprf

from truepull.geometry.errors import InputError

_MAX_NEWTON = 200


def _check(points, radii):
    p = np.asarray(points, dtype=np.float64)
    if p.ndim == 1 and p.shape[0] == 3:
        p = p.reshape(1, 3)
    if p.ndim != 2 or p.shape[1] != 3:
        raise InputError(None, "points", f"expected an (N, 3) array of positions, got {p.shape}")
    r = np.asarray(radii, dtype=np.float64).reshape(-1)
    if r.shape != (3,) or not np.all(np.isfinite(r)) or np.any(r <= 0.0):
        raise InputError(None, "radii", f"an ellipsoid needs three positive semi-axes, "
                                        f"got {r.tolist()}")
    return p, r


def confocal_parameter(points, radii):
    """lambda (N,) in m^2: the largest root of sum x_i^2 / (a_i^2 + lambda) = 1 for points outside
    the ellipsoid, 0 for points inside or on it."""
    p, r = _check(points, radii)
    a2 = r ** 2
    x2 = p ** 2
    outside = (x2 / a2).sum(axis=1) > 1.0
    lam = np.zeros(p.shape[0])
    if not np.any(outside):
        return lam
    x2o = x2[outside]
    # Start where the function is >= 0: sum x^2/(a^2 + r^2 - amax^2) >= sum x^2 / r^2 = 1.
    l = np.maximum(0.0, x2o.sum(axis=1) - a2.max())
    active = np.ones(l.shape[0], dtype=bool)
    for _ in range(_MAX_NEWTON):
        A = a2[None, :] + l[active, None]
        t = x2o[active] / A
        f = t.sum(axis=1) - 1.0
        fp = -(t / A).sum(axis=1)
        step = -f / fp
        step = np.where(f > 0.0, step, 0.0)           # never step past the root
        new = l[active] + step
        done = step <= 4.0 * np.finfo(float).eps * (new + a2.min())
        l[active] = new
        idx = np.flatnonzero(active)
        active[idx[done]] = False
        if not np.any(active):
            break
    lam[outside] = l
    return lam


def ellipsoid_field(points, radii, rho, G):
    """Potential U (N,) in J/kg and field g (N,3) in m/s^2 of a homogeneous ellipsoid of density
    `rho` (kg/m^3, negative for a hole) with semi-axes `radii` (a, b, c) in m along local x, y, z,
    at `points` (N,3) in m in the ellipsoid's frame; valid inside, on and outside the surface."""
    p, r = _check(points, radii)
    lam = confocal_parameter(p, r)
    A = r[None, :] ** 2 + lam[:, None]
    rf = elliprf(A[:, 0], A[:, 1], A[:, 2])
    rd = np.stack([elliprd(A[:, 1], A[:, 2], A[:, 0]),
                   elliprd(A[:, 2], A[:, 0], A[:, 1]),
                   elliprd(A[:, 0], A[:, 1], A[:, 2])], axis=1)
    k = np.pi * float(G) * float(rho) * r.prod()
    U = -k * (2.0 * rf - (2.0 / 3.0) * (p ** 2 * rd).sum(axis=1))
    g = -(4.0 / 3.0) * k * p * rd
    return U, g
