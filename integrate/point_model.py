"""The point-mass model: every body replaced by a point of its (signed) mass at its centre of mass."""

from __future__ import annotations

import numpy as np

from truepull.integrate.field_point import point_field, point_gradient
from truepull.integrate.pairs import point_response


def point_pair_values(test_bodies, source_bodies, pivot, axis, G) -> np.ndarray:
    """(n_test, n_source, 8) array of [F(3), torque(3), K, E] on each test point from each source point."""
    pivot = np.asarray(pivot, float)
    axis = np.asarray(axis, float) / np.linalg.norm(axis)
    out = np.zeros((len(test_bodies), len(source_bodies), 8))
    for j, s in enumerate(source_bodies):
        if s.mass == 0:
            continue
        centres = np.array([t.com for t in test_bodies]).reshape(-1, 3)
        U, g = point_field(centres, s.com[None, :], np.array([s.mass]), G)
        T = point_gradient(centres, s.com[None, :], np.array([s.mass]), G)
        for i, t in enumerate(test_bodies):
            F, tau, K, E = point_response(t.mass, t.com, U[i], g[i], T[i], pivot, axis)
            out[i, j, 0:3] = F
            out[i, j, 3:6] = tau
            out[i, j, 6] = K
            out[i, j, 7] = E
    return out


def point_model(test_bodies, source_bodies, pivot, axis, G) -> np.ndarray:
    """Totals [F(3), torque(3), K, E] of the point-mass model."""
    return point_pair_values(test_bodies, source_bodies, pivot, axis, G).sum(axis=(0, 1))
