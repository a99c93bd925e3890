"""Multipole moments about the pivot and the interaction they give, as a Fourier series in a turn.

Frame: origin at the pivot, z along the frame axis (x, y completing a right-handed frame by the
shortest rotation taking z to the axis). With the Racah-normalised solid harmonics of
`solid_harmonics` the code keeps
    a_lm = sum over the pendulum of rho R_lm dV     (inner moments, m^l kg)
    b_lm = sum over the attractor of rho I_lm dV    (outer moments, m^(-l-1) kg)
and the interaction energy, valid when every pendulum point is nearer the pivot than every
attractor point, is W = -G sum_{l, m=-l..l} a_lm conj(b_lm).
The moments shown to users are the usual ones with orthonormal Y_lm (Condon-Shortley phase),
    q_lm = integral rho r^l conj(Y_lm) dV,   Q_lm = integral rho r^(-l-1) conj(Y_lm) dV,
so that W = -G sum (4 pi / (2l+1)) conj(q_lm) Q_lm.
Published methods this follows: the inner and outer spherical moments q_lm, Q_lm of the
torsion-balance multipole formalism (C. D'Urso and E. G. Adelberger, "Translation of multipoles for
a 1/r potential", Phys. Rev. D 55, 7970 (1997); E. G. Adelberger, N. A. Collins and C. D. Hoyle,
"Analytic expressions for gravitational inner multipole moments of elementary solids and for the
force between two rectangular solids", Class. Quantum Grav. 23, 125 (2006), arXiv:gr-qc/0512055),
with orthonormal Y_lm in the Condon-Shortley phase exactly as scipy.special.sph_harm_y (the tests pin
the convention to it). Where a paper puts the complex conjugate on the other moment, or uses the
other sign of m, its numbers differ from these by conj or (-1)^m: compare term by term before mixing
values. The internal a_lm, b_lm are the same moments in Racah's normalisation (solid_harmonics).

Turning the attractor by phi about the axis multiplies b_lm by e^{i m phi}, so each term of W goes as
e^{-i m phi}: torque on the pendulum about the axis tau = dW/dphi, stiffness K = d^2 W / dphi^2, and
the force follows from the gradient ladder of the regular harmonics
    d_z R_lm = sqrt((l+m)(l-m)) R_{l-1,m},  (d_x + i d_y) R_lm = sqrt((l-m)(l-m-1)) R_{l-1,m+1},
    (d_x - i d_y) R_lm = -sqrt((l+m)(l+m-1)) R_{l-1,m-1}.

Truncation after degree L is bounded rigorously: the degree-l part of W is at most
G M_p M_a a^l / b^(l+1) for all turns (|P_l| <= 1; M the absolute masses, a the pendulum's reach and
b the attractor's nearest approach to the pivot), it is a trigonometric polynomial of degree l in
the turn, so Bernstein's inequality bounds its first and second derivatives by l and l^2 times
that; the force part by sqrt(2) l G M_p M_a a^(l-1) / b^(l+1). Inner moments are exact (polynomial
integrands, exact rules); outer moments converge spectrally and carry a refinement estimate.
A tessellated part (STEP, measured form) adds its change against the coarser tessellation, pair by
pair as the pair engine does (`multipole_tessellation`).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from truepull.geometry.placement import rotation_z_to
from truepull.integrate import separation
from truepull.integrate.flux_rules import KINDS as SURFACE_KINDS, flux_nodes
from truepull.integrate.multipole_tessellation import is_tessellated, series_change
from truepull.integrate.solid_harmonics import full_m, weighted_sum
from truepull.integrate.volume_rules import body_nodes, node_count, polynomial_orders, rule_kind

EPS = np.finfo(float).eps
POINTLIKE = ("point", "sphere", "shell")
MAX_DEGREE = 80
START_DEGREE = 10
"""Outer-moment rules start exact for polynomials of this degree and grow by half each round."""
MAX_NODES = 4_000_000
"""Largest number of quadrature nodes spent on the outer moments of one body."""


class MultipoleRefused(Exception):
    """The expansion does not apply (or would not converge) here; `reason` says why in plain words."""

    def __init__(self, reason: str):
        self.reason = reason
        super().__init__(reason)


# ------------------------------------------------------------------------------------------------
# the frame and the regions


@dataclass(frozen=True, eq=False)
class ExpansionFrame:
    """Pivot (3,) m and rotation (3, 3) whose columns are the frame's x, y, z (z = the frame axis)."""

    pivot: np.ndarray
    rotation: np.ndarray

    @staticmethod
    def of(pivot, axis) -> "ExpansionFrame":
        return ExpansionFrame(np.asarray(pivot, float).copy(), rotation_z_to(axis))

    def to_frame(self, points) -> np.ndarray:
        return (np.asarray(points, float) - self.pivot) @ self.rotation

    def vector_to_world(self, v) -> np.ndarray:
        return np.asarray(v, float) @ self.rotation.T


