"""Measured cylinder: a cylinder measured point by point (e.g. on a coordinate-measuring machine) as a body.

The CSV (x, y, z columns, read by measured_form.read_measured) holds points on the side and on the two
end faces, about the file's origin: the axis near the file's z axis, the origin near the middle. Each
point is given to the nearer nominal surface: with R the largest distance from the z axis and H the
largest |z| among the points, a point is on an end face (top for z > 0) when H - |z| < R - rho, else on
the side (a scan that keeps off the edges, as usual, is split without doubt).

Fits, each by least squares (numpy.linalg.lstsq), with the coefficients' covariance s^2 (A^T A)^-1:
- the side's radius r(phi, z) = sum a_mk T_m(phi) P_k(z / H): a Fourier series to order M in the
  azimuth (T_0 = 1, cos m phi, sin m phi) times Legendre polynomials to degree K in the normalised
  height, (2M + 1)(K + 1) coefficients. Fourier because the side is periodic in phi (ovality is m = 2,
  lobing m = 3, an off-axis part m = 1); Legendre because z / H spans [-1, 1] (taper is k = 1, barrel k = 2);
- each end face's height z = h(x, y) = sum b_ij P_i(x / R) P_j(y / R), i + j <= M: plain 2-D Legendre
  to total degree M (the side's angular order, so that face and side resolve the same azimuthal
  orders at their common edge; tilt is degree 1, a dished face 2). Low-degree Legendre products are
  well conditioned over the inscribed disc; no orthogonality on the disc is needed for least squares.
`fit_degree = [M, K]` sets the degrees (one whole number sets both); without it, the largest M = K up to
DEFAULT_MAX_DEGREE with at least four points per coefficient on every surface.

The body is the polyhedron through the fitted surfaces (`cylinder_polyhedron`): rings of N_phi points at
N_z + 1 heights on the side between the edges (where the side meets each face, solved by fixed-point
iteration), and N_r rings plus a centre on each face, sharing the edge vertices (watertight by
construction). Its x, y are scaled by one common factor so that its volume equals the fitted surface's
(the chord deficit lies in phi; scaling x and y by s scales the volume by s^2 exactly). The fitted
volume is the Romberg extrapolation of the unscaled polyhedra at one, two and four times the coarse
resolution (their volumes run in powers of 1 / N^2). The fine resolution FINE is the body, COARSE
(every count halved, chord heights about 4 times larger) its `coarse`: each pair adds its change between
the two to its error estimate (integrate/tessellation.py). Lengths in metres once loaded.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np

from truepull.geometry.errors import InputError

DEFAULT_MAX_DEGREE = 4
MAX_DEGREE = 12
POINTS_PER_COEFFICIENT = 4
MAX_CONDITION = 1e6
FINE = (128, 16, 8)
"""(N_phi, N_z, N_r) of the body: 2 N_phi N_z side and 2 N_phi (2 N_r - 1) face triangles (7936)."""
COARSE = (64, 8, 4)
EDGE_ITERATIONS = 8
SURFACES = ("side", "top", "bottom")


@dataclass(frozen=True)
class CylinderPoints:
    """The points of a measured cylinder (m, file frame) on each surface, and the nominal R and H (m)."""

    file: str
    side: np.ndarray
    top: np.ndarray
    bottom: np.ndarray
    radius: float
    half_length: float


@dataclass(frozen=True)
class CylinderFit:
    """Least-squares fit of a measured cylinder: side order M in phi and degree K in z, faces total degree M.
    `coefficients` = side (a_mk, column m-major: T_0 P_0..P_K, cos1 P_0.., sin1 P_0.., ...), then top and
    bottom (b_ij, i + j <= M, in `face_terms` order), m; `covariance` block-diagonal over the three
    independent fits (m^2); rms, max_residual and n_points per surface (SURFACES order); `radius`
    and `half_length` (m) normalise z / H and x / R."""

    order: int
    degree: int
    radius: float
    half_length: float
    coefficients: np.ndarray
    covariance: np.ndarray
    rms: tuple
    max_residual: tuple
    n_points: tuple

    @property
    def sizes(self) -> tuple[int, int, int]:
        n_face = len(face_terms(self.order))
        return ((2 * self.order + 1) * (self.degree + 1), n_face, n_face)

    def parts(self, coefficients=None) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        c = self.coefficients if coefficients is None else np.asarray(coefficients, float)
        a, b, _ = self.sizes
        return c[:a], c[a:a + b], c[a + b:]

    def side_radius(self, phi, z, coefficients=None) -> np.ndarray:
        """Fitted side radius (m) at azimuths phi (rad) and heights z (m)."""
        return side_basis(self.order, self.degree, phi, np.asarray(z) / self.half_length) @ self.parts(coefficients)[0]

    def face_height(self, surface: str, x, y, coefficients=None) -> np.ndarray:
        """Fitted height z (m) of the 'top' or 'bottom' face at x, y (m)."""
        c = self.parts(coefficients)[1 if surface == "top" else 2]
        return face_basis(self.order, np.asarray(x) / self.radius, np.asarray(y) / self.radius) @ c

    def coefficient(self, surface: str, i: int) -> tuple[float, float]:
        """(value, standard uncertainty) of coefficient i of `surface` (m)."""
        a, b, _ = self.sizes
        j = i + {"side": 0, "top": a, "bottom": a + b}[surface]
        return float(self.coefficients[j]), float(math.sqrt(self.covariance[j, j]))

    def polyhedron(self, coefficients=None, fine: bool = True) -> tuple[np.ndarray, np.ndarray]:
        """(vertices (V, 3) m, faces (F, 3)) of the volume-matched body for `coefficients` (default the
        fitted ones) at FINE (else COARSE): the function that rebuilds the body from given coefficients."""
        fit = self if coefficients is None else replace(self, coefficients=np.asarray(coefficients, float))
        return fit.matched(FINE if fine else COARSE)[:2]

    def net(self, coefficients=None, fine: bool = True) -> tuple[np.ndarray, np.ndarray]:
        """(vertices (V, 3) m, faces (F, 3)) through the surfaces of `coefficients` (default the fitted ones) at
        FINE (else COARSE), not volume-matched (the layer geometry of integrate/balance/form_modes.py)."""
        fit = self if coefficients is None else replace(self, coefficients=np.asarray(coefficients, float))
        return cylinder_polyhedron(fit, FINE if fine else COARSE)[:2]

    def volume(self) -> tuple[float, float]:
        """(fitted volume (m^3) by Romberg extrapolation of the polyhedra (module docstring), its
        standard uncertainty from the fit to first order: dV/da = integral of r B dphi dz on the side,
        dV/db = +-integral of B dx dy over the disc of radius R on the faces)."""
        return fitted_volume(self), float(math.sqrt(max(self.volume_gradient() @ self.covariance @ self.volume_gradient(), 0.0)))

    def volume_gradient(self) -> np.ndarray:
        """dV/dc (m^2) for every coefficient, by Gauss-Legendre in z (and radius) times the trapezoid rule in phi."""
        n = 4 * (self.order + self.degree) + 8
        x, w = np.polynomial.legendre.leggauss(n)
        phi = 2.0 * math.pi * np.arange(2 * n) / (2 * n)
        P, Z = np.meshgrid(phi, x, indexing="ij")
        W = np.outer(np.full(2 * n, 2.0 * math.pi / (2 * n)), w * self.half_length).ravel()
        B = side_basis(self.order, self.degree, P.ravel(), Z.ravel())
        r = B @ self.parts()[0]
        side = (W * r) @ B
        s = 0.5 * (x + 1.0)                         # radius fraction on [0, 1]
        P, S = np.meshgrid(phi, s, indexing="ij")
        W = np.outer(np.full(2 * n, 2.0 * math.pi / (2 * n)), 0.5 * w * s * self.radius**2).ravel()
        F = face_basis(self.order, (S * np.cos(P)).ravel(), (S * np.sin(P)).ravel())
        face = W @ F
        return np.concatenate([side, face, -face])

    def matched(self, resolution) -> tuple[np.ndarray, np.ndarray, float]:
        """(vertices, faces, x-y scale) of the polyhedron at `resolution`, volume-matched."""
        v, f, _ = cylinder_polyhedron(self, resolution)
        s = math.sqrt(fitted_volume(self) / mesh_volume(v, f))
        v = v * np.array([s, s, 1.0])
        return v, f, s


def face_terms(order: int) -> list[tuple[int, int]]:
    """(i, j) of the face basis P_i(x) P_j(y), i + j <= order, by total degree."""
    return [(i, d - i) for d in range(order + 1) for i in range(d, -1, -1)]


def side_basis(order: int, degree: int, phi, zeta) -> np.ndarray:
    """(N, (2M+1)(K+1)) side basis T_m(phi) P_k(zeta): T_0 = 1, then cos m phi and sin m phi for m = 1..M."""
    phi = np.ravel(phi)
    L = np.polynomial.legendre.legvander(np.ravel(zeta), degree)
    cols = [np.ones_like(phi)]
    for m in range(1, order + 1):
        cols += [np.cos(m * phi), np.sin(m * phi)]
    return np.concatenate([t[:, None] * L for t in cols], axis=1)


def face_basis(order: int, x, y) -> np.ndarray:
    """(N, (M+1)(M+2)/2) face basis P_i(x) P_j(y), i + j <= M, at normalised x, y."""
    V = np.polynomial.legendre.legvander2d(np.ravel(x), np.ravel(y), [order, order])
    return V[:, [i * (order + 1) + j for i, j in face_terms(order)]]


# ------------------------------------------------------------------------------------------------
# points and fit


def split_points(points, file: str, where=None, key=None) -> CylinderPoints:
    """Give each point (N, 3) m to the side or an end face (module docstring); refuse a file short of any."""
    p = np.asarray(points, float)
    rho = np.hypot(p[:, 0], p[:, 1])
    R, H = float(rho.max()), float(np.abs(p[:, 2]).max())
    end = H - np.abs(p[:, 2]) < R - rho
    side, top, bottom = p[~end], p[end & (p[:, 2] > 0)], p[end & (p[:, 2] < 0)]
    name = Path(file).name
    for s, pts in zip(SURFACES, (side, top, bottom)):
        if len(pts) < 4:
            raise InputError(where, key, f"'{name}': a measured cylinder needs points on its side and both end "
                                         f"faces (z > 0 and z < 0 about the file's origin); found {len(pts)} on the {s}")
    return CylinderPoints(file, side, top, bottom, float(np.median(np.hypot(side[:, 0], side[:, 1]))),
                          float(np.median(np.abs(np.concatenate([top[:, 2], bottom[:, 2]])))))


def default_degree(points: CylinderPoints) -> int:
    """The largest M = K <= DEFAULT_MAX_DEGREE with POINTS_PER_COEFFICIENT points per coefficient on every surface."""
    for d in range(DEFAULT_MAX_DEGREE, 0, -1):
        if (len(points.side) >= POINTS_PER_COEFFICIENT * (2 * d + 1) * (d + 1)
                and min(len(points.top), len(points.bottom)) >= POINTS_PER_COEFFICIENT * len(face_terms(d))):
            return d
    return 0


def _lstsq(A, y, name, surface, where, key):
    """(coefficients, covariance s^2 (A^T A)^-1, rms, largest residual) of one surface's fit."""
    n, p = A.shape
    if n <= p:
        raise InputError(where, key, f"'{name}': {n} points on the {surface} cannot fit {p} coefficients; give "
                                     "more points or a lower fit_degree")
    sv = np.linalg.svd(A, compute_uv=False)
    if not sv[-1] > 0 or sv[0] / sv[-1] > MAX_CONDITION:
        raise InputError(where, key, f"'{name}': the points cover the {surface} too thinly for the fit "
                                     f"(condition number {sv[0] / max(sv[-1], 1e-300):.3g}); measure all over it "
                                     "or state a lower fit_degree")
    c, *_ = np.linalg.lstsq(A, y, rcond=None)
    res = y - A @ c
    cov = float(res @ res) / (n - p) * np.linalg.inv(A.T @ A)
    return c, cov, float(math.sqrt(np.mean(res * res))), float(np.max(np.abs(res)))


