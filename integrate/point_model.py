"""The point-mass model: every body replaced by a point of its (signed) mass at its centre of mass."""

from __future__ import annotations

import numpy as np
from numba import njit

from truepull.integrate.pair_cache import body_com, body_mass
from truepull.integrate.point_response import response_into


def point_pair_values(test_bodies, source_bodies, pivot, axis, G) -> np.ndarray:
    """(n_test, n_source, 8) array of [F(3), torque(3), K, E] on each test point from each source point
    (NaN where a test point sits on a source point). Bodies need `mass` and `com`."""
    pivot = np.asarray(pivot, float).reshape(3)
    axis = np.asarray(axis, float).reshape(3)
    axis = axis / np.linalg.norm(axis)
    ct = np.array([body_com(t) for t in test_bodies], float).reshape(-1, 3)
    cs = np.array([body_com(s) for s in source_bodies], float).reshape(-1, 3)
    mt = np.array([body_mass(t) for t in test_bodies], float)
    ms = np.array([body_mass(s) for s in source_bodies], float)
    return _point_pairs_kernel(ct, mt, cs, ms, pivot, axis, float(G))


@njit(cache=True)
def _point_pairs_kernel(ct, mt, cs, ms, pivot, axis, G):
    """Newton's field U = -G m / r, g = G m d / r^3 and gradient T = G m (3 d d^T / r^5 - I / r^3)
    (d = source - test point) of each source point at each test point, through response_into."""
    out = np.zeros((ct.shape[0], cs.shape[0], 8))
    g = np.empty(3)
    T = np.empty((3, 3))
    for j in range(cs.shape[0]):
        if ms[j] == 0.0:
            continue
        gm = G * ms[j]
        for i in range(ct.shape[0]):
            d0, d1, d2 = cs[j, 0] - ct[i, 0], cs[j, 1] - ct[i, 1], cs[j, 2] - ct[i, 2]
            r = np.sqrt(d0 * d0 + d1 * d1 + d2 * d2)
            if r > 0.0:
                gm_r = gm / r
                U = -gm_r
                s = gm_r / (r * r)
                a = 3.0 * gm / r ** 5
                b = gm / r ** 3
            else:
                U = s = a = b = np.nan
            g[0], g[1], g[2] = s * d0, s * d1, s * d2
            d = (d0, d1, d2)
            for k in range(3):
                for m in range(3):
                    T[k, m] = a * d[k] * d[m]
                T[k, k] -= b
            response_into(mt[i], ct[i], U, g, T, pivot, axis, out[i, j])
    return out


def point_model(test_bodies, source_bodies, pivot, axis, G) -> np.ndarray:
    """Totals [F(3), torque(3), K, E] of the point-mass model."""
    return point_pair_values(test_bodies, source_bodies, pivot, axis, G).sum(axis=(0, 1))