@dataclass(frozen=True)
class Separation:
    """Reach of the inner group `inner_radius` (m) and nearest approach of the outer group
    `outer_radius` (m) about the pivot; `ok` when the first is smaller; `reason` otherwise."""

    inner_radius: float
    outer_radius: float
    inner_body: str
    outer_body: str
    by_centres: bool = False
    """True when the radii are those of `inner_reach` and `outer_clearance` (spheres and points by
    their centres) because the actual extents interleave but no turn can make two bodies meet."""

    @property
    def ratio(self) -> float:
        return self.inner_radius / self.outer_radius if self.outer_radius > 0 else math.inf

    @property
    def ok(self) -> bool:
        return self.inner_radius < self.outer_radius

    @property
    def reason(self) -> str:
        if self.ok:
            return ""
        return (f"the regions interleave: '{self.inner_body}' reaches {self.inner_radius:.6g} m from the pivot "
                f"but '{self.outer_body}' comes within {self.outer_radius:.6g} m of it, so no sphere about the "
                "pivot holds the pendulum inside and the attractor outside")


def inner_reach(body, pivot) -> float:
    """The radius (m) within which the body's inner moments live: the farthest point, or for a point,
    sphere or shell the centre's distance (their moments are exactly a point's: a harmonic
    function's mean over a ball or shell is its value at the centre)."""
    if body.shape.kind in POINTLIKE:
        return float(np.linalg.norm(body.com - np.asarray(pivot, float)))
    return separation.farthest(body, pivot)


def outer_clearance(body, pivot) -> float:
    """The radius (m) outside which the body's outer moments live (0 if the body reaches the pivot):
    the nearest point (for a mesh also its convex hull, where its quadrature cells lie), or for a
    point, sphere or shell not containing the pivot the centre's distance (mean-value property)."""
    d = separation.nearest(body, pivot)
    if not d > 0:
        return 0.0
    if body.shape.kind in POINTLIKE:
        return float(np.linalg.norm(body.com - np.asarray(pivot, float)))
    if body.shape.kind == "mesh":
        d = min(d, separation.convex_hull_clearance(body, pivot))
    return float(d)


def regions(test_bodies, source_bodies, pivot, axis=None) -> Separation:
    """How far the test bodies reach from `pivot` and how near the source bodies come, by their
    actual extent (farthest and nearest points; a mesh source also by its convex hull). When the
    reach is the smaller, a sphere about the pivot separates the groups at every turn, so no turn
    can make them overlap. (The truncation bounds then use the sharper radii of `inner_reach` and
    `outer_clearance`, which are never worse.)

    Otherwise, given the turn `axis`: spheres and points act by their centres (a sphere's field
    outside it is a point's, and a harmonic field's mean over a ball is its centre value), so the
    series still holds when the sharper radii separate and no test body can meet a source body at
    any turn about the axis (`never_meet`); the result then has `by_centres` set."""
    reach = [(separation.farthest(b, pivot), b.name) for b in test_bodies]
    clear = []
    for b in source_bodies:
        d = separation.nearest(b, pivot)
        if b.shape.kind == "mesh" and d > 0:
            d = min(d, separation.convex_hull_clearance(b, pivot))
        clear.append((d, b.name))
    a, an = max(reach) if reach else (0.0, "")
    c, cn = min(clear) if clear else (math.inf, "")
    actual = Separation(float(a), float(c), an, cn)
    if actual.ok or axis is None or not test_bodies or not source_bodies:
        return actual
    a, an = max((inner_reach(b, pivot), b.name) for b in test_bodies)
    c, cn = min((outer_clearance(b, pivot), b.name) for b in source_bodies)
    if not a < c:
        return actual
    if not all(never_meet(t, s, pivot, axis) for t in test_bodies for s in source_bodies):
        return actual
    return Separation(float(a), float(c), an, cn, by_centres=True)