def fit_cylinder(points: CylinderPoints, degree=None, where=None, key=None) -> CylinderFit:
    """Fit side and faces (module docstring); `degree` None, M (both) or (M, K)."""
    from scipy.linalg import block_diag

    if degree is None:
        M = K = default_degree(points)
    elif np.ndim(degree) == 0:
        M = K = int(degree)
    else:
        M, K = (int(d) for d in degree)
    name = Path(points.file).name
    R, H = points.radius, points.half_length
    s = points.side
    fits = [_lstsq(side_basis(M, K, np.arctan2(s[:, 1], s[:, 0]), s[:, 2] / H), np.hypot(s[:, 0], s[:, 1]),
                   name, "side", where, key)]
    for surface, f in (("top", points.top), ("bottom", points.bottom)):
        fits.append(_lstsq(face_basis(M, f[:, 0] / R, f[:, 1] / R), f[:, 2], name, f"{surface} face", where, key))
    return CylinderFit(M, K, R, H, np.concatenate([f[0] for f in fits]), block_diag(*[f[1] for f in fits]),
                       tuple(f[2] for f in fits), tuple(f[3] for f in fits),
                       (len(points.side), len(points.top), len(points.bottom)))


# ------------------------------------------------------------------------------------------------
# the polyhedron


def edge_heights(fit: CylinderFit, surface: str, phi) -> np.ndarray:
    """z (m) where the side meets the face at azimuths phi: z = h(r(phi, z) cos phi, r(phi, z) sin phi),
    by fixed-point iteration from the face's centre height (the slope of h is small for an end face)."""
    z = np.full(len(phi), float(fit.face_height(surface, 0.0, 0.0)[0]))
    c, s = np.cos(phi), np.sin(phi)
    for _ in range(EDGE_ITERATIONS):
        r = fit.side_radius(phi, z)
        z = fit.face_height(surface, r * c, r * s)
    return z


