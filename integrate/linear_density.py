"""The linear part of a body's density: rho1(x) = g . x (kg/m^3), x local, from the reference point.

A body with `density_gradient` is its uniform part (the engine's exact paths) plus this linear part.
Since the interaction is bilinear in the two densities, a pair (A, B) = (A0, B0) + (A1, B0) + (A0, B1)
+ (A1, B1), 0 the uniform and 1 the linear part. The terms with a linear part are volume Gauss
quadratures (`volume_rules`, spheres and shells by the ellipsoid map): the linear part's nodes carry
mass weights rho1 dV and sit in the EXACT field of the other body's uniform part (closed forms with
their gradient tensor for points, spheres, shells, boxes and meshes); for cylinders, cones and
ellipsoids, which have no closed-form gradient, and for the linear-linear term, the other body is
itself a set of volume nodes (a double sum of point pairs). A term of the uniform test body in the
field of the source's linear part is found from the source's side (Newton's third law: force and
torque about the pivot change sign; stiffness and energy are the same).

Each term is evaluated at rules of growing degree (DEGREES) until two successive ones agree within
the term's tolerance; the difference of the last two is its error estimate (plus rounding). The linear
part is small (typically 1e-4 of the body), so its quadrature error is tiny on the pair's total.
Mass properties of the linear part use the degree-3 rule, exact for the cubic integrands.
Units SI: m, kg, kg/m^3, kg/m^4, N, N m, N m/rad, J.
"""

from __future__ import annotations

import numpy as np

from truepull.geometry.placement import Placement
from truepull.geometry.shapes import Ellipsoid

EPS = np.finfo(float).eps
DEGREES = (6, 10, 16, 24, 36, 54, 80)
"""Polynomial degrees of the volume rules tried in turn (each rule is exact to that degree)."""
MAX_PAIRS = 4e7
"""Most node pairs (nodes times source nodes) a double sum may take."""


def _unit_body(shape):
    from truepull.geometry.bodies import Body

    return Body("rule", "rule", shape, Placement.identity(), 1.0)


def local_rule(shape, degree: int):
    """Local nodes (N, 3) m and signed volume weights (N,) m^3, exact for polynomials of `degree`.
    Spheres use the ellipsoid map; a shell is its outer ball minus its inner ball."""
    from truepull.integrate.volume_rules import body_nodes, polynomial_orders, rule_kind

    if shape.kind in ("sphere", "shell"):
        R = shape.radius
        outer = _unit_body(Ellipsoid((R, R, R)))
        X, w = body_nodes(outer, polynomial_orders("ellipsoid", degree))
        ri = getattr(shape, "inner_radius", 0.0)
        if ri > 0:
            Xi, wi = body_nodes(_unit_body(Ellipsoid((ri, ri, ri))), polynomial_orders("ellipsoid", degree))
            X, w = np.vstack([X, Xi]), np.concatenate([w, -wi])
        return X, w
    body = _unit_body(shape)
    return body_nodes(body, polynomial_orders(rule_kind(body), degree))


def linear_moments(shape, gradient):
    """(mass kg, first moment (3,) kg m, M3 (3, 3) kg m^2 = integral of (g.x) x x^T dV) of the linear
    part g . x over the shape, local axes, exact (degree-3 rule)."""
    g = np.asarray(gradient, float)
    X, v = local_rule(shape, 3)
    w = v * (X @ g)
    return float(w.sum()), w @ X, np.einsum("n,ni,nj->ij", w, X, X)


def linear_nodes(body, degree: int):
    """World nodes (N, 3) m and mass weights (N,) kg of the body's linear density part."""
    X, v = local_rule(body.shape, degree)
    return body.placement.apply(X), v * (X @ np.asarray(body.gradient, float))


def uniform_nodes(body, degree: int):
    """World nodes and mass weights (kg) of the body's uniform part (a point body: one node)."""
    if body.shape.kind == "point":
        return body.com[None, :], np.array([body.uniform_mass])
    X, v = local_rule(body.shape, degree)
    return body.placement.apply(X), body.density * v


def response(X, w, U, g, T, pivot, axis) -> np.ndarray:
    """[F (3), torque about pivot (3), stiffness about axis, energy] of point masses w at X in a field
    U (N,), g (N, 3), T (N, 3, 3) (the sum of `pairs.point_response` over the nodes)."""
    r = X - pivot
    wg = w[:, None] * g
    F = wg.sum(axis=0)
    tau = np.cross(r, wg).sum(axis=0)
    exr = np.cross(axis, r)
    k1 = np.cross(exr, g) @ axis
    k2 = np.cross(r, np.einsum("nij,nj->ni", T, exr)) @ axis
    K = -float(np.sum(w * (k1 + k2)))
    return np.concatenate([F, tau, [K, float(np.sum(w * U))]])


def _point_sum(X, Y, wy, G):
    from truepull.integrate.field_point import point_field, point_gradient

    U, g = point_field(X, Y, wy, G)
    return U, g, point_gradient(X, Y, wy, G)