def never_meet(body_a, body_b, pivot, axis) -> bool:
    """True when no turn of one body about the axis through `pivot` can make the two overlap (a turn
    keeps each point's height along the axis and distance from it). Any one of these proves it:
    a sphere about the pivot separates them; their heights along the axis do not overlap (support
    functions of the convex hulls); their distances from the axis do not overlap (bounding spheres);
    or the circles their bounding spheres' centres travel on stay farther apart than the two radii
    (the nearest distance of those circles is hypot(rho_a - rho_b, z_a - z_b))."""
    from truepull.geometry.support import support

    if separation.farthest(body_a, pivot) < separation.nearest(body_b, pivot):
        return True
    if separation.farthest(body_b, pivot) < separation.nearest(body_a, pivot):
        return True
    e = np.asarray(axis, float) / np.linalg.norm(axis)
    p = np.asarray(pivot, float)
    (top_a, low_a), (top_b, low_b) = support(body_a, [e, -e]), support(body_b, [e, -e])  # low: -min(e . x)
    if top_a < -low_b or top_b < -low_a:
        return True

    def circle(body):
        """(distance from the axis, height along it, radius) of the bounding sphere about the local origin."""
        c = body.placement.translation - p
        z = float(c @ e)
        return float(np.linalg.norm(c - z * e)), z, body.shape.bounding_radius()

    ra, za, Ra = circle(body_a)
    rb, zb, Rb = circle(body_b)
    if ra + Ra < rb - Rb or rb + Rb < ra - Ra:
        return True
    return math.hypot(ra - rb, za - zb) > Ra + Rb


# ------------------------------------------------------------------------------------------------
# moments of bodies


@dataclass(frozen=True)
class Moments:
    """Racah-normalised moments (m >= 0 stored; (L+1, L+1) complex) with absolute error estimates
    (same shape, real). `kind` is "inner" (a_lm, kg m^l) or "outer" (b_lm, kg m^-(l+1)).
    `parts` holds (|mass| kg, radius m) per body: the reach (inner) or clearance (outer) used for the
    truncation bounds; `reached` False when a tolerance was missed."""

    kind: str
    values: np.ndarray
    errors: np.ndarray
    parts: tuple[tuple[float, float], ...]
    reached: bool = True
    notes: tuple[str, ...] = ()
    per_body: tuple[np.ndarray, ...] = ()
    """Each body's own moments (same layout as `values`), in the group's order, or () if not kept."""

    @property
    def degree(self) -> int:
        return self.values.shape[0] - 1

    @property
    def abs_mass(self) -> float:
        return float(sum(m for m, _ in self.parts))

    @property
    def radius(self) -> float:
        """The group's reach (inner: largest) or clearance (outer: smallest), m."""
        radii = [r for _, r in self.parts]
        if not radii:
            return 0.0 if self.kind == "inner" else math.inf
        return float(max(radii) if self.kind == "inner" else min(radii))

    def truncated(self, L: int) -> "Moments":
        return Moments(self.kind, self.values[:L + 1, :L + 1].copy(), self.errors[:L + 1, :L + 1].copy(),
                       self.parts, self.reached, self.notes, tuple(v[:L + 1, :L + 1] for v in self.per_body))

    def display(self) -> tuple[np.ndarray, np.ndarray]:
        """(q or Q, errors) in the orthonormal-Y_lm convention: (L+1, 2L+1) complex over m = -L..L."""
        L = self.degree
        f = np.sqrt((2 * np.arange(L + 1) + 1) / (4 * np.pi))[:, None]
        full = full_m(self.values)
        err = full_m(self.errors.astype(complex)).real
        err = np.abs(err)
        return f * np.conj(full), f * err


