"""Potential, field and gradient tensor of a group of bodies at many world points, with error bounds.

SI throughout: points m, U J/kg, g = -grad U m/s^2 (toward the masses), T_ij = d g_i / d x_j 1/s^2.
Each body's U and g come from the engine's source fields (`sources.SourceField`), which are closed
forms for points, spheres, shells (shell theorem, valid inside too), boxes (Nagy et al. 2000), meshes
(Werner and Scheeres 1997) and ellipsoids (Carlson integrals), and the band integrals of `field_band`
for cylinders, tubes and cones (valid inside as well: the divergence-theorem surface integrals hold
at any point). The gradient is the closed form for points, spheres, shells, boxes and meshes; for
ellipsoids, cylinders, tubes and cones it is the central difference of the field, Richardson
extrapolated, with steps of 1/200 of the distance to the nearest such surface (so that the stencil
never crosses a surface, where the tensor jumps). Its error estimate is |R(h) - R(2h)| (the
difference of two fourth-order values, about 15 times the error of the finer one) plus the field's
own error amplified by the stencil (1.5 err_g / h).

A point where a body's field method is not defined is refused with an InputError naming the body:
the position of a point mass, or (gradient only, for differenced shapes) a point on the surface.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from truepull.geometry.errors import InputError

DIFFERENCED_KINDS = ("ellipsoid", "cylinder", "cone")
"""Shapes whose gradient tensor is taken by central differences of their field."""

STEP_FRACTION = 5e-3
"""Difference step as a fraction of the distance to the nearest differenced surface."""

LEVELS = (1.0, 2.0, 4.0)
"""Stencil multiples of the step: D(h), D(2h), D(4h) give two Richardson values."""

GRADIENT_RTOL = 2e-13
"""Relative rounding allowed for the closed-form gradients of points, spheres and shells."""


@dataclass(frozen=True, eq=False)
class PointField:
    """Values at `points` (N, 3) m: U (N,), g (N, 3), T (N, 3, 3) and their absolute error estimates
    err_U (N,), err_g (N,) (Euclidean norm), err_T (N,) (Frobenius norm)."""

    source: str
    G: float
    points: np.ndarray
    U: np.ndarray
    g: np.ndarray
    T: np.ndarray
    err_U: np.ndarray
    err_g: np.ndarray
    err_T: np.ndarray


def _as_points(points, file=None, key="points") -> np.ndarray:
    p = np.asarray(points, dtype=float)
    if p.ndim == 1 and p.size == 3:
        p = p.reshape(1, 3)
    if p.ndim != 2 or p.shape[1] != 3 or p.shape[0] == 0:
        raise InputError(file, key, f"expected one or more points of three coordinates, got shape {p.shape}")
    if not np.all(np.isfinite(p)):
        raise InputError(file, key, "a point coordinate is not a finite number")
    return np.ascontiguousarray(p)


def _source_fields(bodies, G):
    from truepull.integrate.sources import SourceField

    return [SourceField(b, G) for b in bodies]


def _body_field(src, points, rtol):
    """(U, g, err_U, err_g) of one body at world points, defined inside as well."""
    b = src.body
    if src.kind == "sphere":
        # the shell theorem's solid sphere (inner radius 0): right inside as well as outside
        from truepull.integrate.field_point import shell_field
        from truepull.integrate.sources import CLOSED_FORM_RTOL

        U, g = shell_field(points, b.com, b.shape.radius, 0.0, b.mass, src.G)
        return U, g, CLOSED_FORM_RTOL * np.abs(U), CLOSED_FORM_RTOL * np.linalg.norm(g, axis=1)
    d = np.maximum(np.linalg.norm(points - b.com, axis=1), b.bounding_sphere()[1])
    tol_u = rtol * src.G * abs(b.mass) / d
    tol_g = rtol * src.G * abs(b.mass) / d ** 2
    return src.field(points, float(tol_u.min()), float(tol_g.min()))


def _coarse_source(src, G):
    """The SourceField of a tessellated part (STEP, measured form) at its coarser tessellation, or None: the
    change between the two is its tessellation (chord) error, as integrate/tessellation.py adds to pairs."""
    from truepull.integrate.tessellation import coarse_body

    body = coarse_body(src.body)
    return None if body is None else _source_fields([body], G)[0]


def _closed_gradient(src, points):
    """(T, err_T) of a point, sphere, shell, box or mesh body from its closed form."""
    from truepull.integrate.field_point import shell_gradient

    b = src.body
    if src.kind == "sphere":
        T = shell_gradient(points, b.com, b.shape.radius, 0.0, b.mass, src.G)
        rel = GRADIENT_RTOL
    else:
        T = src.gradient(points)
        rel = GRADIENT_RTOL
        if src.kind == "box":
            from truepull.integrate.field_prism import prism_error_estimate

            rel = max(rel, prism_error_estimate(0.5 * np.asarray(b.shape.size, float)))
        elif src.kind == "mesh":
            # the polyhedron kernel's rigorous bound (cancellation and the jump on a face included);
            # it depends on T alone, so U and g are not needed (zeros)
            n = len(points)
            return T, src.rounding_bounds(points, np.zeros(n), np.zeros((n, 3)), T)[2]
    # rounding relative to the tensor's size, or to the interior scale 4 pi G |rho| where T cancels
    scale = np.linalg.norm(T, axis=(1, 2)) + 4.0 * np.pi * src.G * abs(b.density)
    return T, 10.0 * rel * scale


def _surface_distance(srcs, points):
    """Smallest |signed distance| (m) from each point to the surface of any of `srcs`, and the index
    of that body."""
    dist = np.full(len(points), np.inf)
    which = np.zeros(len(points), dtype=int)
    for k, s in enumerate(srcs):
        d = np.abs(s.distance(points))
        closer = d < dist
        dist[closer] = d[closer]
        which[closer] = k
    return dist, which


def _differenced_gradient(srcs, points, rtol):
    """(T, err_T) of the summed field of `srcs` by Richardson-extrapolated central differences."""
    n = len(points)
    dist, which = _surface_distance(srcs, points)
    on = dist == 0.0
    if np.any(on):
        i = int(np.flatnonzero(on)[0])
        raise InputError(None, "points", f"point {i + 1} {points[i].tolist()} m lies on the surface of body "
                         f"'{srcs[which[i]].body.name}': the gradient tensor jumps there")
    h = STEP_FRACTION * dist
    levels = np.asarray(LEVELS)
    # stencil: (axis j, level l, sign s) -> points + s * levels[l] * h * e_j
    offs = np.zeros((3, len(levels), 2, n, 3))
    for j in range(3):
        for l, m in enumerate(levels):
            offs[j, l, 0, :, j] = m * h
            offs[j, l, 1, :, j] = -m * h
    stencil = (points[None, None, None] + offs).reshape(-1, 3)
    g = np.zeros((len(stencil), 3))
    eg = np.zeros(len(stencil))
    for s in srcs:
        _, g_s, _, eg_s = _body_field(s, stencil, rtol)
        g += g_s
        eg += eg_s
    g = g.reshape(3, len(levels), 2, n, 3)
    eg = eg.reshape(3, len(levels), 2, n)
    D = (g[:, :, 0] - g[:, :, 1]) / (2.0 * levels[None, :, None, None] * h[None, None, :, None])
    R1 = (4.0 * D[:, 0] - D[:, 1]) / 3.0          # (3 axes j, n, 3 components i), fourth order
    R2 = (4.0 * D[:, 1] - D[:, 2]) / 3.0
    T = np.transpose(R1, (1, 2, 0))               # T[n, i, j] = d g_i / d x_j
    trunc = np.linalg.norm(R1 - R2, axis=(0, 2))
    noise = 1.5 * np.sqrt(np.sum(eg[:, :2].max(axis=(1, 2)) ** 2, axis=0)) / h
    return T, trunc + noise


def _refuse_inside_gradient_body(body, points):
    """InputError for the first point inside (or on) a body with a density gradient: the field of its
    linear density part is a volume quadrature of 1/r, which holds only outside the body."""
    from truepull.geometry.distance import signed_distance

    inside = signed_distance(body.shape, body.to_local(points)) <= 0.0
    if np.any(inside):
        i = int(np.flatnonzero(inside)[0])
        raise InputError(None, "points", f"point {i + 1} {points[i].tolist()} m lies inside or on body "
                         f"'{body.name}', which has a density gradient: its field is computed only outside "
                         "such a body (the uniform density alone is defined inside)")


def group_field_at_points(bodies, points, G, rtol=1e-9, gradient=True, source="group") -> PointField:
    """U, g and (if `gradient`) T of `bodies` (placed Body objects) at world `points` (N, 3) m."""
    points = _as_points(points)
    n = len(points)
    srcs = _source_fields([b.uniform_part() for b in bodies], G)
    U = np.zeros(n)
    g = np.zeros((n, 3))
    T = np.zeros((n, 3, 3))
    eU = np.zeros(n)
    eg = np.zeros(n)
    eT = np.zeros(n)
    differenced = []
    for s in srcs:
        if s.kind == "point":
            hit = np.all(points == s.body.com, axis=1)
            if np.any(hit):
                i = int(np.flatnonzero(hit)[0])
                raise InputError(None, "points", f"point {i + 1} {points[i].tolist()} m is the position of point "
                                 f"mass '{s.body.name}': its field is not defined there")
        u_s, g_s, eu_s, eg_s = _body_field(s, points, rtol)
        bad = ~(np.isfinite(u_s) & np.all(np.isfinite(g_s), axis=1))
        if np.any(bad):
            i = int(np.flatnonzero(bad)[0])
            raise InputError(None, "points", f"point {i + 1} {points[i].tolist()} m: the field of body "
                             f"'{s.body.name}' ({s.method}) is not defined there")
        coarse = _coarse_source(s, G)
        if coarse is not None:      # a tessellated part: its change against the coarser tessellation
            u_c, g_c = _body_field(coarse, points, rtol)[:2]
            eu_s = eu_s + np.abs(u_s - u_c)
            eg_s = eg_s + np.linalg.norm(g_s - g_c, axis=1)
        U += u_s
        g += g_s
        eU += eu_s
        eg += eg_s
        if not gradient:
            continue
        if s.kind in DIFFERENCED_KINDS or not (s.closed_form and s.kind != "ellipsoid"):
            differenced.append(s)
            continue
        T_s, eT_s = _closed_gradient(s, points)
        bad = ~np.all(np.isfinite(T_s), axis=(1, 2))
        if np.any(bad):
            i = int(np.flatnonzero(bad)[0])
            raise InputError(None, "points", f"point {i + 1} {points[i].tolist()} m lies on an edge or vertex of "
                             f"body '{s.body.name}': the gradient tensor is not finite there")
        if coarse is not None:
            eT_s = eT_s + np.linalg.norm(T_s - _closed_gradient(coarse, points)[0], axis=(1, 2))
        T += T_s
        eT += eT_s
    if gradient and differenced:
        T_d, eT_d = _differenced_gradient(differenced, points, rtol)
        T += T_d
        eT += eT_d
    for b in bodies:
        if b.has_gradient:  # the linear density part, by volume quadrature (outside the body)
            from truepull.integrate.linear_density import linear_field

            _refuse_inside_gradient_body(b, points)
            parts = linear_field(b, points, G, rtol)
            U, g, T = U + parts[0], g + parts[1], T + parts[2]
            eU, eg, eT = eU + parts[3], eg + parts[4], eT + parts[5]
    if not gradient:
        T = np.full((n, 3, 3), np.nan)
        eT = np.full(n, np.nan)
    return PointField(source, float(G), points, U, g, T, eU, eg, eT)


def field_at_points(scene, points, source: str = "attractor", position: str | None = None,
                    rtol: float = 1e-9, gradient: bool = True) -> PointField:
    """U, g, T of the scene's group `source` (at [[position]] `position`, if given) at world points
    (N, 3) in metres. rtol: relative tolerance of the adaptive fallback (closed forms ignore it)."""
    placed = scene.at_position(position) if position is not None else scene
    bodies = placed.group(source)
    if not bodies:
        known = ", ".join(scene.groups()) or "none"
        raise InputError(scene.path, "source", f"no body in group '{source}' (groups: {known})")
    return group_field_at_points(bodies, points, float(scene.G.value), rtol, gradient, source)


@dataclass(frozen=True)
class GradientZero:
    """A point on a line where the gradient along the line, d g_u / d s, vanishes: `s` (m, from the
    line's start), `at` (3,) m, `curvature` d^2 g_u / d s^2 (1/(m s^2)) with its error estimate."""

    s: float
    at: np.ndarray
    curvature: float
    err_curvature: float
    err_s: float


def gradient_zeros(bodies, start, end, s_values, T_along, G, rtol=1e-9) -> list[GradientZero]:
    """Zeros of T_uu(s) = u . T . u (u the line's unit direction) between sign changes of the sampled
    values `T_along` at `s_values` (m from `start`), refined by brentq on the field itself; the
    curvature d T_uu / d s there by a Richardson central difference of T_uu. scipy.optimize (about 0.2 s
    to import) is imported only when there is a sign change to refine."""
    start = np.asarray(start, float)
    end = np.asarray(end, float)
    length = float(np.linalg.norm(end - start))
    u = (end - start) / length

    def tuu(s):
        pf = group_field_at_points(bodies, start + np.atleast_1d(s)[:, None] * u, G, rtol)
        return np.einsum("i,nij,j->n", u, pf.T, u), pf.err_T

    out = []
    s_values = np.asarray(s_values, float)
    T_along = np.asarray(T_along, float)
    for k in range(len(s_values) - 1):
        a, b = s_values[k], s_values[k + 1]
        fa, fb = T_along[k], T_along[k + 1]
        if fa == 0.0:
            root = a
        elif fa * fb < 0.0:
            from scipy.optimize import brentq

            root = brentq(lambda s: float(tuu(s)[0][0]), a, b, xtol=1e-15 * max(length, 1.0), rtol=4.0 * np.finfo(float).eps)
        else:
            continue
        h = 1e-3 * (s_values[1] - s_values[0]) if len(s_values) > 1 else 1e-6 * length
        ss = root + h * np.array([-2.0, -1.0, 1.0, 2.0, -4.0, 4.0])
        vals, errs = tuu(ss)
        d1 = (vals[2] - vals[1]) / (2 * h)
        d2 = (vals[3] - vals[0]) / (4 * h)
        d4 = (vals[5] - vals[4]) / (8 * h)
        r1 = (4 * d1 - d2) / 3
        r2 = (4 * d2 - d4) / 3
        err_c = abs(r1 - r2) + 1.5 * float(errs[:4].max()) / h
        # root position error: the tensor's error over the slope
        e_root = float(tuu(root)[1][0]) / abs(r1) if r1 != 0 else np.inf
        out.append(GradientZero(float(root), start + root * u, float(r1), float(err_c), e_root))
    return out
