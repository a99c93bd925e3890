"""The source group's field sampled on a square grid in a plane, for pictures and ParaView files.

The grid is centred on a given point (the pendulum's centre of mass), lies in a world coordinate
plane (xy, xz or yz) and is wide enough to hold both groups. Field values come from the engine
(`integrate.interaction.group_field`), never from a second calculation. Grid points inside a source
body, or closer to its surface than a small margin (a quarter of the grid spacing), are masked: the
engine's source fields hold outside the bodies, and points grazing a surface would only slow the
quadrature down. Masked points carry NaN. SI throughout: m, J/kg, m/s^2.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

PLANES = {"xy": (0, 1, 2), "xz": (0, 2, 1), "yz": (1, 2, 0)}
"""Plane name -> (first in-plane axis, second in-plane axis, normal axis), as world axis indices."""

MARGIN = 1.15
"""The grid reaches this many times past the farthest body's bounding sphere."""

SURFACE_MARGIN = 0.25
"""Grid points closer than this many grid spacings to a source surface are masked."""


@dataclass(frozen=True, eq=False)
class FieldPlane:
    """A sampled field: `points` (n*n, 3) m in row-major grid order (index = j * n + i, i along
    the plane's first axis), `masked` (n*n,) bool, U (J/kg), g (n*n, 3) m/s^2 and their absolute
    error estimates err_U, err_g; NaN where masked. `centre` (3,) m, `half_size` m, `plane` name."""

    plane: str
    n: int
    centre: np.ndarray
    half_size: float
    points: np.ndarray
    masked: np.ndarray
    U: np.ndarray
    g: np.ndarray
    err_U: np.ndarray
    err_g: np.ndarray
    rtol: float

    @property
    def spacing(self) -> float:
        return 2.0 * self.half_size / (self.n - 1)

    @property
    def g_magnitude(self) -> np.ndarray:
        return np.linalg.norm(self.g, axis=1)

    @property
    def samples(self) -> int:
        return int(np.count_nonzero(~self.masked))


def default_plane(frame_axis) -> str:
    """The coordinate plane most nearly perpendicular to the frame axis (xy for a vertical fiber)."""
    normal = int(np.argmax(np.abs(np.asarray(frame_axis, float))))
    return next(name for name, (_, _, k) in PLANES.items() if k == normal)


def plane_half_size(bodies, centre, plane: str) -> float:
    """Half the side (m) of a square in `plane` about `centre` holding every body's bounding sphere."""
    a, b, _ = PLANES[plane]
    c = np.asarray(centre, float)
    reach = 0.0
    for body in bodies:
        bc, r = body.bounding_sphere()
        reach = max(reach, abs(bc[a] - c[a]) + r, abs(bc[b] - c[b]) + r)
    return MARGIN * reach if reach > 0 else 1.0


def grid_points(centre, half_size: float, plane: str, n: int) -> np.ndarray:
    """(n*n, 3) points of an n x n square grid in `plane` about `centre` (row-major, first axis fastest)."""
    a, b, _ = PLANES[plane]
    s = np.linspace(-half_size, half_size, n)
    sa, sb = np.meshgrid(s, s)  # sa varies along columns (fastest)
    pts = np.tile(np.asarray(centre, float), (n * n, 1))
    pts[:, a] += sa.ravel()
    pts[:, b] += sb.ravel()
    return pts


def near_or_inside(bodies, points, margin: float) -> np.ndarray:
    """Which points lie inside any of the bodies or within `margin` (m) of its surface."""
    from truepull.geometry.distance import signed_distance

    out = np.zeros(len(points), dtype=bool)
    for body in bodies:
        centre, radius = body.bounding_sphere()
        near = np.linalg.norm(points - centre, axis=1) <= radius + margin
        if np.any(near):
            d = signed_distance(body.shape, body.to_local(points[near]))
            hit = np.zeros(len(points), dtype=bool)
            hit[near] = d <= margin
            out |= hit
    return out


def sample_field(source_bodies, frame_bodies, centre, plane: str, n: int, G: float, rtol: float) -> FieldPlane:
    """The field of `source_bodies` on an n x n grid in `plane` through `centre`, sized to hold
    `frame_bodies` (all bodies to be shown). Values from the engine's group_field at tolerance rtol."""
    from truepull.integrate.interaction import group_field

    if plane not in PLANES:
        raise ValueError(f"unknown plane '{plane}'")
    half = plane_half_size(frame_bodies, centre, plane)
    pts = grid_points(centre, half, plane, n)
    spacing = 2.0 * half / (n - 1)
    masked = near_or_inside(source_bodies, pts, SURFACE_MARGIN * spacing)
    U = np.full(len(pts), np.nan)
    g = np.full((len(pts), 3), np.nan)
    eU = np.full(len(pts), np.nan)
    eg = np.full(len(pts), np.nan)
    keep = ~masked
    if np.any(keep):
        u_k, g_k, eu_k, eg_k = group_field(source_bodies, pts[keep], G, rtol)
        U[keep], g[keep], eU[keep], eg[keep] = u_k, g_k, eu_k, eg_k
    return FieldPlane(plane, n, np.asarray(centre, float).copy(), float(half), pts, masked, U, g, eU, eg, rtol)


def field_polydata(fp: FieldPlane, length_factor: float = 1.0):
    """The sampled plane as a pyvista PolyData of n x n points and (n-1)^2 quads, coordinates divided
    by `length_factor` (1 = metres). Point arrays: g (m/s^2), g_magnitude, U (J/kg), err_g, err_U,
    masked (0/1). Field data: plane, rtol, length_factor."""
    import pyvista as pv

    n = fp.n
    i, j = np.meshgrid(np.arange(n - 1), np.arange(n - 1))
    k = (j * n + i).ravel()
    quads = np.column_stack([k, k + 1, k + n + 1, k + n])
    poly = pv.PolyData.from_regular_faces(fp.points / length_factor, quads)
    poly.point_data["g"] = fp.g
    poly.point_data["g_magnitude"] = fp.g_magnitude
    poly.point_data["U"] = fp.U
    poly.point_data["err_g"] = fp.err_g
    poly.point_data["err_U"] = fp.err_U
    poly.point_data["masked"] = fp.masked.astype(np.int8)
    poly.field_data["plane"] = np.array([fp.plane])
    poly.field_data["rtol"] = np.array([fp.rtol])
    poly.field_data["length_factor"] = np.array([length_factor])
    return poly