def _surface_inner(body, frame: ExpansionFrame, L: int) -> tuple[np.ndarray, np.ndarray]:
    """Inner moments of a box, cylinder, tube or closed mesh by the divergence theorem: R_lm is
    homogeneous of degree l about the pivot, so its volume integral is a surface integral of
    R_lm (x - pivot).n / (l + 3), integrated exactly by `flux_rules`."""
    X, w = flux_nodes(body, frame.pivot, L)
    acc = weighted_sum(frame.to_frame(X), w, L, False)
    acc = acc / (np.arange(L + 1) + 3.0)[:, None]
    return acc, _rounding(acc, float(np.abs(w).sum()), L, frame, body, inner=True)


def _rounding(values, abs_weight_sum, L, frame, body, inner):
    """A rounding estimate: a few hundred ulps of |weights| times the harmonic's size at the body."""
    r = separation.farthest(body, frame.pivot) if inner else max(separation.nearest(body, frame.pivot), 1e-300)
    l = np.arange(L + 1)[:, None]
    size = abs_weight_sum * (r ** l if inner else r ** (-(l + 1.0)))
    mask = np.arange(L + 1)[None, :] <= np.arange(L + 1)[:, None]
    return np.where(mask, 256 * EPS * size * np.ones((1, L + 1)), 0.0)


def body_inner_moments(body, frame: ExpansionFrame, L: int) -> tuple[np.ndarray, np.ndarray]:
    """(a_lm, error) of one body about the frame: closed forms for point/sphere/shell (a harmonic
    function's mean over a ball or shell is its value at the centre), exact surface rules for boxes,
    cylinders and meshes, exact volume rules otherwise."""
    k = body.shape.kind
    if k in POINTLIKE:
        if body.mass == 0:
            z = np.zeros((L + 1, L + 1), complex)
            return z, np.zeros((L + 1, L + 1))
        c = frame.to_frame(body.com[None, :])
        v = weighted_sum(c, np.array([body.mass]), L, False)
        return v, _rounding(v, abs(body.mass), L, frame, body, True)
    if k in SURFACE_KINDS:
        return _surface_inner(body, frame, L)
    X, w = body_nodes(body, polynomial_orders(rule_kind(body), L))
    v = weighted_sum(frame.to_frame(X), w, L, False)
    return v, _rounding(v, float(np.abs(w).sum()), L, frame, body, True)


def _outer_sizes(body, frame, L):
    """|mass| / d^(l+1): the largest any b_lm of the body can be, d its clearance from the pivot."""
    d = outer_clearance(body, frame.pivot)
    if not d > 0:
        raise MultipoleRefused(f"'{body.name}' reaches the pivot, so it has no outer moments about it")
    return abs(body.mass) / d ** (np.arange(L + 1) + 1.0), d


def body_outer_moments(body, frame: ExpansionFrame, L: int, rtol: float = 1e-12):
    """(b_lm, error, reached) of one body about the frame. Point/sphere/shell: closed form (mean-value
    property; the pivot must be outside the ball). Other shapes: rules of growing order until every
    b_lm changes by less than rtol * |mass| / d^(l+1) (d the clearance) between two orders; the error
    estimate is that change."""
    sizes, d = _outer_sizes(body, frame, L)
    mask = np.arange(L + 1)[None, :] <= np.arange(L + 1)[:, None]
    k = body.shape.kind
    if k in POINTLIKE:
        c = frame.to_frame(body.com[None, :])
        v = weighted_sum(c, np.array([body.mass]), L, True)
        return v, np.where(mask, 256 * EPS * sizes[:, None], 0.0), True
    kind = rule_kind(body)
    base = np.array(polynomial_orders(kind, START_DEGREE), float)
    prev = None
    growth = 1.0
    while True:
        orders = tuple(int(math.ceil(n * growth)) for n in base)
        if node_count(body, orders) > MAX_NODES:
            err = np.abs(prev[0] - prev[1]) if prev is not None and prev[1] is not None else np.full(mask.shape, np.inf)
            v = prev[0] if prev is not None else np.zeros(mask.shape, complex)
            return v, np.where(mask, err + 256 * EPS * sizes[:, None], 0.0), False
        X, w = body_nodes(body, orders)
        v = weighted_sum(frame.to_frame(X), w, L, True)
        if prev is not None:
            diff = np.abs(v - prev[0])
            if np.all(diff <= rtol * sizes[:, None]):
                return v, np.where(mask, diff + 256 * EPS * sizes[:, None], 0.0), True
            prev = (v, prev[0])
        else:
            prev = (v, None)
        growth *= 1.5


