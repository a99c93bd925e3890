"""Measured form: a ball measured point by point (e.g. on a coordinate-measuring machine) as a body.

A CSV file (header row) holds one measured surface point a row, in one of three column sets:
  x, y, z            surface points (file units) about the file's origin;
  theta, phi, r      directions in degrees (theta from +z, 0..180; phi from +x toward +y) and radii;
  ux, uy, uz, r      unit-vector directions and radii.
Directions and radii are read as the radius function r(u) of a star-shaped body about the file's
origin (which must lie inside it, near its centre). That function is fitted by least squares with real
spherical harmonics, orthonormal on the unit sphere, to degree L (`fit_degree`, else chosen by the
data count: at least four points per coefficient, at most DEFAULT_MAX_DEGREE). The fit states its
RMS residual and the standard uncertainties of its coefficients (s^2 (A^T A)^-1).

The body is the polyhedron through the fitted surface on a geodesic (icosphere) net of directions at
SUBDIVISIONS, with every radius scaled by one common factor so that its volume equals the fitted
surface's (the volume by a quadrature exact for the degree-3L integrand r^3 / 3), so that the
polyhedron's mass is the fitted body's instead of falling short by the chords. The remaining chord
error (facets against the fitted surface) is of the order of the sagitta, which falls fourfold per
subdivision: the same surface one subdivision coarser is the shape's `coarse`, and the engine adds
the change of each pair between the two to the pair's error estimate (integrate/tessellation.py), as
for a tessellated CAD part. The chord height (largest gap between a facet and the fitted surface,
sampled: `chord_height`) is stated beside it. Lengths in metres once loaded.

x, y, z points without `fit_degree` are closed as their convex hull instead (meshes.py).
"""

from __future__ import annotations

import csv
import math
from dataclasses import dataclass, field, replace
from functools import lru_cache
from pathlib import Path

import numpy as np

from truepull.geometry.errors import InputError
from truepull.geometry.shapes import MeshShape

COLUMN_SETS = (("x", "y", "z"), ("theta", "phi", "r"), ("ux", "uy", "uz", "r"))
DEFAULT_MAX_DEGREE = 8
MAX_DEGREE = 40
POINTS_PER_COEFFICIENT = 4
MAX_CONDITION = 1e6
"""A fit whose design matrix is worse conditioned than this is refused (the directions leave part
of the sphere too thinly covered for the degree)."""
SUBDIVISIONS = 5
"""Icosphere subdivisions of the body (20 * 4^5 = 20480 triangles); the coarse shape has one fewer."""
UNIT_TOLERANCE = 1e-3
CHORD_GRID = 16
CHORD_WORST = 64


@dataclass(frozen=True)
class MeasuredPoints:
    """The rows of a measured-form CSV: unit directions (N, 3), radii (N,) in metres, the column set."""

    file: str
    directions: np.ndarray
    radii: np.ndarray
    columns: tuple[str, ...]

    @property
    def points(self) -> np.ndarray:
        return self.directions * self.radii[:, None]


