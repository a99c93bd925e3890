"""Force, torque, stiffness and energy on a uniform test body from its surface alone.

With U and g the source's potential and field on the test body's surface S (outward vector area
element N dA), pivot p, frame axis e, r = x - p and q = x - c (c the test body's centroid), the
divergence theorem gives (U harmonic inside the test body, as no source mass is there):
    F      = -rho * surface integral of U N
    torque = -rho * surface integral of U (r x N)                    (about the pivot)
    K      = -rho * surface integral of (g . (e x r)) (e . (r x N))  (= -d torque_axis / d theta)
    E      = (rho / 3) * surface integral of [U (q . N) + |q|^2 (g . N) / 2]   (interaction energy)
K follows from turning the body by theta about the axis: r x N turns with it, its axial part stays.

The surface is refined adaptively: each cell's Gauss value is compared with rules two and four points
smaller on the same cell; cells whose estimate is within their share (by area) of the tolerance are
kept, the others split in four. Rule differences plus the propagated field differences, the field's
rounding bounds and the sums' rounding form the error estimate.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from truepull.integrate.gauss import gauss_unit
from truepull.integrate.patches import PatchSet, cell_nodes, split_cells

N_QUANTITIES = 8  # F(3), torque(3), stiffness about the axis, energy
EPS = np.finfo(float).eps
ROUNDING_ULPS = 64
MAX_ACTIVE_CELLS = 40_000
"""Refinement stops (and says the tolerance was not reached) rather than grow past this many cells."""
NEAR_RATIO = 1.0
"""A cell whose centre is nearer to the source's surface than NEAR_RATIO times its radius reaches toward
it: there a near-singular integrand can leave all three rules short of their asymptotic range, and the
wider rule difference is taken as the cell's estimate."""


@dataclass(frozen=True)
class SurfaceResult:
    """Totals over the test surface: values (8,), absolute error estimates (8,), reached flag;
    `rounding` (8,) is the part of `errors` that refinement cannot reduce (the field's rounding bounds
    and the sums' rounding)."""

    values: np.ndarray
    errors: np.ndarray
    reached: bool
    evaluations: int
    levels: int
    rounding: np.ndarray | None = None


def _node_values(X, W, U, g, rho, pivot, axis, centroid, magnitude=False):
    """Per-node integrands (M, 8) of the eight quantities, linear in (U, g). With magnitude=True the
    absolute values of the coefficients are used (to carry error magnitudes)."""
    r = X - pivot
    q = X - centroid
    rxW = np.cross(r, W)
    exr = np.cross(axis, r)
    e_rxW = rxW @ axis
    qW = np.einsum("ij,ij->i", q, W)
    q2 = np.einsum("ij,ij->i", q, q)
    vals = np.empty((X.shape[0], N_QUANTITIES))
    if magnitude:
        a = abs(rho)
        gm = np.asarray(g).reshape(-1)
        vals[:, 0:3] = a * U[:, None] * np.abs(W)
        vals[:, 3:6] = a * U[:, None] * np.abs(rxW)
        vals[:, 6] = a * gm * np.linalg.norm(exr, axis=1) * np.abs(e_rxW)
        vals[:, 7] = (a / 3.0) * (U * np.abs(qW) + 0.5 * q2 * np.linalg.norm(W, axis=1) * gm)
        return vals
    g_exr = np.einsum("ij,ij->i", g, exr)
    gW = np.einsum("ij,ij->i", g, W)
    vals[:, 0:3] = -rho * U[:, None] * W
    vals[:, 3:6] = -rho * U[:, None] * rxW
    vals[:, 6] = -rho * g_exr * e_rxW
    vals[:, 7] = (rho / 3.0) * (U * qW + 0.5 * q2 * gW)
    return vals


def _term_magnitudes(X, W, U, g, rho, pivot, axis, centroid):
    """Per-node magnitudes (M, 8) of the factors each integrand is made of, before they cancel: |U| |r| |W|
    for a torque component (r x W can be pure rounding where r and W are parallel), and likewise for
    the stiffness and energy; the rounding of forming and summing the terms is a few ulps of these."""
    r = np.linalg.norm(X - pivot, axis=1)
    q = np.linalg.norm(X - centroid, axis=1)
    w = np.linalg.norm(W, axis=1)
    gm = np.linalg.norm(np.asarray(g).reshape(X.shape[0], -1), axis=1)
    au = abs(rho) * np.abs(U)
    vals = np.empty((X.shape[0], N_QUANTITIES))
    vals[:, 0:3] = au[:, None] * np.abs(W)
    vals[:, 3:6] = (au * r * w)[:, None]
    vals[:, 6] = abs(rho) * gm * r * r * w
    vals[:, 7] = (abs(rho) / 3.0) * (np.abs(U) * q * w + 0.5 * q * q * w * gm)
    return vals