def inner_moments(bodies, frame: ExpansionFrame, L: int, keep: bool = False) -> Moments:
    """Summed inner moments of a group of bodies (exact rules); `keep`: each body's own in `per_body`."""
    v = np.zeros((L + 1, L + 1), complex)
    e = np.zeros((L + 1, L + 1))
    each = []
    for b in bodies:
        bv, be = body_inner_moments(b, frame, L)
        v += bv
        e += be
        if keep:
            each.append(bv)
    parts = tuple((abs(float(b.mass)), inner_reach(b, frame.pivot)) for b in bodies)
    return Moments("inner", v, e, parts, per_body=tuple(each))


def outer_moments(bodies, frame: ExpansionFrame, L: int, rtol: float = 1e-12, keep: bool = False) -> Moments:
    """Summed outer moments of a group of bodies (closed forms or converged rules); `keep`: each body's
    own in `per_body`."""
    v = np.zeros((L + 1, L + 1), complex)
    e = np.zeros((L + 1, L + 1))
    reached = True
    notes = []
    each = []
    for b in bodies:
        bv, be, ok = body_outer_moments(b, frame, L, rtol)
        v += bv
        e += be
        if keep:
            each.append(bv)
        if not ok:
            reached = False
            notes.append(f"outer moments of '{b.name}' did not converge to {rtol:g} within {MAX_NODES} nodes")
    parts = tuple((abs(float(b.mass)), outer_clearance(b, frame.pivot)) for b in bodies)
    return Moments("outer", v, e, parts, reached, tuple(notes), tuple(each))


# ------------------------------------------------------------------------------------------------
# truncation bounds


def _tail(x: float, start: int, power: int, shift: int = 0) -> float:
    """sum over l >= start of l^power x^(l - shift), for 0 <= x < 1."""
    if x >= 1.0:
        return math.inf
    if x == 0.0:
        return 0.0 if start - shift > 0 else float(start) ** power
    total = 0.0
    l = start
    while True:
        term = float(l) ** power * x ** (l - shift)
        total += term
        if term < 1e-18 * total or l > start + 200_000:
            break
        l += 1
    return total


@dataclass(frozen=True)
class TruncationBounds:
    """Bounds on what the terms of degree > L add, uniform over the turn (J, N m, N m/rad, N)."""

    energy: float
    torque: float
    stiffness: float
    force: float


def _pair_tails(G, inner_parts, outer_parts, L: int, power: int, shift: int = 0) -> float:
    """sum over body pairs of G |m_i| |m_j| / b_j^(1+shift) * sum_{l > L} l^power (a_i / b_j)^(l - shift)."""
    total = 0.0
    for mi, ai in inner_parts:
        for mj, bj in outer_parts:
            if mi == 0 or mj == 0:
                continue
            if not bj > ai:
                return math.inf
            total += G * mi * mj / bj ** (1 + shift) * _tail(ai / bj, L + 1, power, shift)
    return total


def truncation_bounds(G, inner: Moments, outer: Moments, L: int) -> TruncationBounds:
    """Rigorous bounds on the terms beyond degree L, summed over body pairs (module docstring)."""
    return parts_truncation_bounds(G, inner.parts, outer.parts, L)


def parts_truncation_bounds(G, ip, op, L: int) -> TruncationBounds:
    """`truncation_bounds` from the (|mass| kg, radius m) parts of the inner and outer bodies."""
    return TruncationBounds(energy=_pair_tails(G, ip, op, L, 0), torque=_pair_tails(G, ip, op, L, 1),
                            stiffness=_pair_tails(G, ip, op, L, 2),
                            force=math.sqrt(2.0) * _pair_tails(G, ip, op, L, 1, shift=1))