def _in_body_field(X, w, other, degree, pivot, axis, G):
    """(values (8,), field-error bound (8,)) of nodes X, w in the field of `other` (uniform, or the
    linear part when other.has_gradient)."""
    from truepull.integrate.sources import GRADIENT_KINDS, SourceField

    if not other.has_gradient and other.shape.kind in GRADIENT_KINDS:
        src = SourceField(other, G)
        U, g, eU, eg = src.field(X)
        T = src.gradient(X)
        r = np.linalg.norm(X - pivot, axis=1)
        aw = np.abs(w)
        ef = float(aw @ eg)
        e = np.array([ef] * 3 + [float(aw @ (r * eg))] * 3 + [0.0, float(aw @ eU)])
        return response(X, w, U, g, T, pivot, axis), e
    Y, wy = linear_nodes(other, degree) if other.has_gradient else uniform_nodes(other, degree)
    return response(X, w, *_point_sum(X, Y, wy, G), pivot, axis), np.zeros(8)


def _converged(term, tol):
    """Evaluate term(degree) at growing degrees until two agree within tol (8,): (value, error, ok).
    Without agreement the last change is the error estimate and ok is False."""
    done = []
    for deg in DEGREES:
        v, ef = term(deg)
        if v is None:
            break
        done.append((v, ef))
        if len(done) >= 2:
            diff = np.abs(done[-1][0] - done[-2][0])
            if np.all(diff <= tol):
                return v, diff + ef + 256 * EPS * np.abs(v), True
    if len(done) < 2:
        return (done[0][0] if done else np.zeros(8)), np.full(8, np.inf), False
    v, ef = done[-1]
    return v, np.abs(v - done[-2][0]) + ef + 256 * EPS * np.abs(v), False


def _node_count(body, degree) -> int:
    return len(local_rule(body.shape, degree)[1]) if body.shape.kind != "point" else 1


def linear_term(a_lin, b, pivot, axis, G, tol):
    """The interaction on body `a_lin`'s linear part in the field of `b` (its uniform part, or its
    linear part when b.has_gradient): (values (8,), errors (8,), reached)."""
    def term(deg):
        double = b.has_gradient or b.shape.kind not in ("point", "sphere", "shell", "box", "mesh")
        if double and _node_count(a_lin, deg) * _node_count(b, deg) > MAX_PAIRS:
            return None, None
        X, w = linear_nodes(a_lin, deg)
        return _in_body_field(X, w, b, deg, pivot, axis, G)

    return _converged(term, tol)


def swap_sides(values) -> np.ndarray:
    """The other body's values: force and torque (about the pivot) change sign; stiffness, energy not."""
    v = np.array(values, float)
    v[0:6] *= -1.0
    return v


def gradient_pair(test_body, source_body, pivot, axis, G, rtol=1e-9, order=10, tol=None):
    """The pair interaction of two bodies of which one or both have a density gradient: the uniform
    pair by the engine plus the linear terms by volume quadrature (module docstring)."""
    from truepull.integrate.pairs import PairResult, pair_interaction, tolerance_scales

    pivot = np.asarray(pivot, float)
    axis = np.asarray(axis, float) / np.linalg.norm(axis)
    if tol is None:
        tol = rtol * G * tolerance_scales(test_body, source_body, pivot)
    tol = np.asarray(tol, float)
    t0, s0 = test_body.uniform_part(), source_body.uniform_part()
    base = pair_interaction(t0, s0, pivot, axis, G, rtol, order, tol=0.5 * tol)
    values, errors, reached = base.values.copy(), base.errors.copy(), base.reached
    parts = []
    if test_body.has_gradient:
        v, e, ok = linear_term(test_body, s0, pivot, axis, G, tol / 6)
        values, errors, reached = values + v, errors + e, reached and ok
        parts.append(f"linear density of '{test_body.name}'")
    if source_body.has_gradient:
        v, e, ok = linear_term(source_body, t0, pivot, axis, G, tol / 6)
        values, errors, reached = values + swap_sides(v), errors + e, reached and ok
        parts.append(f"linear density of '{source_body.name}'")
    if test_body.has_gradient and source_body.has_gradient:
        v, e, ok = linear_term(test_body, source_body, pivot, axis, G, tol / 6)
        values, errors, reached = values + v, errors + e, reached and ok
    method = base.method + "; plus " + " and ".join(parts) + " by volume Gauss quadrature (two orders)"
    return PairResult(test=test_body.name, source=source_body.name, force=values[0:3], torque=values[3:6],
                      stiffness_axis=float(values[6]), energy=float(values[7]), errors=errors, method=method,
                      reached=bool(reached), evaluations=base.evaluations)


def linear_field(body, points, G, rtol=1e-9):
    """(U (N,), g (N, 3), T (N, 3, 3), eU, eg, eT) of the body's linear density part at world points
    outside it, by volume quadrature at growing degree; errors the change between the last two rules."""
    points = np.ascontiguousarray(points, float).reshape(-1, 3)
    d = np.maximum(np.linalg.norm(points - body.com, axis=1), body.bounding_sphere()[1])
    m = abs(body.mass)
    tol_u, tol_g, tol_t = (rtol * G * m / d ** k for k in (1, 2, 3))
    prev = None
    for deg in DEGREES:
        X, w = linear_nodes(body, deg)
        cur = _point_sum(points, X, w, G)
        if prev is not None:
            eU = np.abs(cur[0] - prev[0])
            eg = np.linalg.norm(cur[1] - prev[1], axis=1)
            eT = np.linalg.norm(cur[2] - prev[2], axis=(1, 2))
            if np.all(eU <= tol_u) and np.all(eg <= tol_g) and np.all(eT <= tol_t):
                break
        prev = cur
    return (*cur, eU + 256 * EPS * np.abs(cur[0]), eg + 256 * EPS * np.linalg.norm(cur[1], axis=1),
            eT + 256 * EPS * np.linalg.norm(cur[2], axis=(1, 2)))

