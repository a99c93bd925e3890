"""Unsigned distance from points to the nearest of a mesh's triangles (numba kernels), in m.

Each point's distance is the least over the triangles of the exact point-triangle distance (Ericson,
Real-Time Collision Detection, 5.1.5). Its own module so that the signed distance of the other
shapes (distance.py, plain numpy) does not import numba.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange


@njit(cache=True)
def _closest_on_triangle(px, py, pz, ax, ay, az, bx, by, bz, cx, cy, cz):
    """Squared distance from p to triangle abc (Ericson, Real-Time Collision Detection, 5.1.5)."""
    abx, aby, abz = bx - ax, by - ay, bz - az
    acx, acy, acz = cx - ax, cy - ay, cz - az
    apx, apy, apz = px - ax, py - ay, pz - az
    d1 = abx * apx + aby * apy + abz * apz
    d2 = acx * apx + acy * apy + acz * apz
    if d1 <= 0.0 and d2 <= 0.0:
        qx, qy, qz = ax, ay, az
    else:
        bpx, bpy, bpz = px - bx, py - by, pz - bz
        d3 = abx * bpx + aby * bpy + abz * bpz
        d4 = acx * bpx + acy * bpy + acz * bpz
        if d3 >= 0.0 and d4 <= d3:
            qx, qy, qz = bx, by, bz
        else:
            vc = d1 * d4 - d3 * d2
            if vc <= 0.0 and d1 >= 0.0 and d3 <= 0.0:
                v = d1 / (d1 - d3)
                qx, qy, qz = ax + v * abx, ay + v * aby, az + v * abz
            else:
                cpx, cpy, cpz = px - cx, py - cy, pz - cz
                d5 = abx * cpx + aby * cpy + abz * cpz
                d6 = acx * cpx + acy * cpy + acz * cpz
                if d6 >= 0.0 and d5 <= d6:
                    qx, qy, qz = cx, cy, cz
                else:
                    vb = d5 * d2 - d1 * d6
                    if vb <= 0.0 and d2 >= 0.0 and d6 <= 0.0:
                        w = d2 / (d2 - d6)
                        qx, qy, qz = ax + w * acx, ay + w * acy, az + w * acz
                    else:
                        va = d3 * d6 - d5 * d4
                        if va <= 0.0 and (d4 - d3) >= 0.0 and (d5 - d6) >= 0.0:
                            w = (d4 - d3) / ((d4 - d3) + (d5 - d6))
                            qx, qy, qz = bx + w * (cx - bx), by + w * (cy - by), bz + w * (cz - bz)
                        else:
                            denom = 1.0 / (va + vb + vc)
                            v = vb * denom
                            w = vc * denom
                            qx = ax + abx * v + acx * w
                            qy = ay + aby * v + acy * w
                            qz = az + abz * v + acz * w
    dx, dy, dz = px - qx, py - qy, pz - qz
    return dx * dx + dy * dy + dz * dz


@njit(cache=True)
def _nearest_triangle_distance(px, py, pz, tris):
    best = np.inf
    for f in range(tris.shape[0]):
        d2 = _closest_on_triangle(px, py, pz,
                                  tris[f, 0, 0], tris[f, 0, 1], tris[f, 0, 2],
                                  tris[f, 1, 0], tris[f, 1, 1], tris[f, 1, 2],
                                  tris[f, 2, 0], tris[f, 2, 1], tris[f, 2, 2])
        if d2 < best:
            best = d2
    return math.sqrt(best)


@njit(cache=True, parallel=True)
def _mesh_distance_parallel(points, tris):
    out = np.empty(points.shape[0])
    for i in prange(points.shape[0]):
        out[i] = _nearest_triangle_distance(points[i, 0], points[i, 1], points[i, 2], tris)
    return out


@njit(cache=True)
def _mesh_distance_serial(points, tris):
    out = np.empty(points.shape[0])
    for i in range(points.shape[0]):
        out[i] = _nearest_triangle_distance(points[i, 0], points[i, 1], points[i, 2], tris)
    return out


def mesh_unsigned_distance(points: np.ndarray, triangles: np.ndarray) -> np.ndarray:
    """Distance (N,) from points (N, 3) to the nearest of the triangles (F, 3, 3)."""
    p = np.ascontiguousarray(points, dtype=np.float64).reshape(-1, 3)
    t = np.ascontiguousarray(triangles, dtype=np.float64)
    return _mesh_distance_serial(p, t) if len(p) < 64 else _mesh_distance_parallel(p, t)