def degree_for(G, inner_parts, outer_parts, target_torque, max_degree=MAX_DEGREE) -> int | None:
    """The smallest degree whose torque truncation bound is below `target_torque` (N m), or None."""
    for L in range(1, max_degree + 1):
        if _pair_tails(G, inner_parts, outer_parts, L, 1) <= target_torque:
            return L
    return None


# ------------------------------------------------------------------------------------------------
# the series


def _ladder(A: np.ndarray):
    """Gradients of the inner moments: (d_x A, d_y A, d_z A), each (L+1, 2L+1) over m = -L..L."""
    L = A.shape[0] - 1
    dz = np.zeros_like(A)
    dp = np.zeros_like(A)
    dm = np.zeros_like(A)
    for l in range(1, L + 1):
        for m in range(-l, l + 1):
            j = m + L
            if abs(m) <= l - 1:
                dz[l, j] = math.sqrt((l + m) * (l - m)) * A[l - 1, j]
            if abs(m + 1) <= l - 1:
                dp[l, j] = math.sqrt((l - m) * (l - m - 1)) * A[l - 1, j + 1]
            if abs(m - 1) <= l - 1:
                dm[l, j] = -math.sqrt((l + m) * (l + m - 1)) * A[l - 1, j - 1]
    return 0.5 * (dp + dm), (dp - dm) / 2j, dz