KEPT_SAFETY = 100.0
"""Safety factor of the kept rule's own error estimate (`_kept_rule_error`)."""
CONVERGED_RATIO = 0.1
"""The rules converge clearly when two more points shrink every significant difference this much."""


def _kept_rule_error(e1, d_low, floor):
    """Error estimate (C, 8) of the kept (order n) rule of cells whose three rules converge clearly.

    e1 = |Q_n - Q_(n-2)| measures the error of the n-2 rule, d_low = Q_(n-2) - Q_(n-4) that of the n-4
    rule; their ratio, the largest over the cell's quantities whose d_low stands clear of the floor
    (rounding and field refinement, 100 times), is the rate r at which two more points shrink the error
    (one rate for the cell: the integrand's nearest singularity sets it for all eight quantities). The
    kept rule's error is then about r e1, or r^2 |d_low| where e1 happens to be small because the
    n-2 rule's error passes through zero (a null-rule estimate in the manner of Berntsen and Espelid,
    with their practice of a rate taken from several rules and a safety factor, here KEPT_SAFETY, set
    from the worst underestimate seen over close cylinder, tube and box pairs (about 50 at order 6,
    15 at order 8)). Cells without a clear rate get infinity (the caller keeps the n-2 estimate)."""
    d_low = np.abs(d_low)
    significant = d_low > 100.0 * floor
    ratio = np.where(significant, e1 / np.where(significant, d_low, 1.0), 0.0)
    rate = ratio.max(axis=1, initial=0.0)[:, None]
    clear = (rate <= CONVERGED_RATIO) & significant.any(axis=1)[:, None]
    est = KEPT_SAFETY * np.maximum(rate * e1, rate * rate * d_low)
    return np.where(clear, est, np.inf)


def field_tolerances(patchset: PatchSet, rho, pivot, axis, centroid, tol, order=8):
    """Absolute tolerances on U and |g| at the test nodes so that field errors use at most a tenth of
    the tolerance `tol` (8,) of the surface integrals."""
    xg, wg = gauss_unit(order)
    X, W = cell_nodes(patchset.kinds, patchset.params, patchset.cell_patch, patchset.cell_dom, xg, wg)
    a = abs(rho)
    aw = np.linalg.norm(W, axis=1).sum()
    rw = (np.linalg.norm(X - pivot, axis=1) * np.linalg.norm(W, axis=1)).sum()
    r2w = (np.linalg.norm(X - pivot, axis=1) ** 2 * np.linalg.norm(W, axis=1)).sum()
    qn = np.linalg.norm(X - centroid, axis=1)
    qw = (qn * np.linalg.norm(W, axis=1)).sum()
    q2w = (qn**2 * np.linalg.norm(W, axis=1)).sum()
    tiny = 1e-300
    tol_u = 0.1 * min(np.min(tol[0:3]) / (a * aw + tiny), np.min(tol[3:6]) / (a * rw + tiny),
                      tol[7] / (a / 3 * qw + tiny))
    tol_g = 0.1 * min(tol[6] / (a * r2w + tiny), tol[7] / (a / 6 * q2w + tiny))
    return tol_u, tol_g


