"""Signed distance from points to a shape's surface, in the shape's local frame (m; negative inside).

Exact for sphere, shell, cylinder/tube, box, cone/frustum (each the distance to its profile in the
(rho, z) half-plane, or the box's closed form) and for meshes (nearest triangle, mesh_distance.py,
imported for meshes only; sign by winding number). For the ellipsoid the zero set is exact and the
value is the usual first-order estimate (exact on the surface, close to the true distance near it).
A point shape has distance |p|.
"""

from __future__ import annotations

import numpy as np

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
        from truepull.geometry.mesh_distance import mesh_unsigned_distance

        unsigned = mesh_unsigned_distance(p, shape.triangles())
        return np.where(shape.contains(p), -unsigned, unsigned)
    raise TypeError(f"no signed distance for {type(shape).__name__}")