def cylinder_polyhedron(fit: CylinderFit, resolution) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(vertices (V, 3) m, faces (F, 3) outward-wound, surface index per face (0 side, 1 top, 2 bottom)) of the
    unscaled polyhedron through the fitted surfaces at (N_phi, N_z, N_r) (module docstring)."""
    nphi, nz, nr = (int(n) for n in resolution)
    phi = 2.0 * math.pi * np.arange(nphi) / nphi
    zb, zt = edge_heights(fit, "bottom", phi), edge_heights(fit, "top", phi)
    t = np.arange(nz + 1)[:, None] / nz
    Z = zb + (zt - zb) * t                                            # (nz + 1, nphi)
    Rr = fit.side_radius(np.broadcast_to(phi, Z.shape), Z).reshape(Z.shape)
    side = np.stack([Rr * np.cos(phi), Rr * np.sin(phi), Z], axis=-1).reshape(-1, 3)
    verts = [side]
    j = np.arange(nphi)
    jn = (j + 1) % nphi
    grid = lambda i, jj: i * nphi + jj                                # noqa: E731
    faces = []
    for i in range(nz):
        a, b, c, d = grid(i, j), grid(i, jn), grid(i + 1, jn), grid(i + 1, j)
        faces += [np.stack([a, b, c], 1), np.stack([a, c, d], 1)]
    kinds = [np.zeros(2 * nz * nphi, int)]
    base = len(side)
    for k_surface, (surface, rim_row) in enumerate((("top", nz), ("bottom", 0)), start=1):
        rim = side[grid(rim_row, j)]
        rings = []                                                     # index arrays, centre first, rim last
        s = np.arange(1, nr)[:, None, None] / nr
        xy = (s * rim[None, :, :2]).reshape(-1, 2)
        inner = np.column_stack([xy, fit.face_height(surface, xy[:, 0], xy[:, 1])])
        centre = np.array([[0.0, 0.0, float(fit.face_height(surface, 0.0, 0.0)[0])]])
        verts += [centre, inner]
        rings.append(np.full(nphi, base))
        for k in range(nr - 1):
            rings.append(base + 1 + k * nphi + j)
        rings.append(grid(rim_row, j))
        base += 1 + len(inner)
        tri = [np.stack([rings[0], rings[1], rings[1][jn]], 1)]
        for k in range(1, nr):
            p, P = rings[k], rings[k + 1]
            tri += [np.stack([P, P[jn], p[jn]], 1), np.stack([P, p[jn], p], 1)]
        tri = np.concatenate(tri)
        faces.append(tri if surface == "top" else tri[:, ::-1])
        kinds.append(np.full(len(tri), k_surface))
    return np.concatenate(verts), np.concatenate(faces).astype(np.int64), np.concatenate(kinds)


def mesh_volume(vertices, faces) -> float:
    """Signed volume (m^3) of a closed outward-wound triangle mesh (sum of v0 . v1 x v2 / 6)."""
    t = np.asarray(vertices)[np.asarray(faces)]
    return float(np.einsum("ij,ij->i", t[:, 0], np.cross(t[:, 1], t[:, 2])).sum() / 6.0)


def fitted_volume(fit: CylinderFit) -> float:
    """Volume (m^3) inside the fitted surfaces: Romberg extrapolation of the unscaled polyhedra at 1, 2 and 4
    times the coarse resolution (their volumes run in powers of 1 / N^2, as a regular N-gon's area
    pi R^2 (1 - x^2 / 6 + x^4 / 120 - ...), x = 2 pi / N, does), leaving an error ~1/N^6. One Richardson
    step alone left ~x^4 / 480 (about 1e-8 at these counts), common to the fine and coarse bodies and so
    missing from their difference."""
    v = [mesh_volume(*cylinder_polyhedron(fit, tuple(k * n for n in COARSE))[:2]) for k in (1, 2, 4)]
    r1, r2 = (4.0 * v[1] - v[0]) / 3.0, (4.0 * v[2] - v[1]) / 3.0
    return (16.0 * r2 - r1) / 15.0


def chord_height(fit: CylinderFit, vertices, faces, kinds) -> float:
    """Largest gap (m) between the facets and the fitted surfaces, sampled at the vertices, edge midpoints
    and centroids of every facet: radially on the side, in z on the faces. A sampled maximum."""
    t = np.asarray(vertices)[np.asarray(faces)]
    pts = np.concatenate([t, 0.5 * (t + np.roll(t, -1, axis=1)), t.mean(axis=1, keepdims=True)], axis=1)
    out = 0.0
    for k, surface in enumerate(SURFACES):
        p = pts[kinds == k].reshape(-1, 3)
        if surface == "side":
            gap = fit.side_radius(np.arctan2(p[:, 1], p[:, 0]), p[:, 2]) - np.hypot(p[:, 0], p[:, 1])
        else:
            gap = fit.face_height(surface, p[:, 0], p[:, 1]) - p[:, 2]
        out = max(out, float(np.max(np.abs(gap))))
    return out


@dataclass(frozen=True)
class CylinderReport:
    """What the measured cylinder is: the fit, the file, triangle counts, the x-y scale that matched the
    volume, the chord height (m)."""

    file: str
    fit: CylinderFit
    triangles: int
    volume_scale: float
    chord_height: float
    coarse_triangles: int

    def ideal(self, body):
        """The ideal cylinder of the body: uniform, of its density, the fitted mean radius (a_00, times the
        shape's thermal scale), the length
        giving its volume, along its local z through its centre of mass (shapes.Cylinder, band field)."""
        from truepull.geometry.placement import Placement
        from truepull.geometry.shapes import Cylinder

        R = self.fit.coefficients[0] * getattr(body.shape, "scale", 1.0)   # heated: the fit's lengths times s
        return Cylinder(float(R), float(body.volume / (math.pi * R * R))), Placement(body.placement.rotation, body.com)

    def ideal_text(self, shape) -> str:
        return f"the ideal cylinder of equal mass and centre (radius {shape.radius:.6g} m, length {shape.length:.6g} m)"

    def note(self, name: str) -> str:
        f = self.fit
        v, uv = f.volume()
        R, uR = f.coefficient("side", 0)
        K1 = f.degree + 1
        terms = []
        if f.degree >= 1:
            terms.append(("taper dr/dz", f.coefficient("side", 1), 1.0 / f.half_length))
        if f.order >= 2:
            terms.append(("ovality cos 2phi", f.coefficient("side", 3 * K1), 1.0))
            terms.append(("ovality sin 2phi", f.coefficient("side", 4 * K1), 1.0))
        if f.order >= 1:
            for s, idx in (("top", 1), ("bottom", 1)):
                terms.append((f"{s} tilt dz/dx", f.coefficient(s, idx), 1.0 / f.radius))
                terms.append((f"{s} tilt dz/dy", f.coefficient(s, idx + 1), 1.0 / f.radius))
        shown = "; ".join(f"{t} {c[0] * k:+.3g} +- {c[1] * k:.2g}" for t, c, k in terms)
        (rs, rt, rb), (ns, nt, nb) = f.rms, f.n_points
        return (f"'{name}' measured cylinder ({Path(self.file).name}): {ns} side, {nt} top and {nb} bottom points; "
                f"side radius fitted by Fourier order {f.order} in phi times Legendre degree {f.degree} in z, faces by "
                f"2-D Legendre to degree {f.order}; RMS residual side {rs:.3g} m, top {rt:.3g} m, bottom {rb:.3g} m; "
                f"mean radius {R:.9g} +- {uR:.2g} m, fitted volume {v:.9g} +- {uv:.2g} m^3; {shown}; body: polyhedron "
                f"of {self.triangles} triangles through the fitted surfaces, x and y scaled by 1 "
                f"{self.volume_scale - 1:+.3g} to the fitted volume, chord height up to {self.chord_height:.3g} m; each "
                f"pair adds its change against {self.coarse_triangles} triangles to its error estimate")


def fitted_cylinder(points, file: str, degree=None, where=None, key=None):
    """The body of a measured cylinder from its points (N, 3) m: a MeasuredMesh with its coarse and report."""
    from truepull.geometry.measured_form import MeasuredMesh
    from truepull.geometry.shapes import MeshShape

    fit = fit_cylinder(split_points(points, file, where, key), degree, where, key)
    vc, fc, _ = fit.matched(COARSE)
    v, f, scale = fit.matched(FINE)
    kinds = cylinder_polyhedron(fit, FINE)[2]
    if not np.all(np.hypot(v[:, 0], v[:, 1])[np.unique(f[kinds == 0])] > 0):
        raise InputError(where, key, f"'{Path(file).name}': the fitted side radius falls to zero or below; the "
                                     "file's z axis must run along the cylinder")
    report = CylinderReport(file, fit, len(f), scale, chord_height(fit, v, f, kinds), len(fc))
    return MeasuredMesh(v, f, file, False, MeshShape(vc, fc, file), form=report)