def series_coefficients(G, A: np.ndarray, B: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Energy (2L+1,) J and force (3, 2L+1) N (frame axes) coefficients over m = -L..L of inner
    moments A and outer moments B, both (L+1, 2L+1) over m (`full_m`): W(phi) = sum_m E_m e^{-i m phi}."""
    energy_c = -G * np.sum(A * np.conj(B), axis=0)
    force_c = np.array([G * np.sum(g * np.conj(B), axis=0) for g in _ladder(A)])
    return energy_c, force_c


@dataclass(frozen=True, eq=False)
class MultipoleSeries:
    """Interaction of an inner group (pendulum) and an outer group (attractor) as a Fourier series in
    the attractor's turn phi (rad) about the frame axis. Coefficients over m = -L..L.
    Values are for the inner group: torque about the axis, stiffness, force (world axes), energy."""

    G: float
    L: int
    frame: ExpansionFrame
    inner: Moments
    outer: Moments
    energy_c: np.ndarray
    force_c: np.ndarray  # (3, 2L+1), frame axes
    energy_err_c: np.ndarray
    force_err_c: np.ndarray
    bounds: TruncationBounds
    notes: tuple[str, ...] = field(default_factory=tuple)
    tessellation: object = None
    """The tessellation (chord) change of pairs with a tessellated part (`multipole_tessellation.
    SeriesChange`), added to every error estimate; None when no body is tessellated."""

    @staticmethod
    def build(G, frame, inner: Moments, outer: Moments, L: int | None = None,
              tessellation=None) -> "MultipoleSeries":
        L = min(inner.degree, outer.degree) if L is None else L
        A = full_m(inner.truncated(L).values)
        B = full_m(outer.truncated(L).values)
        eA = np.abs(full_m(inner.truncated(L).errors.astype(complex)))
        eB = np.abs(full_m(outer.truncated(L).errors.astype(complex)))
        energy_c, force_c = series_coefficients(G, A, B)
        energy_err = G * np.sum(np.abs(A) * eB + eA * np.abs(B) + eA * eB, axis=0)
        grads = _ladder(A)
        egrads = _ladder(eA.astype(complex))
        force_err = np.array([G * np.sum(np.abs(g) * eB + np.abs(eg) * np.abs(B), axis=0)
                              for g, eg in zip(grads, egrads)])
        # rounding of the sums themselves
        energy_err = energy_err + 64 * EPS * G * np.sum(np.abs(A * B), axis=0)
        bounds = truncation_bounds(G, inner, outer, L)
        if tessellation is not None:  # the coarse pairs' own truncation, for their change
            t = tessellation.tails
            bounds = TruncationBounds(bounds.energy + t["energy"], bounds.torque + t["torque_axis"],
                                      bounds.stiffness + t["stiffness_axis"], bounds.force + t["force"])
        notes = inner.notes + outer.notes + (tessellation.notes if tessellation is not None else ())
        return MultipoleSeries(G, L, frame, inner, outer, energy_c, force_c, energy_err, force_err, bounds, notes,
                               tessellation)

    @property
    def m(self) -> np.ndarray:
        return np.arange(-self.L, self.L + 1)

    def _phase(self, phi) -> np.ndarray:
        phi = np.atleast_1d(np.asarray(phi, float))
        return np.exp(-1j * np.outer(phi, self.m))

    def energy(self, phi) -> np.ndarray:
        return (self._phase(phi) @ self.energy_c).real

    def torque_axis(self, phi) -> np.ndarray:
        return (self._phase(phi) @ (-1j * self.m * self.energy_c)).real

    def stiffness_axis(self, phi) -> np.ndarray:
        return (self._phase(phi) @ (-(self.m ** 2) * self.energy_c)).real

    def force(self, phi) -> np.ndarray:
        """(N, 3) force on the inner group in world axes."""
        f = (self._phase(phi) @ self.force_c.T).real
        return self.frame.vector_to_world(f)

    def errors(self, tessellation: bool = True) -> dict:
        """Absolute error bounds, uniform in phi: truncation bound plus the propagated moment errors,
        plus (if `tessellation`) the tessellation change's bound over every turn."""
        m = np.abs(self.m)
        out = {
            "energy": self.bounds.energy + float(np.sum(self.energy_err_c)),
            "torque_axis": self.bounds.torque + float(np.sum(m * self.energy_err_c)),
            "stiffness_axis": self.bounds.stiffness + float(np.sum(m * m * self.energy_err_c)),
            "force": self.bounds.force + float(np.sqrt(np.sum(np.sum(self.force_err_c, axis=1) ** 2))),
        }
        if tessellation and self.tessellation is not None:
            chord = self.tessellation.uniform()
            out = {k: v + chord[k] for k, v in out.items()}
        return out

    def errors_at(self, phi) -> dict:
        """Error estimates (N,) at each turn phi (rad): the uniform bounds of `errors(False)` plus the
        tessellation change at that turn (summed over the pairs, as the pair engine adds it)."""
        n = len(np.atleast_1d(phi))
        base = {k: np.full(n, v) for k, v in self.errors(tessellation=False).items()}
        if self.tessellation is None:
            return base
        return {k: v + self.tessellation.at(phi)[k] for k, v in base.items()}

    def torque_harmonics(self) -> list[tuple[int, float, float, float]]:
        """The torque about the axis as tau(phi) = sum over m >= 1 of C_m cos(m phi) + S_m sin(m phi)
        (N m; phi the attractor's turn, rad): [(m, C_m, S_m, error of each)], the error being the
        propagated moment errors of that harmonic (the truncation bound `bounds.torque` is shared by
        all, uniform in phi) plus, with a tessellated part, that harmonic's tessellation change."""
        chord = self.tessellation.harmonic_errors() if self.tessellation is not None else np.zeros(self.L)
        out = []
        for m in range(1, self.L + 1):
            c = -1j * m * self.energy_c[self.L + m]  # tau = sum 2 Re(c_m e^{-i m phi}) over m > 0
            err = 2.0 * m * float(self.energy_err_c[self.L + m]) + float(chord[m - 1])
            out.append((m, 2.0 * c.real, 2.0 * c.imag, err))
        return out

    @property
    def reached(self) -> bool:
        return self.inner.reached and self.outer.reached and (self.tessellation is None or self.tessellation.reached)


# ------------------------------------------------------------------------------------------------
# one call for a scene


def interaction_series(test_bodies, source_bodies, pivot, axis, G, rtol=1e-9, degree=None,
                       torque_scale=None) -> MultipoleSeries:
    """The multipole series of test (inner) against source (outer) about the pivot.

    Raises MultipoleRefused when the regions interleave or the series would need more than
    MAX_DEGREE degrees. The degree is `degree`, or the smallest whose rigorous torque truncation bound
    is under rtol * torque_scale (N m; default the point-model size G M_p M_a a / b^2), and the outer
    moments are converged so that their share of the torque error is under the same target."""
    frame = ExpansionFrame.of(pivot, axis)
    if any(getattr(b, "gradient", None) is not None for b in (*test_bodies, *source_bodies)):
        raise MultipoleRefused("a body has a density gradient (its moments are not formed here)")
    sep = regions(test_bodies, source_bodies, frame.pivot, frame.rotation[:, 2])
    if not sep.ok:
        raise MultipoleRefused(sep.reason)
    ip = tuple((abs(float(b.mass)), inner_reach(b, frame.pivot)) for b in test_bodies)
    op = tuple((abs(float(b.mass)), outer_clearance(b, frame.pivot)) for b in source_bodies)
    Mp = float(sum(m for m, _ in ip))
    Ma = float(sum(m for m, _ in op))
    a, b = sep.inner_radius, sep.outer_radius
    if torque_scale is None or not torque_scale > 0:
        torque_scale = G * Mp * Ma * max(a, 1e-300) / b ** 2
    target = rtol * torque_scale
    if degree is None:
        degree = degree_for(G, ip, op, 0.5 * target)
        if degree is None:
            bound = _pair_tails(G, ip, op, MAX_DEGREE, 1)
            raise MultipoleRefused(
                f"the series converges too slowly (pendulum reach / attractor clearance = {a / b:.4f}): "
                f"after degree {MAX_DEGREE} the torque error bound is still {bound:.3g} N m, above the target "
                f"{target:.3g} N m")
    keep = any(map(is_tessellated, (*test_bodies, *source_bodies)))  # per-body moments for the chord change
    inner = inner_moments(test_bodies, frame, degree, keep)
    # outer-moment tolerance: their errors enter the torque through G |m| |a_lm| (per unit of b_lm)
    l = np.arange(degree + 1)
    weight = G * np.sum(np.abs(full_m(inner.values)) * np.abs(np.arange(-degree, degree + 1))[None, :], axis=1)
    size = sum(mj / bj ** (l + 1.0) for mj, bj in op)
    exposure = float(np.sum(weight * size))
    moment_rtol = 0.25 * target / exposure if exposure > 0 else 1e-12
    moment_rtol = min(max(moment_rtol, 1e-15), 1e-6)
    outer = outer_moments(source_bodies, frame, degree, moment_rtol, keep)
    change = series_change(G, frame, test_bodies, source_bodies, inner, outer, degree, moment_rtol)
    return MultipoleSeries.build(G, frame, inner, outer, degree, change)


def moments_table(scene, degree: int, test: str = "pendulum", source: str = "attractor",
                  position=None, rtol: float = 1e-12) -> dict:
    """Moments for display: the inner moments q_lm of `test` and the outer moments Q_lm of `source`
    about the pivot (orthonormal Y_lm, Condon-Shortley phase, z = frame axis), up to `degree`, with
    error estimates, the reach / clearance radii, and whether the expansion is valid here. Outer moments
    are None when a source body reaches the pivot (they do not exist). Where the expansion is valid,
    "series" is the MultipoleSeries of that degree (the torque's Fourier harmonics in the turn)."""
    sc = scene.at_position(position) if position is not None else scene
    frame = ExpansionFrame.of(sc.frame.pivot, sc.frame.axis)
    tb, sb = sc.group(test), sc.group(source)
    sep = regions(tb, sb, frame.pivot, frame.rotation[:, 2])
    keep = any(map(is_tessellated, (*tb, *sb)))
    inner = inner_moments(tb, frame, degree, keep)
    out = {"degree": degree, "test": test, "source": source, "position": sc.position if position else None,
           "pivot": frame.pivot, "axis": frame.rotation[:, 2], "inner_radius": sep.inner_radius,
           "outer_radius": sep.outer_radius, "valid": sep.ok, "reason": sep.reason, "by_centres": sep.by_centres,
           "inner": inner, "outer": None, "outer_reason": ""}
    out["series"] = None
    try:
        out["outer"] = outer_moments(sb, frame, degree, rtol, keep)
    except MultipoleRefused as exc:
        out["outer_reason"] = exc.reason
    if sep.ok and out["outer"] is not None:
        try:
            change = series_change(sc.G.value, frame, tb, sb, inner, out["outer"], degree, rtol)
        except MultipoleRefused as exc:
            out["outer_reason"] = exc.reason
        else:
            out["series"] = MultipoleSeries.build(sc.G.value, frame, inner, out["outer"], degree, change)
    return out
