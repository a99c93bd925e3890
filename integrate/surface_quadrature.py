"""Force, torque, stiffness and energy on a uniform test body from its surface alone.

With U and g the source's potential and field on the test body's surface S (outward vector area
element N dA), pivot p, frame axis e, r = x - p and q = x - c (c the test body's centroid), the
divergence theorem gives (U harmonic inside the test body, as no source mass is there):
    F      = -rho * surface integral of U N
    torque = -rho * surface integral of U (r x N)                    (about the pivot)
    K      = -rho * surface integral of (g . (e x r)) (e . (r x N))  (= -d torque_axis / d theta)
    E      = (rho / 3) * surface integral of [U (q . N) + |q|^2 (g . N) / 2]   (interaction energy)
K follows from turning the body by theta about the axis: r x N turns with it, its axial part stays.

The surface is refined adaptively: each cell's Gauss value is compared with the sum over its four
children, the children are kept when every component differs by less than the cell's share (by area)
of its tolerance, and the differences plus the propagated field errors form the error estimate.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Callable

import numpy as np

from truepull.integrate.gauss import gauss_unit
from truepull.integrate.patches import PatchSet, cell_nodes, split_cells

N_QUANTITIES = 8  # F(3), torque(3), stiffness about the axis, energy


@dataclass(frozen=True)
class SurfaceResult:
    """Totals over the test surface: values (8,), absolute error estimates (8,), reached flag."""

    values: np.ndarray
    errors: np.ndarray
    reached: bool
    evaluations: int
    levels: int


def _node_terms(X, W, U, g, eU, eg, rho, pivot, axis, centroid):
    """Per-node integrands (M, 8) and their propagated field errors (M, 8)."""
    r = X - pivot
    q = X - centroid
    rxW = np.cross(r, W)
    exr = np.cross(axis, r)
    e_rxW = rxW @ axis
    g_exr = np.einsum("ij,ij->i", g, exr)
    qW = np.einsum("ij,ij->i", q, W)
    q2 = np.einsum("ij,ij->i", q, q)
    gW = np.einsum("ij,ij->i", g, W)
    vals = np.empty((X.shape[0], N_QUANTITIES))
    vals[:, 0:3] = -rho * U[:, None] * W
    vals[:, 3:6] = -rho * U[:, None] * rxW
    vals[:, 6] = -rho * g_exr * e_rxW
    vals[:, 7] = (rho / 3.0) * (U * qW + 0.5 * q2 * gW)
    a = abs(rho)
    errs = np.empty_like(vals)
    errs[:, 0:3] = a * eU[:, None] * np.abs(W)
    errs[:, 3:6] = a * eU[:, None] * np.abs(rxW)
    errs[:, 6] = a * eg * np.linalg.norm(exr, axis=1) * np.abs(e_rxW)
    errs[:, 7] = (a / 3.0) * (eU * np.abs(qW) + 0.5 * q2 * np.linalg.norm(W, axis=1) * eg)
    return vals, errs


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


def integrate_surface(patchset: PatchSet, rho: float,
                      field: Callable[[np.ndarray], tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]],
                      pivot: np.ndarray, axis: np.ndarray, centroid: np.ndarray, tol: np.ndarray,
                      order: int = 8, max_levels: int = 30) -> SurfaceResult:
    """Adaptive surface integration of the four quantities; `field(points) -> (U, g, err_U, err_g)`."""
    xg, wg = gauss_unit(order)
    nn = order * order
    pivot = np.asarray(pivot, float)
    axis = np.asarray(axis, float)
    centroid = np.asarray(centroid, float)
    tol = np.asarray(tol, float)

    def cell_values(cp, cd):
        X, W = cell_nodes(patchset.kinds, patchset.params, cp, cd, xg, wg)
        U, g, eU, eg = field(X)
        v, e = _node_terms(X, W, U, g, eU, eg, rho, pivot, axis, centroid)
        area = np.linalg.norm(W, axis=1).reshape(-1, nn).sum(axis=1)
        return (v.reshape(-1, nn, N_QUANTITIES).sum(axis=1), e.reshape(-1, nn, N_QUANTITIES).sum(axis=1),
                area, X.shape[0])

    cp, cd = patchset.cell_patch, patchset.cell_dom
    val, ferr, area, nev = cell_values(cp, cd)
    total_area = area.sum()
    total = np.zeros(N_QUANTITIES)
    error = np.zeros(N_QUANTITIES)
    reached = True
    level = 0
    while cp.size:
        level += 1
        kp, kd = split_cells(cp, cd)
        kval, kerr, karea, n = cell_values(kp, kd)
        nev += n
        ksum = kval.reshape(-1, 4, N_QUANTITIES).sum(axis=1)
        kerr_sum = kerr.reshape(-1, 4, N_QUANTITIES).sum(axis=1)
        diff = np.abs(ksum - val)
        share = (area / total_area)[:, None] * tol[None, :]
        done = np.all(diff <= share, axis=1)
        if level >= max_levels:
            reached = bool(np.all(done))
            done[:] = True
        total += ksum[done].sum(axis=0)
        error += diff[done].sum(axis=0) + kerr_sum[done].sum(axis=0)
        keep = np.repeat(~done, 4)
        cp, cd = kp[keep], kd[keep]
        val, area = kval[keep], karea[keep]
    return SurfaceResult(total, error, reached, nev, level)
