"""The source group's field sampled on a square grid in a plane, for pictures and ParaView files.

The grid is centred on a given point (the pendulum's centre of mass), lies in a world coordinate
plane (xy, xz or yz) and is wide enough to hold both groups. Field values come from the engine
(`integrate.interaction.group_field`), never from a second calculation. Grid points inside a source
body, or closer to its surface than a small margin (a twentieth of the grid spacing), are masked:
the engine's source fields hold outside the bodies. Masked points carry NaN. For pictures,
`shown_plane` clips the grid along the bodies' own surfaces (each body's exact inside test, found
by bisection along every grid edge that crosses it, at the same margin) and adds the engine's field
at the points where it cuts, so the plane stops at each body's outline instead of in a staircase of
whole grid cells. SI throughout: m, J/kg, m/s^2.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

PLANES = {"xy": (0, 1, 2), "xz": (0, 2, 1), "yz": (1, 2, 0)}
"""Plane name -> (first in-plane axis, second in-plane axis, normal axis), as world axis indices."""

MARGIN = 1.15
"""The grid reaches this many times past the farthest body's bounding sphere."""

SURFACE_MARGIN = 0.05
"""Grid points closer than this many grid spacings to a source surface are masked; the picture's
plane is clipped at this distance outside each source body (a small fraction of a cell)."""

BISECTIONS = 30
"""Halvings of a grid edge to find where it meets a body's surface: 2^-30 of a spacing."""


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


def clearance(bodies, points, margin: float) -> np.ndarray:
    """(N,) m: the least signed distance from each point to the bodies' surfaces (negative inside),
    exact for points within `margin` of a body's bounding sphere; farther points get the (smaller,
    still positive) distance to that sphere, which is all the masking and clipping need."""
    from truepull.geometry.distance import signed_distance

    points = np.asarray(points, float)
    out = np.full(len(points), np.inf)
    for body in bodies:
        centre, radius = body.bounding_sphere()
        to_sphere = np.linalg.norm(points - centre, axis=1) - radius
        near = to_sphere <= margin
        d = to_sphere.copy()
        if np.any(near):
            d[near] = signed_distance(body.shape, body.to_local(points[near]))
        out = np.minimum(out, d)
    return out


def near_or_inside(bodies, points, margin: float) -> np.ndarray:
    """Which points lie inside any of the bodies or within `margin` (m) of its surface."""
    return clearance(bodies, points, margin) <= margin


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


def edge_crossings(bodies, outside, inside, margin: float) -> np.ndarray:
    """(K, 3) m: on each segment from `outside[k]` (clear of the bodies by more than `margin`) to
    `inside[k]` (not), the point where the clearance first falls to `margin`, by bisection of the
    bodies' exact inside test (BISECTIONS halvings), taken on the clear side."""
    a = np.asarray(outside, float).copy()
    b = np.asarray(inside, float).copy()
    for _ in range(BISECTIONS):
        mid = 0.5 * (a + b)
        clear = clearance(bodies, mid, margin) > margin
        a[clear], b[~clear] = mid[clear], mid[~clear]
    return a


def shown_plane(fp: FieldPlane, source_bodies, G: float, length_factor: float = 1.0):
    """The sampled plane clipped along the source bodies' surfaces, as PolyData (coordinates divided
    by `length_factor`) with point arrays g_magnitude (m/s^2) and err_g: whole grid cells where all
    four corners are clear, cut cells where an edge meets a body, the cut points placed on the body's
    surface (at the masking margin) by `edge_crossings` and their field computed by the engine at
    the plane's tolerance. Empty when every point is masked."""
    import pyvista as pv

    from truepull.integrate.interaction import group_field

    margin = SURFACE_MARGIN * fp.spacing
    poly = field_polydata(fp)
    n = fp.n
    j, i = np.divmod(np.arange(n * n), n)
    poly.point_data["grid_i"] = i.astype(float)
    poly.point_data["grid_j"] = j.astype(float)
    poly.point_data["clear"] = np.where(fp.masked, -1.0, 1.0)
    cut = poly.clip_scalar(scalars="clear", invert=False, value=0.0)
    if cut.n_points == 0:
        return pv.PolyData()
    gi, gj = np.asarray(cut.point_data["grid_i"]), np.asarray(cut.point_data["grid_j"])
    on_i, on_j = np.isclose(gi, np.round(gi), atol=1e-6), np.isclose(gj, np.round(gj), atol=1e-6)
    new = ~(on_i & on_j)
    mag = np.full(cut.n_points, np.nan)
    err = np.full(cut.n_points, np.nan)
    old = np.flatnonzero(~new)
    k = np.round(gj[old]).astype(int) * n + np.round(gi[old]).astype(int)
    mag[old], err[old] = fp.g_magnitude[k], fp.err_g[k]
    idx = np.flatnonzero(new)
    if idx.size:
        # each new point lies on one grid edge: along i when its j is whole, else along j
        along_i = on_j[idx]
        i0 = np.where(along_i, np.floor(gi[idx]), np.round(gi[idx])).astype(int)
        j0 = np.where(along_i, np.round(gj[idx]), np.floor(gj[idx])).astype(int)
        i1, j1 = np.minimum(i0 + along_i, n - 1), np.minimum(j0 + ~along_i, n - 1)
        k0, k1 = j0 * n + i0, j1 * n + i1
        first_clear = ~fp.masked[k0]
        outside = np.where(first_clear[:, None], fp.points[k0], fp.points[k1])
        inside = np.where(first_clear[:, None], fp.points[k1], fp.points[k0])
        pts = edge_crossings(source_bodies, outside, inside, margin)
        _, g, _, eg = group_field(source_bodies, pts, G, fp.rtol)
        cut.points[idx] = pts
        mag[idx], err[idx] = np.linalg.norm(g, axis=1), eg
    shown = pv.PolyData(np.asarray(cut.points) / length_factor, cut.faces) if cut.n_cells else pv.PolyData()
    if shown.n_points:
        shown.point_data["g_magnitude"] = mag
        shown.point_data["err_g"] = err
    return shown
