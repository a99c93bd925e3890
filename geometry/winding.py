"""Generalized winding number of a closed triangle mesh at many points (numba kernel).

The winding number is the sum over faces of each triangle's signed solid angle seen from the point,
divided by 4 pi (solid angle by the formula of van Oosterom and Strackee 1983, IEEE Trans. Biomed.
Eng. 30:125). For a closed, outward-wound mesh it is 1 inside and 0 outside, and it degrades
gracefully for small defects. Plain arrays in and out.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange


@njit(cache=True)
def _winding_at(px, py, pz, tris):
    total = 0.0
    for f in range(tris.shape[0]):
        ax = tris[f, 0, 0] - px
        ay = tris[f, 0, 1] - py
        az = tris[f, 0, 2] - pz
        bx = tris[f, 1, 0] - px
        by = tris[f, 1, 1] - py
        bz = tris[f, 1, 2] - pz
        cx = tris[f, 2, 0] - px
        cy = tris[f, 2, 1] - py
        cz = tris[f, 2, 2] - pz
        la = math.sqrt(ax * ax + ay * ay + az * az)
        lb = math.sqrt(bx * bx + by * by + bz * bz)
        lc = math.sqrt(cx * cx + cy * cy + cz * cz)
        det = ax * (by * cz - bz * cy) - ay * (bx * cz - bz * cx) + az * (bx * cy - by * cx)
        den = (la * lb * lc + (ax * bx + ay * by + az * bz) * lc
               + (ax * cx + ay * cy + az * cz) * lb + (bx * cx + by * cy + bz * cz) * la)
        total += 2.0 * math.atan2(det, den)
    return total / (4.0 * math.pi)


@njit(cache=True, parallel=True)
def _winding_parallel(points, tris):
    out = np.empty(points.shape[0])
    for i in prange(points.shape[0]):
        out[i] = _winding_at(points[i, 0], points[i, 1], points[i, 2], tris)
    return out


@njit(cache=True)
def _winding_serial(points, tris):
    out = np.empty(points.shape[0])
    for i in range(points.shape[0]):
        out[i] = _winding_at(points[i, 0], points[i, 1], points[i, 2], tris)
    return out


def winding_numbers(points: np.ndarray, triangles: np.ndarray) -> np.ndarray:
    """Winding number (N,) of the mesh with `triangles` (F, 3, 3) at `points` (N, 3), same units."""
    p = np.ascontiguousarray(points, dtype=np.float64).reshape(-1, 3)
    t = np.ascontiguousarray(triangles, dtype=np.float64).reshape(-1, 3, 3)
    # few points: the serial kernel avoids the cost of starting threads
    return _winding_serial(p, t) if len(p) < 64 else _winding_parallel(p, t)