@dataclass(frozen=True)
class FormFit:
    """Least-squares real spherical-harmonic fit of r(u) (m) to `degree`: coefficients (column l^2 + l + m
    of `real_harmonics`), their covariance (m^2), RMS and largest residual (m), point count."""

    degree: int
    coefficients: np.ndarray
    covariance: np.ndarray
    rms: float
    max_residual: float
    n_points: int

    def radius(self, directions) -> np.ndarray:
        """Fitted radius (m) along unit directions (N, 3)."""
        return real_harmonics(self.degree, np.asarray(directions, float)) @ self.coefficients

    def coefficient(self, l: int, m: int) -> tuple[float, float]:
        """(value, standard uncertainty) of the coefficient of Y_lm (m)."""
        i = l * l + l + m
        return float(self.coefficients[i]), float(math.sqrt(self.covariance[i, i]))

    def volume(self) -> tuple[float, float]:
        """(volume enclosed by the fitted surface (m^3), its standard uncertainty from the fit to first
        order): V = integral of r^3 / 3 over the sphere, by Gauss-Legendre in cos(theta) times the
        trapezoid rule in phi, exact for the degree-3L integrand; dV/dc = integral of r^2 Y over the sphere."""
        u, w = sphere_rule(3 * self.degree)
        r = self.radius(u)
        grad = (w * r * r) @ real_harmonics(self.degree, u)
        return float(w @ r**3 / 3.0), float(math.sqrt(max(grad @ self.covariance @ grad, 0.0)))

    def polyhedron(self, coefficients=None, fine: bool = True) -> tuple[np.ndarray, np.ndarray]:
        """(vertices (V, 3) m, faces (F, 3)) of the volume-matched body for `coefficients` (default the
        fitted ones) at SUBDIVISIONS (else one fewer): the function that rebuilds the body from given
        coefficients (as measured_cylinder.CylinderFit.polyhedron)."""
        fit = self if coefficients is None else replace(self, coefficients=np.asarray(coefficients, float))
        return fitted_polyhedron(fit, SUBDIVISIONS if fine else SUBDIVISIONS - 1)[:2]

    def net(self, coefficients=None, fine: bool = True) -> tuple[np.ndarray, np.ndarray]:
        """(vertices (V, 3) m, faces (F, 3)) through the surface of `coefficients` (default the fitted ones) on
        the icosphere net of SUBDIVISIONS - 1 (5120 triangles; else one fewer), not volume-matched: the
        vertices are linear in the coefficients (the layer geometry of integrate/balance/form_modes.py)."""
        c = self.coefficients if coefficients is None else np.asarray(coefficients, float)
        k = SUBDIVISIONS - 1 if fine else SUBDIVISIONS - 2
        u, faces = _icosphere(k)
        return u * (_net_harmonics(self.degree, k) @ c)[:, None], faces


@dataclass(frozen=True)
class FormReport:
    """What the measured form is and how well it is known: the fit, the file, the body's triangle count,
    the common radius scale that matched the volume, the chord height (m), the coarse triangle count."""

    file: str
    fit: FormFit
    triangles: int
    volume_scale: float
    chord_height: float
    coarse_triangles: int

    def ideal(self, body):
        """(shape, placement) of the ideal sphere of the body: uniform, of its volume, at its centre of mass."""
        from truepull.geometry.placement import Placement
        from truepull.geometry.shapes import Sphere

        return Sphere((3.0 * body.volume / (4.0 * math.pi)) ** (1.0 / 3.0)), Placement.shift(body.com)

    def ideal_text(self, shape) -> str:
        return f"the ideal sphere of equal mass and centre (radius {shape.radius:.6g} m)"

    def note(self, name: str) -> str:
        f = self.fit
        c00, u00 = f.coefficient(0, 0)
        k = 1.0 / math.sqrt(4.0 * math.pi)
        v, uv = f.volume()
        terms = sorted(((l, m) for l in range(1, f.degree + 1) for m in range(-l, l + 1)),
                       key=lambda lm: -abs(f.coefficient(*lm)[0]))[:3]
        mean = c00 * k
        largest = ", ".join(f"Y{l},{m} {f.coefficient(l, m)[0] / mean:+.3g} +- {f.coefficient(l, m)[1] / mean:.2g}"
                            for l, m in terms)
        return (f"'{name}' measured form ({Path(self.file).name}): {f.n_points} points, real spherical-harmonic "
                f"fit of the radius to degree {f.degree} ({(f.degree + 1) ** 2} coefficients), RMS residual "
                f"{f.rms:.3g} m (largest {f.max_residual:.3g} m); mean radius {mean:.9g} +- {u00 * k:.2g} m, "
                f"fitted volume {v:.9g} +- {uv:.2g} m^3; largest terms eps_lm in r = R (1 + sum eps_lm Y_lm): "
                f"{largest}; body: polyhedron of {self.triangles} triangles through "
                f"the fitted surface, radii scaled by 1 {self.volume_scale - 1:+.3g} to the fitted volume, chord "
                f"height up to {self.chord_height:.3g} m; each pair adds its change against {self.coarse_triangles} "
                f"triangles to its error estimate")


@dataclass(frozen=True, eq=False)
class MeasuredMesh(MeshShape):
    """A MeshShape made from a measured form; `form` says how (FormReport); `scale` is the factor its lengths
    carry against the form as measured (1 + alpha dT at a temperature other than the material's reference)."""

    form: FormReport | None = field(default=None)
    scale: float = 1.0

    def with_coefficients(self, coefficients) -> "MeasuredMesh":
        """The body rebuilt through the form of other `coefficients` (its fit's layout, m): the fine and
        coarse polyhedra of fit.polyhedron, times this body's `scale`; the report carries the new fit."""
        fit = replace(self.form.fit, coefficients=np.asarray(coefficients, float))
        v, f = fit.polyhedron(fit.coefficients, True)
        vc, fc = fit.polyhedron(fit.coefficients, False)
        coarse = MeshShape(vc * self.scale, fc, self.file)
        return replace(self, vertices=v * self.scale, faces=f, coarse=coarse, form=replace(self.form, fit=fit))


