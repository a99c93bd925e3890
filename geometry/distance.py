"""Signed distance from points to a shape's surface, in the shape's local frame (m; negative inside).

Exact for sphere, shell, cylinder/tube, box, cone/frustum (each the distance to its profile in the
(rho, z) half-plane, or the box's closed form) and for meshes (nearest triangle, sign by winding
number). For the ellipsoid the zero set is exact and the value is the usual first-order estimate
(exact on the surface, close to the true distance near it). A point shape has distance |p|.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

from truepull.geometry.shapes import Box, Cone, Cylinder, Ellipsoid, MeshShape, Point, Shell, Sphere


def _points(p) -> np.ndarray:
    p = np.asarray(p, dtype=float)
    return p.reshape(-1, 3)


def _rect_2d(dx: np.ndarray, dy: np.ndarray) -> np.ndarray:
    """Signed distance to a centred rectangle given (|x| - half_w, |y| - half_h)."""
    outside = np.hypot(np.maximum(dx, 0.0), np.maximum(dy, 0.0))
    inside = np.minimum(np.maximum(dx, dy), 0.0)
    return outside + inside


def _convex_polygon_2d(x: np.ndarray, y: np.ndarray, verts: np.ndarray) -> np.ndarray:
    """Signed distance to a convex polygon with counter-clockwise vertices (K, 2)."""
    best = np.full(x.shape, np.inf)
    inside = np.ones(x.shape, dtype=bool)
    k = len(verts)
    for i in range(k):
        a, b = verts[i], verts[(i + 1) % k]
        e = b - a
        ee = float(e @ e)
        px, py = x - a[0], y - a[1]
        if ee > 0:
            t = np.clip((px * e[0] + py * e[1]) / ee, 0.0, 1.0)
        else:
            t = np.zeros_like(px)
        best = np.minimum(best, np.hypot(px - t * e[0], py - t * e[1]))
        if ee > 0:
            inside &= (e[0] * py - e[1] * px) >= 0.0  # left of a counter-clockwise edge
    return np.where(inside, -best, best)


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


def signed_distance(shape, points_local) -> np.ndarray:
    """Signed distance (N,) in m from local points (N, 3) to the surface of `shape` (negative inside)."""
    p = _points(points_local)
    x, y, z = p[:, 0], p[:, 1], p[:, 2]
    if isinstance(shape, Point):
        return np.linalg.norm(p, axis=1)
    if isinstance(shape, Sphere):
        return np.linalg.norm(p, axis=1) - shape.radius
    if isinstance(shape, Shell):
        r = np.linalg.norm(p, axis=1)
        return np.maximum(r - shape.radius, shape.inner_radius - r)
    if isinstance(shape, Cylinder):
        rho = np.hypot(x, y)
        dz = np.abs(z) - shape.length / 2
        if shape.inner_radius > 0:
            mid, half = (shape.radius + shape.inner_radius) / 2, (shape.radius - shape.inner_radius) / 2
            return _rect_2d(np.abs(rho - mid) - half, dz)
        return _rect_2d(rho - shape.radius, dz)
    if isinstance(shape, Box):
        d = np.abs(p) - 0.5 * np.asarray(shape.size)
        outside = np.linalg.norm(np.maximum(d, 0.0), axis=1)
        return outside + np.minimum(np.max(d, axis=1), 0.0)
    if isinstance(shape, Cone):
        h = shape.length / 2
        R1, R2 = shape.radius, shape.radius_top
        verts = np.array([[-R1, -h], [R1, -h], [R2, h], [-R2, h]])
        if R2 == 0.0:
            verts = verts[:3]
        if R1 == 0.0:
            verts = np.array([[0.0, -h], [R2, h], [-R2, h]])
        return _convex_polygon_2d(np.hypot(x, y), z, verts)
    if isinstance(shape, Ellipsoid):
        r = np.asarray(shape.radii)
        k0 = np.linalg.norm(p / r, axis=1)
        k1 = np.linalg.norm(p / (r * r), axis=1)
        with np.errstate(divide="ignore", invalid="ignore"):
            d = k0 * (k0 - 1.0) / k1
        return np.where(k1 > 0, d, -float(np.min(r)))
    if isinstance(shape, MeshShape):
        unsigned = mesh_unsigned_distance(p, shape.triangles())
        return np.where(shape.contains(p), -unsigned, unsigned)
    raise TypeError(f"no signed distance for {type(shape).__name__}")
