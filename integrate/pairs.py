"""Force, torque, stiffness and energy between one test body and one source body.

The way is chosen by the pair (published shortcuts first):
- both point-like (point, sphere, shell): Newton with the shell theorem, exact;
- one point-like and the other a box or mesh: the point-like body feels m g(centre) and no torque about
  its centre (mean-value property), with g and its gradient from the other's closed form, so the pair is
  exact at one point;
- one point-like otherwise: it becomes the source (its field is a point's, exactly) and the other body
  is integrated over its surface;
- when the roles are swapped, by Newton's third law and rotational invariance the test body's force and
  torque are minus those found, its stiffness and the energy the same;
- otherwise the body with the more exact field is the source (ellipsoid, box and mesh have closed forms;
  cylinders, tubes and cones the semi-analytic band field) and the other is integrated over its surface.
Results are for the TEST body; torque about the pivot; stiffness -d(torque . e)/d(theta) for a
right-handed turn theta of the test body about the frame axis e.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
from numba import njit

from truepull.geometry.errors import InputError
from truepull.integrate.field_band import band_field, band_values
from truepull.integrate.field_point import newton_into
from truepull.integrate.field_prism import at_point_into
from truepull.integrate.pair_cache import body_com, body_mass, body_sphere, per_body
from truepull.integrate.patches import BAND, body_patches
from truepull.integrate.point_response import (point_response, point_response_errors, response_errors_into,
                                              response_into)
from truepull.integrate.sources import (CLOSED_FORM_KINDS, CLOSED_FORM_RTOL, GRADIENT_KINDS, POINTLIKE_KINDS,
                                       SourceField)
from truepull.integrate.surface_quadrature import field_tolerances, integrate_surface
from truepull.integrate.threads import PARALLEL_MIN_WORK, kernel_threads

EPS = np.finfo(float).eps

SOURCE_PREFERENCE = ("point", "sphere", "shell", "ellipsoid", "box", "mesh", "cylinder", "cone")
"""Which body of a pair acts as the source: the one whose field is cheapest and most exact (closed forms
first, then the semi-analytic band field); the other is integrated over its surface."""


@dataclass(frozen=True)
class PairResult:
    """One pair's result for the test body (SI): force (N), torque about the pivot (N m), stiffness
    about the axis (N m / rad), energy (J); `errors` are absolute estimates of the same eight numbers
    [Fx, Fy, Fz, tx, ty, tz, K, E]; `reached` is False when the tolerance could not be met;
    `rounding` (8,) is the part of `errors` that refinement cannot reduce (rounding bounds), None when
    not known."""

    test: str
    source: str
    force: np.ndarray
    torque: np.ndarray
    stiffness_axis: float
    energy: float
    errors: np.ndarray
    method: str
    reached: bool
    evaluations: int = 0
    rounding: np.ndarray | None = None

    def torque_axis(self, axis) -> float:
        return float(np.dot(self.torque, axis))

    @cached_property
    def values(self) -> np.ndarray:
        """[F, torque, K, E] (8,), read-only (formed once: results are kept and summed many times)."""
        v = np.concatenate([self.force, self.torque, [self.stiffness_axis, self.energy]])
        v.setflags(write=False)
        return v


def _inside_cavity(pointlike, other) -> bool:
    """True when `other` sits in the cavity of the shell `pointlike` (then the shortcut does not apply)."""
    return pointlike.shape.kind == "shell" and _cavity_holds(pointlike, other)


def _cavity_holds(shell_body, other_body) -> bool:
    """True when `other_body` lies wholly inside the cavity of the shell `shell_body`."""
    c, r = other_body.bounding_sphere()
    return np.linalg.norm(c - shell_body.com) + r <= shell_body.shape.inner_radius


def tolerance_scales(test_body, source_body, pivot) -> np.ndarray:
    """Point-model sizes of the eight quantities, used to turn a relative tolerance into absolute ones
    (one pair of `tolerance_scale_table`)."""
    return tolerance_scale_table([test_body], [source_body], pivot)[0, 0]


def tolerance_scale_table(test_bodies, source_bodies, pivot) -> np.ndarray:
    """tolerance_scales of every pair (n_test, n_source, 8), per G: |m_t m_s| / d^2 for the force, times
    the larger lever (bounding sphere's reach from the pivot) for torque and stiffness, |m_t m_s| / d for
    the energy; d the distance of the centres of mass, at least half the bounding radii's sum."""
    ct, rt, mt, kt = _sphere_arrays(test_bodies)
    cs, rs, ms, ks = _sphere_arrays(source_bodies)
    return _scale_kernel(ct, rt, mt, kt, cs, rs, ms, ks, np.asarray(pivot, float).reshape(3))


def _sphere_arrays(bodies):
    """(bounding-sphere centres (n, 3), radii (n,), masses (n,), centres of mass (n, 3))."""
    spheres = [body_sphere(b) for b in bodies]
    centres = np.array([c for c, _ in spheres], float).reshape(-1, 3)
    coms = np.array([body_com(b) for b in bodies], float).reshape(-1, 3)
    return centres, np.array([r for _, r in spheres], float), np.array([body_mass(b) for b in bodies], float), coms


@njit(cache=True)
def _scale_kernel(ct, rt, mt, kt, cs, rs, ms, ks, pivot):
    out = np.empty((ct.shape[0], cs.shape[0], 8))
    for i in range(ct.shape[0]):
        reach_t = np.sqrt(np.sum((ct[i] - pivot) ** 2)) + rt[i]
        for j in range(cs.shape[0]):
            mm = abs(mt[i] * ms[j])
            d = max(np.sqrt(np.sum((kt[i] - ks[j]) ** 2)), 0.5 * (rt[i] + rs[j]), 1e-300)
            sF = mm / d ** 2
            lever = max(reach_t, np.sqrt(np.sum((cs[j] - pivot) ** 2)) + rs[j])
            sT = sF * lever
            out[i, j, 0:3] = sF
            out[i, j, 3:7] = sT
            out[i, j, 7] = mm / d
    return out


ORDERS = ((1e-6, 8), (0.0, 10))
"""Gauss order of the surface cells by relative tolerance: the first (rtol floor, order) with
rtol >= floor. Measured on the drums-like scene (tests/benchmarks/bench_goals.py): order 8 (rules 6
and 4 beside it) is the cheapest from 1e-3 down to 1e-6, order 10 (rules 8 and 6) at 1e-7 and
tighter; order 6 needs far more cells than it saves."""


def order_for(rtol: float) -> int:
    """Surface Gauss order for the relative tolerance `rtol` (see ORDERS)."""
    return next(order for floor, order in ORDERS if rtol >= floor)


def pair_interaction(test_body, source_body, pivot, axis, G, rtol=1e-9, order=None, tol=None) -> PairResult:
    """The exact interaction of two non-overlapping uniform bodies (see the module docstring).
    `tol` (8,), absolute tolerances on [F, torque, K, E], overrides rtol times the pair's point scale;
    `order`, the surface cells' Gauss order, defaults to `order_for(rtol)`.
    Its kernels run on one thread while the machine's cores are busy (`threads`). A body with a
    density gradient goes to `linear_density.gradient_pair` (uniform parts here, plus the linear
    parts by volume quadrature); a tessellated CAD part to `tessellation.tessellated_pair`."""
    if getattr(test_body.shape, "coarse", None) is not None or getattr(source_body.shape, "coarse", None) is not None:
        from truepull.integrate.tessellation import tessellated_pair

        return tessellated_pair(test_body, source_body, pivot, axis, G, rtol, order, tol)
    if getattr(test_body, "gradient", None) is not None or getattr(source_body, "gradient", None) is not None:
        from truepull.integrate.linear_density import gradient_pair

        return gradient_pair(test_body, source_body, pivot, axis, G, rtol, order, tol)
    direct = _point_box_route(test_body, source_body, pivot, axis, G)
    if direct is not None:
        return direct
    with kernel_threads(PARALLEL_MIN_WORK):
        return _pair_interaction(test_body, source_body, pivot, axis, G, rtol, order, tol)


def _point_box_route(test_body, source_body, pivot, axis, G) -> PairResult | None:
    """A point-like body (not holding the other in a shell's cavity) paired with a box: `_point_box_pair`
    directly (one-thread numba, nothing to set up), with Newton's third law when the box is the test
    body; two point-like bodies outside each other: `_newton_pair`; None for every other pair."""
    tk, sk = test_body.shape.kind, source_body.shape.kind
    newton = tk in POINTLIKE_KINDS and sk in POINTLIKE_KINDS
    if not (newton or (tk in POINTLIKE_KINDS and sk == "box") or (sk in POINTLIKE_KINDS and tk == "box")):
        return None
    pivot = np.asarray(pivot, float)
    axis = np.asarray(axis, float)
    axis = axis / np.sqrt(axis.dot(axis))
    if newton:
        return _newton_pair(test_body, source_body, pivot, axis, G)
    if sk == "box":
        return None if _inside_cavity(test_body, source_body) else _point_box_pair(test_body, source_body, pivot,
                                                                                  axis, G)
    if _inside_cavity(source_body, test_body):
        return None
    return _third_law(_point_box_pair(source_body, test_body, pivot, axis, G), test_body, source_body)


def _third_law(r, test_body, source_body) -> PairResult:
    """The pair result `r` found for the other body, as felt by `test_body`: force and torque reversed
    (Newton's third law; the torques about one pivot cancel too), stiffness and energy the same."""
    return PairResult(test_body.name, source_body.name, -r.force, -r.torque, r.stiffness_axis, r.energy,
                      r.errors, r.method, r.reached, r.evaluations, r.rounding)


def _pair_interaction(test_body, source_body, pivot, axis, G, rtol, order, tol) -> PairResult:
    if order is None:
        order = order_for(rtol)
    pivot = np.asarray(pivot, float)
    axis = np.asarray(axis, float) / np.linalg.norm(axis)
    tk, sk = test_body.shape.kind, source_body.shape.kind
    if tk in POINTLIKE_KINDS and sk in POINTLIKE_KINDS:
        return _pointlike_pair(test_body, source_body, pivot, axis, G)
    if tk in POINTLIKE_KINDS and sk in GRADIENT_KINDS and not _inside_cavity(test_body, source_body):
        return _pointlike_pair(test_body, source_body, pivot, axis, G)
    if sk in POINTLIKE_KINDS and tk in GRADIENT_KINDS and not _inside_cavity(source_body, test_body):
        return _third_law(_pointlike_pair(source_body, test_body, pivot, axis, G), test_body, source_body)
    swap = SOURCE_PREFERENCE.index(tk) < SOURCE_PREFERENCE.index(sk)
    integ, src = (source_body, test_body) if swap else (test_body, source_body)
    field = SourceField(src, G)
    patches = body_patches(integ)
    centroid = integ.com
    if tol is None:
        tol = rtol * G * tolerance_scales(integ, src, pivot)
    # the relative accuracy the pair needs: its tolerances over its point-model sizes
    pair_rtol = float(np.min(np.asarray(tol, float) / (G * tolerance_scales(integ, src, pivot))))
    tol_u, tol_g = field_tolerances(patches, integ.density, pivot, axis, centroid, tol, order)
    res = integrate_surface(patches, integ.density, _field_function(field, tol_u, tol_g, pair_rtol), pivot, axis,
                            centroid, tol, order=order, distance=field.distance,
                            values=_values_function(field, pair_rtol))
    vals = res.values
    # rounding floor: a few hundred ulps of the magnitude of each result
    floor = 256 * EPS * np.abs(vals)
    errs = res.errors + floor
    inner_ok = getattr(field, "last_ok", True)
    sign = -1.0 if swap else 1.0
    method = f"surface quadrature of {integ.shape.kind} '{integ.name}' in the {field.method} of {src.shape.kind} '{src.name}'"
    return PairResult(
        test=test_body.name, source=source_body.name,
        force=sign * vals[0:3], torque=sign * vals[3:6], stiffness_axis=float(vals[6]),
        energy=float(vals[7]), errors=errs, method=method, reached=bool(res.reached and inner_ok),
        evaluations=res.evaluations, rounding=None if res.rounding is None else res.rounding + floor)


def _field_function(field, tol_u, tol_g, rtol):
    """points -> (U, g, dU, dg, rU, rg) of the source at the tolerances tol_u, tol_g; a body bounded by
    bands alone gets the band field with rules that follow the relative tolerance `rtol`
    (field_band.rung_for; its rule difference goes into the pair's error estimate as before)."""
    if field.kind not in CLOSED_FORM_KINDS and np.all(field.patches().kinds == BAND):
        ps, rho, G = field.patches(), field.body.density, field.G
        return lambda X: band_field(X, ps, rho, G, rtol)
    return lambda X: field.field_with_differences(X, tol_u, tol_g)


def _values_function(field, rtol=None):
    """points -> (U, g) of a box's or mesh's closed form without its rounding bounds (which cost several
    times the values; integrate_surface needs them only at the kept rule's nodes), or of a body bounded
    by bands alone (field_band.band_values: the same bits as _field_function's band field, at the same
    `rtol`, without its low rule and bound); None for others."""
    b = field.body
    if field.kind not in CLOSED_FORM_KINDS and np.all(field.patches().kinds == BAND):
        ps, rho, G = field.patches(), b.density, field.G
        return lambda X: band_values(X, ps, rho, G, rtol)
    if field.kind == "box":
        from truepull.integrate.field_prism import prism_field

        half = 0.5 * np.asarray(b.shape.size, float)
        kernel = lambda local: prism_field(local, half, b.density, field.G)  # noqa: E731
    elif field.kind == "mesh":
        from truepull.integrate.field_polyhedron import polyhedron_field

        kernel = lambda local: polyhedron_field(local, field.poly(), b.density, field.G)  # noqa: E731
    else:
        return None

    def values(points):
        U, gl = kernel(field._local(np.ascontiguousarray(points, float)))
        return U, field._world_field(gl)
    return values


def _pointlike_pair(test_body, source_body, pivot, axis, G) -> PairResult:
    """Sphere/shell/point pairs: exact by Newton and the shell theorem."""
    if test_body.shape.kind == "shell" and _cavity_holds(test_body, source_body):
        z = np.zeros(3)
        return PairResult(test_body.name, source_body.name, z, z.copy(), 0.0, 0.0, np.zeros(8),
                          "shell theorem (source inside the test shell's cavity)", True)
    if source_body.shape.kind == "box":
        return _point_box_pair(test_body, source_body, pivot, axis, G)
    field = SourceField(source_body, G)
    c = test_body.com[None, :]
    # a mesh's field comes with its rounding bounds from one pass, kept for rounding_bounds below
    U, g = field.field(c)[:2]
    T = field.gradient(c)[0]
    if not np.all(np.isfinite(T)):
        _raise_on_edge(test_body, source_body)
    F, tau, K, E = point_response(test_body.mass, test_body.com, U[0], g[0], T, pivot, axis)
    eU, eg, eT = (x[0] for x in field.rounding_bounds(c, U, g, T[None]))
    errs = point_response_errors(test_body.mass, test_body.com, pivot, axis, g[0], T, U[0], eU, eg, eT)
    # a closed form's errors are all rounding: no refinement can reduce them
    return PairResult(test_body.name, source_body.name, F, tau, float(K), float(E), errs,
                      _pointlike_method(test_body, source_body, field.method), True, rounding=errs)


def _pointlike_method(test_body, source_body, field_method) -> str:
    if source_body.shape.kind in POINTLIKE_KINDS:
        return "Newton with the shell theorem (exact)"
    return (f"{field_method} of {source_body.shape.kind} '{source_body.name}' at the centre of "
            f"{test_body.shape.kind} '{test_body.name}' (mean-value property, exact)")


def _point_box_pair(test_body, source_body, pivot, axis, G) -> PairResult:
    """A point-like test body beside (or in) a box: the prism closed form's U, g, T and their bounds at its
    centre, the point response and its bounds, in one numba call (`_point_box_kernel`); the numbers of
    the general point-like route (SourceField, point_response) within rounding, without its set-up."""
    from truepull.integrate.field_prism import checked_half_sizes, point_rule_tables

    pl = source_body.placement
    half = per_body(source_body, "half_sizes", lambda b: checked_half_sizes(0.5 * np.asarray(b.shape.size)))
    out = np.empty(32)
    if not _point_box_kernel(body_mass(test_body), body_com(test_body), pl.rotation, pl.translation, *half,
                             float(source_body.density), float(G), pivot, axis, *point_rule_tables(), out):
        _raise_on_edge(test_body, source_body)
    errs = out[24:32]
    return PairResult(test_body.name, source_body.name, out[16:19], out[19:22], float(out[22]), float(out[23]),
                      errs, _pointlike_method(test_body, source_body, "prism closed form"), True, rounding=errs)


@njit(cache=True)
def _point_box_kernel(mass, centre, rotation, translation, hx, hy, hz, rho, G, pivot, axis, nodes, weights,
                      max_points, out):
    """out (32,): [U, g, T, eU, eg, eT] (16, field_prism.at_point_into) of the box at the centre, then the
    point response [F, torque, K, E] (8) and its error bounds (8). False when the gradient is not finite
    there (the centre on an edge or corner of the box)."""
    at_point_into(centre, rotation, translation, hx, hy, hz, rho, G, nodes, weights, max_points, out[0:16])
    T = out[4:13].reshape(3, 3)
    response_into(mass, centre, out[0], out[1:4], T, pivot, axis, out[16:24])
    response_errors_into(mass, centre, pivot, axis, out[1:4], T, out[0], out[13], out[14], out[15], out[24:32])
    return np.all(np.isfinite(T))


def _newton_pair(test_body, source_body, pivot, axis, G) -> PairResult | None:
    """Two point-like bodies, the test body's centre outside the source (a point, a sphere, or a shell
    with the centre beyond its outer radius) and no source in a test shell's cavity: Newton's field of
    the source's mass at the centre and the point response, with the bounds of
    SourceField.rounding_bounds for point-like sources, in one numba call (`_newton_kernel`); None
    otherwise (the general route then handles the cavity and the shell's inside)."""
    if test_body.shape.kind == "shell" and _cavity_holds(test_body, source_body):
        return None
    centre, com = body_com(test_body), body_com(source_body)
    if source_body.shape.kind == "shell":
        d = centre - com
        if not d.dot(d) >= source_body.shape.radius ** 2:
            return None
    out = np.empty(16)
    if not _newton_kernel(body_mass(test_body), centre, body_mass(source_body), com,
                          source_body.placement.translation, float(G), pivot, axis, out):
        _raise_on_edge(test_body, source_body)
    errs = out[8:16]
    return PairResult(test_body.name, source_body.name, out[0:3], out[3:6], float(out[6]), float(out[7]), errs,
                      _pointlike_method(test_body, source_body, ""), True, rounding=errs)


@njit(cache=True)
def _newton_kernel(mass, centre, source_mass, source_com, source_translation, G, pivot, axis, out):
    """out (16,): the point response [F, torque, K, E] (8) of `mass` at `centre` in Newton's field of
    `source_mass` at `source_com` (field_point.newton_into), and its error bounds (8) from the point-like
    sources' rounding bounds (SourceField.rounding_bounds): CLOSED_FORM_RTOL of U, |g|, |T| plus the
    frame change's shift of the point through the field's derivatives. False if T is not finite."""
    eps = 2.220446049250313e-16
    g = np.empty(3)
    T = np.empty((3, 3))
    U = newton_into(centre, source_com, G * source_mass, g, T)
    response_into(mass, centre, U, g, T, pivot, axis, out[0:8])
    shift = 4.0 * eps * (max(abs(centre[0]), max(abs(centre[1]), abs(centre[2])))
                         + max(abs(source_translation[0]), max(abs(source_translation[1]), abs(source_translation[2]))))
    gn = np.sqrt(g[0] * g[0] + g[1] * g[1] + g[2] * g[2])
    nT = np.sqrt(np.sum(T * T))
    d0, d1, d2 = centre[0] - source_com[0], centre[1] - source_com[1], centre[2] - source_com[2]
    r = max(np.sqrt(d0 * d0 + d1 * d1 + d2 * d2), 1e-300)
    eU = CLOSED_FORM_RTOL * abs(U) + shift * gn
    eg = CLOSED_FORM_RTOL * gn + shift * nT
    eT = CLOSED_FORM_RTOL * nT + shift * 3.0 * nT / r
    response_errors_into(mass, centre, pivot, axis, g, T, U, eU, eg, eT, out[8:16])
    return np.all(np.isfinite(T))


def _raise_on_edge(test_body, source_body):
    raise InputError(None, f"body[{test_body.name}] / body[{source_body.name}]",
                     f"the centre of '{test_body.name}' lies on an edge or corner of "
                     f"'{source_body.name}', where the gradient of its field (and so the stiffness) "
                     "is infinite; move it off the edge (a point on a face is fine)")