# ------------------------------------------------------------------------------------------------
# reading


def _fail(where, key, name, line, reason):
    raise InputError(where, key, f"'{name}' line {line}: {reason}")


def read_measured(path, file_units_factor: float, where, key) -> MeasuredPoints:
    """Read a measured-form CSV (module docstring); lengths times `file_units_factor` to metres.
    Bad input raises InputError naming the file, the key and the line."""
    path = Path(path)
    name = path.name
    try:
        text = path.read_text(encoding="utf-8-sig")  # a byte-order mark some spreadsheets write is dropped
    except (OSError, UnicodeDecodeError) as exc:
        raise InputError(where, key, f"cannot read '{name}' ({getattr(exc, 'strerror', None) or exc})") from None
    rows = [(i + 1, row) for i, row in enumerate(csv.reader(text.splitlines())) if any(c.strip() for c in row)]
    if not rows:
        raise InputError(where, key, f"'{name}' is empty: expected a header row naming columns x, y, z or "
                                     "theta, phi, r or ux, uy, uz, r")
    head_line, header = rows[0]
    names = [h.strip().lower() for h in header]
    found = [cols for cols in COLUMN_SETS if all(c in names for c in cols)]
    if not found:
        raise InputError(where, key, f"'{name}': expected a CSV of surface points with a header row naming columns "
                                     f"x, y, z (points) or theta, phi, r or ux, uy, uz, r (directions and radii); "
                                     f"found {', '.join(names) or 'none'}")
    if len(found) > 1:
        raise InputError(where, key, f"'{name}': the header names both {', '.join(found[0])} and "
                                     f"{', '.join(found[1])}; keep one set of columns")
    cols = found[0]
    for c in cols:
        if names.count(c) > 1:
            _fail(where, key, name, head_line, f"column '{c}' is named twice")
    index = [names.index(c) for c in cols]
    data = np.empty((len(rows) - 1, len(cols)))
    for k, (line, row) in enumerate(rows[1:]):
        if len(row) != len(names):
            _fail(where, key, name, line, f"{len(row)} fields, the header has {len(names)}")
        for j, (c, i) in enumerate(zip(cols, index)):
            try:
                v = float(row[i])
            except ValueError:
                _fail(where, key, name, line, f"column '{c}' is not a number ('{row[i].strip()}')")
            if not math.isfinite(v):
                _fail(where, key, name, line, f"column '{c}' is not finite ('{row[i].strip()}')")
            data[k, j] = v
    lines = [line for line, _ in rows[1:]]
    if cols == ("x", "y", "z"):
        p = data * file_units_factor
        r = np.linalg.norm(p, axis=1)
        bad = np.flatnonzero(~(r > 0))
        if len(bad):
            _fail(where, key, name, lines[bad[0]], "the point lies at the file's origin (no direction)")
        u = p / r[:, None]
    elif cols == ("theta", "phi", "r"):
        t, f, r = np.radians(data[:, 0]), np.radians(data[:, 1]), data[:, 2] * file_units_factor
        bad = np.flatnonzero((data[:, 0] < 0) | (data[:, 0] > 180))
        if len(bad):
            _fail(where, key, name, lines[bad[0]], f"theta {data[bad[0], 0]:g} deg lies outside 0..180")
        u = np.stack([np.sin(t) * np.cos(f), np.sin(t) * np.sin(f), np.cos(t)], axis=1)
    else:
        u, r = data[:, :3], data[:, 3] * file_units_factor
        n = np.linalg.norm(u, axis=1)
        bad = np.flatnonzero(np.abs(n - 1.0) > UNIT_TOLERANCE)
        if len(bad):
            _fail(where, key, name, lines[bad[0]], f"ux, uy, uz is not a unit vector (length {n[bad[0]]:.6g})")
        u = u / n[:, None]
    bad = np.flatnonzero(~(r > 0))
    if len(bad):
        _fail(where, key, name, lines[bad[0]], f"the radius must be greater than zero, got {r[bad[0]]:g}")
    if len(r) < 4:
        raise InputError(where, key, f"'{name}': needs four or more surface points, found {len(r)}")
    return MeasuredPoints(str(path), u, r, cols)


