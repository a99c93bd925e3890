"""How far a body reaches from a centre point: its farthest and nearest points (m).

Used to decide whether an inner/outer multipole expansion about the pivot is valid: every test
body must lie inside, and every source body outside, one sphere about the pivot.
`farthest(body, c)` is exact for point, sphere, shell, box, cylinder, tube, cone and mesh (a convex
function's maximum over a convex body is at an extreme point: vertices or rim circles; a mesh is
bounded by its vertices) and an upper bound for the ellipsoid. `nearest(body, c)` is exact for
all shapes (ellipsoid by the one-dimensional Lagrange condition), and 0 when c lies inside.
"""

from __future__ import annotations

import math

import numpy as np

from truepull.geometry.distance import signed_distance


def _rim_farthest(centre, normal, radius, c) -> float:
    """Largest distance from c to a circle (centre, unit normal, radius)."""
    d = centre - c
    along = float(d @ normal)
    perp = np.linalg.norm(d - along * normal)
    return math.hypot(along, perp + radius)


def farthest(body, centre) -> float:
    """Distance from `centre` (world, m) to the farthest point of the body (m)."""
    c = np.asarray(centre, float)
    k = body.shape.kind
    pl = body.placement
    s = body.shape
    if k == "point":
        return float(np.linalg.norm(body.com - c))
    if k in ("sphere", "shell"):
        return float(np.linalg.norm(pl.translation - c) + s.radius)
    if k == "box":
        h = 0.5 * np.asarray(s.size)
        corners = np.array([[i, j, l] for i in (-1, 1) for j in (-1, 1) for l in (-1, 1)]) * h
        return float(np.max(np.linalg.norm(pl.apply(corners) - c, axis=1)))
    if k == "mesh":
        return float(np.max(np.linalg.norm(pl.apply(s.vertices) - c, axis=1)))
    if k in ("cylinder", "cone"):
        axis = pl.apply_vector([0.0, 0.0, 1.0])
        top = s.radius if k == "cylinder" else s.radius_top
        ends = ((-0.5 * s.length, s.radius), (0.5 * s.length, top))
        return max(_rim_farthest(pl.apply([0.0, 0.0, z]), axis, r, c) for z, r in ends)
    if k == "ellipsoid":
        return float(np.linalg.norm(pl.translation - c) + max(s.radii))
    raise KeyError(k)


def _ellipsoid_distance(radii, y) -> float:
    """Exact distance from a local point y outside the ellipsoid to its surface."""
    a = np.asarray(radii, float)
    y = np.abs(np.asarray(y, float))
    if np.sum((y / a) ** 2) <= 1.0:
        return 0.0

    def f(t):
        return float(np.sum((a * y / (a * a + t)) ** 2) - 1.0)

    hi = float(np.linalg.norm(a * y)) + 1.0e-300
    while f(hi) > 0:
        hi *= 2.0
    from scipy.optimize import brentq  # here, not at import: scipy.optimize is slow to load

    t = brentq(f, 0.0, hi, xtol=1e-300, rtol=1e-15, maxiter=400)
    x = a * a * y / (a * a + t)
    return float(np.linalg.norm(x - y))


def nearest(body, centre) -> float:
    """Distance from `centre` (world, m) to the nearest point of the body; 0 if it is inside (m)."""
    c = np.asarray(centre, float)
    k = body.shape.kind
    if k == "point":
        return float(np.linalg.norm(body.com - c))
    local = body.placement.inverse().apply(c[None, :])
    if k == "ellipsoid":
        return _ellipsoid_distance(body.shape.radii, local[0])
    if k == "shell":  # the cavity is outside the matter: a centre in it is inside the shell's reach
        d = float(np.linalg.norm(local[0]))
        if d < body.shape.inner_radius:
            return 0.0
    return max(0.0, float(signed_distance(body.shape, local)[0]))


def convex_hull_clearance(body, centre) -> float:
    """A lower bound (m) of the distance from `centre` to the convex hull of a mesh body: the largest
    signed distance to the hull's facet planes (0 if inside). Tetrahedra of the body's volume rule lie in
    the hull, so this bounds how near any quadrature cell comes to the centre."""
    import trimesh

    v = body.placement.apply(body.shape.vertices)
    hull = trimesh.Trimesh(vertices=v, faces=body.shape.faces, process=False).convex_hull
    n = hull.face_normals
    d = np.einsum("ij,ij->i", n, hull.triangles[:, 0])
    return max(0.0, float(np.max(n @ np.asarray(centre, float) - d)))
