"""Closed triangle surfaces of placed bodies, for drawing (pyvista PolyData, world coordinates in m).

Each body is drawn with its true shape and placement: spheres, shells, ellipsoids, boxes, solid
cylinders, tubes, cones and frustums are tessellated here (`segments` facets around an axis), meshes
are drawn as they are. A point body is drawn as a small marker sphere of radius `point_radius` (m).
Axisymmetric shapes are surfaces of revolution of a closed (rho, z) profile, so every surface is
closed and wound outward.
"""

from __future__ import annotations

import numpy as np

SEGMENTS = 64
"""Facets around a body's axis (and rings from pole to pole on a sphere: SEGMENTS // 2)."""


def revolve(profile, segments: int = SEGMENTS) -> tuple[np.ndarray, np.ndarray]:
    """Vertices (V, 3) and triangles (F, 3) of the closed surface swept by turning a profile about z.

    `profile` is an open polyline of (rho, z) points (m) whose two ends lie on the axis (rho = 0) or
    which is a closed loop away from it (then give the first point again at the end). It is walked
    so that the material lies on its left in the (rho, z) half-plane (counter-clockwise), which makes
    the normals point outward. Points on the axis become one vertex each."""
    prof = np.asarray(profile, dtype=float)
    phi = np.linspace(0.0, 2.0 * np.pi, segments, endpoint=False)
    c, s = np.cos(phi), np.sin(phi)
    closed_loop = np.allclose(prof[0], prof[-1])
    if closed_loop:
        prof = prof[:-1]
    vertices = []
    rings = []  # per profile point: index array of its vertices (length 1 on the axis)
    for rho, z in prof:
        start = sum(len(r) for r in rings)
        if rho <= 0.0:
            vertices.append(np.array([[0.0, 0.0, z]]))
            rings.append(np.array([start]))
        else:
            vertices.append(np.column_stack([rho * c, rho * s, np.full(segments, z)]))
            rings.append(start + np.arange(segments))
    faces = []
    n = len(prof)
    pairs = [(i, i + 1) for i in range(n - 1)] + ([(n - 1, 0)] if closed_loop else [])
    nxt = np.roll(np.arange(segments), -1)
    for i, j in pairs:
        a, b = rings[i], rings[j]
        if len(a) == 1 and len(b) == 1:
            continue
        if len(a) == 1:  # fan from an axis point to the next ring
            faces.append(np.column_stack([np.full(segments, a[0]), b[nxt], b]))
        elif len(b) == 1:
            faces.append(np.column_stack([a, a[nxt], np.full(segments, b[0])]))
        else:
            faces.append(np.column_stack([a, a[nxt], b[nxt]]))
            faces.append(np.column_stack([a, b[nxt], b]))
    return np.vstack(vertices), np.vstack(faces).astype(np.int64)


def _arc(radius: float, n: int, reverse: bool = False) -> list[tuple[float, float]]:
    """Meridian of a sphere from the south pole to the north pole (reversed: north to south)."""
    t = np.linspace(-0.5 * np.pi, 0.5 * np.pi, n + 1)
    pts = list(zip(radius * np.cos(t), radius * np.sin(t)))
    pts[0] = (0.0, -radius)
    pts[-1] = (0.0, radius)
    return pts[::-1] if reverse else pts


def local_surface(shape, segments: int = SEGMENTS, point_radius: float = 1e-3) -> tuple[np.ndarray, np.ndarray]:
    """Vertices (m, local frame) and triangles of a shape's closed surface."""
    kind = shape.kind
    half = segments // 2
    if kind == "point":
        return revolve(_arc(point_radius, max(half // 2, 6)), max(segments // 2, 12))
    if kind == "sphere":
        return revolve(_arc(shape.radius, half), segments)
    if kind == "ellipsoid":
        v, f = revolve(_arc(1.0, half), segments)
        return v * np.asarray(shape.radii, float), f
    if kind == "shell":
        ov, of = revolve(_arc(shape.radius, half), segments)
        iv, inner_faces = revolve(_arc(shape.inner_radius, half), segments)
        return np.vstack([ov, iv]), np.vstack([of, inner_faces[:, ::-1] + len(ov)])
    if kind in ("cylinder", "cone"):
        h = shape.length / 2.0
        r_bottom = shape.radius
        r_top = shape.radius if kind == "cylinder" else shape.radius_top
        inner = getattr(shape, "inner_radius", 0.0) if kind == "cylinder" else 0.0
        if inner > 0.0:  # a tube: a closed rectangular loop away from the axis
            return revolve([(inner, -h), (r_bottom, -h), (r_top, h), (inner, h), (inner, -h)], segments)
        return revolve([(0.0, -h), (r_bottom, -h), (r_top, h), (0.0, h)], segments)
    if kind == "box":
        import trimesh

        tm = trimesh.creation.box(extents=shape.size)
        return np.asarray(tm.vertices, float), np.asarray(tm.faces, np.int64)
    if kind == "mesh":
        return np.asarray(shape.vertices, float), np.asarray(shape.faces, np.int64)
    raise ValueError(f"no surface for shape '{kind}'")


def body_surface(body, segments: int = SEGMENTS, point_radius: float = 1e-3):
    """The body's closed surface in the world (m) as pyvista PolyData, with field data naming the
    body, its group and shape, and whether it is a hole."""
    import pyvista as pv

    v, f = local_surface(body.shape, segments, point_radius)
    if body.shape.kind == "point":
        v = v + body.shape.centroid()
    world = body.placement.apply(v)
    surf = pv.PolyData.from_regular_faces(world, f)
    surf.field_data["body"] = np.array([body.name])
    surf.field_data["group"] = np.array([body.group])
    surf.field_data["shape"] = np.array([body.shape.kind])
    surf.field_data["is_hole"] = np.array([int(body.is_hole)])
    surf.field_data["mass_kg"] = np.array([body.mass])
    return surf