# ------------------------------------------------------------------------------------------------
# spherical harmonics and the fit


def _sph_harm(l: int, m: int, theta, phi):
    """Complex orthonormal Y_l^m(theta polar, phi azimuth) by scipy.special (sph_harm_y since scipy 1.15,
    sph_harm before, which takes its arguments in another order)."""
    import scipy.special as sp

    if hasattr(sp, "sph_harm_y"):
        return sp.sph_harm_y(l, m, theta, phi)
    return sp.sph_harm(m, l, phi, theta)


def real_harmonics(degree: int, directions) -> np.ndarray:
    """(N, (L+1)^2) real spherical harmonics orthonormal on the unit sphere at unit directions (N, 3),
    column l^2 + l + m for Y_lm: m = 0 Y_l^0; m > 0 sqrt(2) Re Y_l^m; m < 0 sqrt(2) Im Y_l^|m|."""
    u = np.asarray(directions, float).reshape(-1, 3)
    theta = np.arccos(np.clip(u[:, 2], -1.0, 1.0))
    phi = np.arctan2(u[:, 1], u[:, 0])
    out = np.empty((len(u), (degree + 1) ** 2))
    for l in range(degree + 1):
        out[:, l * l + l] = _sph_harm(l, 0, theta, phi).real
        for m in range(1, l + 1):
            y = _sph_harm(l, m, theta, phi)
            out[:, l * l + l + m] = math.sqrt(2.0) * y.real
            out[:, l * l + l - m] = math.sqrt(2.0) * y.imag
    return out


def sphere_rule(degree: int) -> tuple[np.ndarray, np.ndarray]:
    """(directions (n, 3), weights (n,)) integrating polynomials of degree <= `degree` on the unit sphere
    exactly: Gauss-Legendre in cos(theta) times the trapezoid rule in phi."""
    nt = degree // 2 + 1
    nf = degree + 1
    z, wz = np.polynomial.legendre.leggauss(nt)
    f = 2.0 * math.pi * np.arange(nf) / nf
    s = np.sqrt(1.0 - z * z)
    u = np.stack([np.outer(s, np.cos(f)), np.outer(s, np.sin(f)), np.outer(z, np.ones(nf))], axis=-1).reshape(-1, 3)
    return u, np.repeat(wz, nf) * (2.0 * math.pi / nf)


