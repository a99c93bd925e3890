"""The point-mass model: every body replaced by a point of its (signed) mass at its centre of mass."""

from __future__ import annotations

import numpy as np
from numba import njit

from truepull.integrate.field_point import newton_into
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
    """Newton's field (field_point.newton_into) of each source point at each test point, through
    response_into."""
    out = np.zeros((ct.shape[0], cs.shape[0], 8))
    g = np.empty(3)
    T = np.empty((3, 3))
    for j in range(cs.shape[0]):
        if ms[j] == 0.0:
            continue
        gm = G * ms[j]
        for i in range(ct.shape[0]):
            U = newton_into(ct[i], cs[j], gm, g, T)
            response_into(mt[i], ct[i], U, g, T, pivot, axis, out[i, j])
    return out


def point_model(test_bodies, source_bodies, pivot, axis, G) -> np.ndarray:
    """Totals [F(3), torque(3), K, E] of the point-mass model."""
    return point_pair_values(test_bodies, source_bodies, pivot, axis, G).sum(axis=(0, 1))