def integrate_surface(patchset: PatchSet, rho: float, field: Callable, pivot: np.ndarray, axis: np.ndarray,
                      centroid: np.ndarray, tol: np.ndarray, order: int = 8, max_levels: int = 30,
                      distance: Callable | None = None, values: Callable | None = None) -> SurfaceResult:
    """Adaptive surface integration of the eight quantities [F, torque, K, E].

    `field(points) -> (U, g, dU, dg, rU, rg)`: the source's potential and field, their signed refinement
    differences and rounding magnitudes (SourceField.field_with_differences). Each cell is integrated
    with the order x order Gauss rule and with the rules two and four points smaller; a cell whose
    estimate (the nearer difference where the three converge clearly, else the wider one) is within its
    share (by area) of the tolerance is kept, the others are split in four. The error estimate adds
    four parts: the kept cells' rule differences (summed in magnitude), the field's refinement carried
    through the integral with its signs (the same integral of dU, dg), the field's rounding bounds at
    the nodes weighted by the integrands' |coefficients| (a bound, summed linearly), and ROUNDING_ULPS
    ulps of the sum of |node terms| (the sums' own rounding, where the terms cancel). `distance(points) -> (N,)`, when given, is the distance (m)
    from world points to the source's surface; cells that reach toward it are judged by the wider rule
    difference (see NEAR_RATIO). `values(points) -> (U, g)`, when given, serves the two smaller rules'
    nodes, where only the values are used (a closed form's rounding bounds cost several times its
    values).
    """
    hi = gauss_unit(order)
    lo = gauss_unit(order - 2)
    lower = gauss_unit(order - 4)
    pivot = np.asarray(pivot, float)
    axis = np.asarray(axis, float)
    centroid = np.asarray(centroid, float)
    tol = np.asarray(tol, float)

    def per_cell(a, n):
        return a.reshape(-1, n * n, N_QUANTITIES).sum(axis=1)

    def reaches_source(X):
        """Cells (by their nodes X) whose centre is nearer to the source's surface than their radius."""
        if distance is None:
            return np.zeros(X.shape[0] // (order * order), bool)
        Xc = X.reshape(-1, order * order, 3)
        centre = Xc.mean(axis=1)
        radius = 1.1 * np.max(np.linalg.norm(Xc - centre[:, None, :], axis=2), axis=1)
        return np.abs(distance(centre)) < NEAR_RATIO * radius

    def cell_values(cp, cd):
        X, W = cell_nodes(patchset.kinds, patchset.params, cp, cd, *hi)
        Xl, Wl = cell_nodes(patchset.kinds, patchset.params, cp, cd, *lo)
        Xs, Ws = cell_nodes(patchset.kinds, patchset.params, cp, cd, *lower)
        m = X.shape[0]
        ml = m + Xl.shape[0]
        if values is None:
            U, g, dU, dg, rU, rg = field(np.concatenate([X, Xl, Xs]))
        else:
            U, g, dU, dg, rU, rg = field(X)
            Ul, gl = values(np.concatenate([Xl, Xs]))
            U, g = np.concatenate([U, Ul]), np.concatenate([g, gl])
        nv = _node_values(X, W, U[:m], g[:m], rho, pivot, axis, centroid)
        v = per_cell(nv, order)
        noise = ROUNDING_ULPS * EPS * per_cell(_term_magnitudes(X, W, U[:m], g[:m], rho, pivot, axis, centroid), order)
        vl = per_cell(_node_values(Xl, Wl, U[m:ml], g[m:ml], rho, pivot, axis, centroid), order - 2)
        vs = per_cell(_node_values(Xs, Ws, U[ml:], g[ml:], rho, pivot, axis, centroid), order - 4)
        e1 = np.abs(v - vl)
        e2 = np.abs(v - vs)
        # The nearer rule's difference is trusted only where the three rules converge clearly (two more
        # points gain a digit) and the cell does not reach toward the source (where a near-singular
        # integrand leaves the rules short of their asymptotic range); otherwise the wider difference
        # is the estimate (a null-rule check in the manner of Berntsen and Espelid).
        trusted = (e1 <= 0.1 * e2) & ~reaches_source(X)[:, None]
        d = per_cell(_node_values(X, W, dU[:m], dg[:m], rho, pivot, axis, centroid), order)
        # the source's rounding bounds at the nodes, weighted by |coefficients| (a bound of a weighted
        # sum is the weighted sum of |weights| times the node bounds)
        r = per_cell(_node_values(X, W, rU[:m], rg[:m], rho, pivot, axis, centroid, magnitude=True), order)
        diff = np.where(trusted, np.minimum(e1, _kept_rule_error(e1, vl - vs, noise + r + np.abs(d))), np.maximum(e1, e2))
        area = np.linalg.norm(W, axis=1).reshape(-1, order * order).sum(axis=1)
        return v, diff, d, r, noise, area, ml + Xs.shape[0]

    cp, cd = patchset.cell_patch, patchset.cell_dom
    total = np.zeros(N_QUANTITIES)
    rule = np.zeros(N_QUANTITIES)
    field_diff = np.zeros(N_QUANTITIES)
    rounding = np.zeros(N_QUANTITIES)
    summing = np.zeros(N_QUANTITIES)
    reached = True
    level = 0
    nev = 0
    total_area = None
    while cp.size:
        val, diff, fdiff, rnd, noise, area, n = cell_values(cp, cd)
        nev += n
        if total_area is None:
            total_area = area.sum()
        share = (area / total_area)[:, None] * tol[None, :]
        # a difference at the rounding level of the cell's own terms, or within the rounding bound of
        # the source's field at its nodes, cannot be refined away: splitting the cell would only
        # multiply the evaluations (both bounds are part of the stated error)
        done = np.all(diff <= np.maximum(share, np.maximum(noise, rnd)), axis=1)
        level += 1
        if level >= max_levels or 4 * np.count_nonzero(~done) > MAX_ACTIVE_CELLS:
            reached = bool(np.all(diff <= share))
            done[:] = True
        total += val[done].sum(axis=0)
        rule += diff[done].sum(axis=0)
        field_diff += fdiff[done].sum(axis=0)
        rounding += rnd[done].sum(axis=0)
        summing += noise[done].sum(axis=0)
        cp, cd = split_cells(cp[~done], cd[~done])
    # the sums' own rounding: ROUNDING_ULPS ulps of the sum of |node terms| (covers their cancellation)
    return SurfaceResult(total, rule + np.abs(field_diff) + rounding + summing, reached, nev, level,
                         rounding + summing)