def default_degree(n_points: int) -> int:
    """The largest L with at least POINTS_PER_COEFFICIENT points per coefficient ((L+1)^2), at most
    DEFAULT_MAX_DEGREE."""
    return int(max(0, min(DEFAULT_MAX_DEGREE, math.isqrt(n_points // POINTS_PER_COEFFICIENT) - 1)))


def fit_form(points: MeasuredPoints, degree: int | None, where=None, key=None) -> FormFit:
    """Least-squares fit (numpy.linalg.lstsq) of the radii by real spherical harmonics to `degree`
    (None: default_degree). Refused when the points are too few or the directions cover the sphere
    too thinly for the degree."""
    name = Path(points.file).name
    n = len(points.radii)
    L = default_degree(n) if degree is None else int(degree)
    p = (L + 1) ** 2
    if n <= p:
        raise InputError(where, key, f"'{name}': {n} points cannot fit degree {L} ({p} coefficients); give more "
                                     "points or a lower fit_degree")
    A = real_harmonics(L, points.directions)
    sv = np.linalg.svd(A, compute_uv=False)
    if not sv[-1] > 0 or sv[0] / sv[-1] > MAX_CONDITION:
        raise InputError(where, key, f"'{name}': the directions cover the sphere too thinly for a fit to degree {L} "
                                     f"(condition number {sv[0] / max(sv[-1], 1e-300):.3g}); measure all round "
                                     "the ball or state a lower fit_degree")
    c, *_ = np.linalg.lstsq(A, points.radii, rcond=None)
    res = points.radii - A @ c
    s2 = float(res @ res) / (n - p)
    cov = s2 * np.linalg.inv(A.T @ A)
    return FormFit(L, c, cov, float(math.sqrt(np.mean(res * res))), float(np.max(np.abs(res))), n)


# ------------------------------------------------------------------------------------------------
# the polyhedron


@lru_cache(maxsize=4)
def _icosphere(subdivisions: int) -> tuple[np.ndarray, np.ndarray]:
    """(unit directions (V, 3), faces (F, 3)) of the icosphere net (trimesh.creation.icosphere), read-only."""
    import trimesh

    net = trimesh.creation.icosphere(subdivisions=subdivisions, radius=1.0)
    u = np.asarray(net.vertices, float)
    u /= np.linalg.norm(u, axis=1)[:, None]
    faces = np.asarray(net.faces, np.int64)
    u.setflags(write=False)
    faces.setflags(write=False)
    return u, faces


@lru_cache(maxsize=8)
def _net_harmonics(degree: int, subdivisions: int) -> np.ndarray:
    """real_harmonics at the icosphere net's vertices (read-only; FormFit.net evaluates it many times)."""
    Y = real_harmonics(degree, _icosphere(subdivisions)[0])
    Y.setflags(write=False)
    return Y


def fitted_polyhedron(fit: FormFit, subdivisions: int) -> tuple[np.ndarray, np.ndarray, float]:
    """(vertices (V, 3) m, faces (F, 3), radius scale) of the polyhedron through the fitted surface on the
    icosphere net (trimesh.creation.icosphere), radii scaled so that its volume is the fitted volume."""
    import trimesh

    u, faces = _icosphere(subdivisions)
    v = u * fit.radius(u)[:, None]
    volume = abs(float(trimesh.Trimesh(vertices=v, faces=faces, process=False).volume))
    scale = (fit.volume()[0] / volume) ** (1.0 / 3.0)
    return v * scale, faces, float(scale)


def chord_height(fit: FormFit, vertices, faces, worst: int = CHORD_WORST, n: int = CHORD_GRID) -> float:
    """Largest distance (m) along the radial direction between the facets and the fitted surface: at
    every vertex and facet centroid, and on a barycentric grid of spacing 1/n over the `worst` facets
    (those with the largest gap at the centroid). A sampled maximum, so at most the true one."""
    v = np.asarray(vertices, float)
    tri = v[np.asarray(faces)]

    def gaps(pts):
        r = np.linalg.norm(pts, axis=1)
        return np.abs(fit.radius(pts / r[:, None]) - r)

    at_centroid = gaps(tri.mean(axis=1))
    ij = [(i, j) for i in range(n + 1) for j in range(n + 1 - i)]
    bary = np.array([(i / n, j / n, 1.0 - (i + j) / n) for i, j in ij])
    pick = np.argsort(at_centroid)[-worst:]
    fine = gaps(np.einsum("bk,fkj->fbj", bary, tri[pick]).reshape(-1, 3))
    return float(max(np.max(gaps(v)), np.max(at_centroid), np.max(fine)))


def fitted_shape(points: MeasuredPoints, degree: int | None, where=None, key=None,
                 subdivisions: int = SUBDIVISIONS) -> MeasuredMesh:
    """The body of a measured form: the fitted polyhedron, its coarse (one subdivision fewer), its report."""
    fit = fit_form(points, degree, where, key)
    name = Path(points.file).name
    meshes = []
    for k in (subdivisions - 1, subdivisions):
        v, f, scale = fitted_polyhedron(fit, k)
        if not np.all(np.linalg.norm(v, axis=1) > 0) or np.any(fit.radius(v / np.linalg.norm(v, axis=1)[:, None]) <= 0):
            raise InputError(where, key, f"'{name}': the fitted radius falls to zero or below somewhere; the file's "
                                         "origin must lie inside the measured body, near its centre")
        meshes.append((v, f, scale))
    (vc, fc, _), (v, f, scale) = meshes
    coarse = MeshShape(vc, fc, points.file)
    report = FormReport(points.file, fit, len(f), scale, chord_height(fit, v, f), len(fc))
    return MeasuredMesh(v, f, points.file, False, coarse, form=report)


def measured_form_notes(scene) -> list[str]:
    """One line per measured-form body of the scene (for `check`)."""
    out = []
    for b in scene.bodies:
        form = getattr(b.shape, "form", None)
        if form is not None:
            scale = getattr(b.shape, "scale", 1.0)
            heated = "" if scale == 1.0 else (f"; at the scene's temperature every length of the body is {scale:.9g} "
                                              "times the form as measured (thermal expansion)")
            out.append(form.note(b.name) + heated)
    return out
