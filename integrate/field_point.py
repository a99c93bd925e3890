"""Gravity of point masses, uniform spheres and uniform spherical shells (SI units).

Sign convention, shared by every field kernel: potential U = -G * sum m / |x - x'| (J/kg, negative),
field g = -grad U (m/s^2, pointing toward the mass), gradient tensor T_ij = d g_i / d x_j (1/s^2).

A uniform sphere or shell is, outside itself, exactly a point of the same mass at its centre (shell
theorem), so `point_field` serves spheres as well. `shell_field` is valid everywhere: in the cavity
(zero field, constant potential), in the solid part and outside.
"""

from __future__ import annotations

import numpy as np
from numba import njit, prange

from truepull.geometry.errors import InputError

SMALL = 4096
"""Below this many point-source pairs plain numpy is used: a parallel kernel's start-up costs more."""


VECTOR_MATH = {"reassoc", "contract", "arcp", "nsz"}
"""LLVM flags that let the sums over sources run in SIMD lanes (reordered additions, fused multiply-add,
reciprocals): rounding-level changes only; infinities and NaN keep their meaning."""


@njit(cache=True, parallel=True, fastmath=VECTOR_MATH)
def _point_field_soa(points, cx, cy, cz, gm):
    """U (N,), g (N, 3) at `points` from point masses G m = gm at (cx, cy, cz) (separate contiguous
    arrays, so that the loop over sources loads whole SIMD lanes); NaN at a point that coincides with a
    mass. The inner loop has no branch; a coincidence shows as a non-finite sum."""
    n = points.shape[0]
    m = cx.shape[0]
    U = np.zeros(n)
    g = np.zeros((n, 3))
    for i in prange(n):
        px = points[i, 0]
        py = points[i, 1]
        pz = points[i, 2]
        u = 0.0
        gx = 0.0
        gy = 0.0
        gz = 0.0
        for k in range(m):
            dx = cx[k] - px
            dy = cy[k] - py
            dz = cz[k] - pz
            r2 = dx * dx + dy * dy + dz * dz
            inv_r = 1.0 / np.sqrt(r2)
            gm_r = gm[k] * inv_r
            u -= gm_r
            s = gm_r * inv_r * inv_r
            gx += s * dx
            gy += s * dy
            gz += s * dz
        if not (np.isfinite(u) and np.isfinite(gx) and np.isfinite(gy) and np.isfinite(gz)):
            u = np.nan
            gx = np.nan
            gy = np.nan
            gz = np.nan
        U[i] = u
        g[i, 0] = gx
        g[i, 1] = gy
        g[i, 2] = gz
    return U, g


def _point_field_kernel(points, centres, masses, G):
    """U (N,), g (N, 3) at `points` from point masses (centres (M, 3), masses (M,)), G in SI."""
    c = np.asarray(centres, float)
    return _point_field_soa(np.ascontiguousarray(points, float), np.ascontiguousarray(c[:, 0]),
                            np.ascontiguousarray(c[:, 1]), np.ascontiguousarray(c[:, 2]),
                            G * np.asarray(masses, float))


@njit(cache=True, parallel=True)
def _point_gradient_kernel(points, centres, masses, G):
    n = points.shape[0]
    m = centres.shape[0]
    T = np.zeros((n, 3, 3))
    for i in prange(n):
        t = np.zeros((3, 3))
        d = np.empty(3)
        for k in range(m):
            for a in range(3):
                d[a] = centres[k, a] - points[i, a]
            r2 = d[0] * d[0] + d[1] * d[1] + d[2] * d[2]
            if r2 == 0.0:
                t[:, :] = np.nan
                continue
            inv_r2 = 1.0 / r2
            s = G * masses[k] * inv_r2 / np.sqrt(r2)
            for a in range(3):
                for b in range(3):
                    t[a, b] += s * (3.0 * d[a] * d[b] * inv_r2)
                t[a, a] -= s
        T[i] = t
    return T


@njit(cache=True)
def newton_into(p, c, gm, g, T):
    """Newton's field of a point of G m = `gm` (m^3/s^2) at `c` (3,) m, at the point `p` (3,) m: returns
    U = -gm / r (J/kg) and writes g = gm d / r^3 (3,) m/s^2 and T = gm (3 d d^T / r^5 - I / r^3) (3, 3)
    1/s^2, d = c - p (NaN where p is c): the formulas of point_field's and point_gradient's small path."""
    d0, d1, d2 = c[0] - p[0], c[1] - p[1], c[2] - p[2]
    r = np.sqrt(d0 * d0 + d1 * d1 + d2 * d2)
    if r > 0.0:
        gm_r = gm / r
        U = -gm_r
        s = gm_r / (r * r)
        a = 3.0 * gm / r ** 5
        b = gm / r ** 3
    else:
        U = s = a = b = np.nan
    g[0], g[1], g[2] = s * d0, s * d1, s * d2
    d = (d0, d1, d2)
    for k in range(3):
        for m in range(3):
            T[k, m] = a * d[k] * d[m]
        T[k, k] -= b
    return U


def _as_points(points, key="points"):
    p = np.ascontiguousarray(points, dtype=np.float64)
    if p.ndim == 1 and p.shape[0] == 3:
        p = p.reshape(1, 3)
    if p.ndim != 2 or p.shape[1] != 3:
        raise InputError(None, key, f"expected an (N, 3) array of positions, got shape {p.shape}")
    return p


def _as_sources(centres, masses):
    c = _as_points(centres, "centres")
    m = np.ascontiguousarray(masses, dtype=np.float64).reshape(-1)
    if m.shape[0] != c.shape[0]:
        raise InputError(None, "masses", f"{m.shape[0]} masses for {c.shape[0]} centres")
    return c, m


def point_field(points, centres, masses, G):
    """Potential U (N,) in J/kg and field g (N,3) in m/s^2 of point masses `masses` (M,) in kg at
    `centres` (M,3) in m, at `points` (N,3) in m. A point that coincides with a source gets NaN
    (the field of a point is undefined there)."""
    p = _as_points(points)
    c, m = _as_sources(centres, masses)
    if p.shape[0] * c.shape[0] <= SMALL:
        d = c[None, :, :] - p[:, None, :]
        r = np.sqrt(np.einsum("ijk,ijk->ij", d, d))
        with np.errstate(divide="ignore", invalid="ignore"):
            gm_r = np.where(r > 0, float(G) * m[None, :] / r, np.nan)
            U = -gm_r.sum(axis=1)
            g = np.einsum("ij,ijk->ik", gm_r / r**2, d)
        return U, g
    return _point_field_kernel(p, c, m, float(G))


def point_gradient(points, centres, masses, G):
    """Gradient tensor T (N,3,3) in 1/s^2, T_ij = d g_i / d x_j, of point masses (see point_field).
    Traceless away from the sources (Laplace)."""
    p = _as_points(points)
    c, m = _as_sources(centres, masses)
    if p.shape[0] * c.shape[0] <= SMALL:
        d = c[None, :, :] - p[:, None, :]
        r = np.sqrt(np.einsum("ijk,ijk->ij", d, d))
        with np.errstate(divide="ignore", invalid="ignore"):
            gm = np.where(r > 0, float(G) * m[None, :], np.nan)
            T = np.einsum("ij,ijk,ijl->ikl", 3.0 * gm / r**5, d, d) - np.einsum("ij->i", gm / r**3)[:, None, None] * np.eye(3)
        return T
    return _point_gradient_kernel(p, c, m, float(G))


def _shell_parts(points, centre, radius, inner_radius, mass):
    p = _as_points(points)
    c = np.asarray(centre, dtype=np.float64).reshape(3)
    R = float(radius)
    ri = float(inner_radius)
    if not (R > 0.0 and np.isfinite(R)):
        raise InputError(None, "radius", f"the radius must be a positive length, got {R}")
    if not (0.0 <= ri <= R):
        raise InputError(None, "inner_radius",
                         f"the inner radius must lie between 0 and the radius {R}, got {ri}")
    d = p - c
    r = np.sqrt(np.einsum("ij,ij->i", d, d))
    return d, r, R, ri, float(mass)


def _enclosed_fraction(r, R, ri):
    """Fraction of the shell's mass inside radius r (0 in the cavity, 1 outside)."""
    if ri == R:
        return (r >= R).astype(np.float64)
    rc = np.clip(r, ri, R)
    return (rc ** 3 - ri ** 3) / (R ** 3 - ri ** 3)


def shell_field(points, centre, radius, inner_radius, mass, G):
    """Potential U (N,) in J/kg and field g (N,3) in m/s^2 of a uniform spherical shell of total
    `mass` (kg), outer `radius` and `inner_radius` (m; 0 for a solid sphere, equal to `radius` for a
    thin shell) centred at `centre`, valid everywhere by the shell theorem: zero field and constant
    potential in the cavity, g = -G M(<r) r_hat / r^2 in the solid part and outside."""
    d, r, R, ri, M = _shell_parts(points, centre, radius, inner_radius, mass)
    G = float(G)
    frac = _enclosed_fraction(r, R, ri)
    # Potential: enclosed mass as a point, plus the layers outside radius r, each at its own radius.
    rc = np.clip(r, ri, R)
    if ri == R:
        outer = np.where(r < R, -G * M / R, 0.0)
    else:
        outer = -1.5 * G * M * (R * R - rc * rc) / (R ** 3 - ri ** 3)
    with np.errstate(divide="ignore", invalid="ignore"):
        inner = np.where(frac > 0.0, -G * M * frac / np.where(r > 0, r, 1.0), 0.0)
        s = np.where(frac > 0.0, -G * M * frac / np.where(r > 0, r, 1.0) ** 3, 0.0)
    U = inner + outer
    g = s[:, None] * d
    return U, g


def shell_gradient(points, centre, radius, inner_radius, mass, G):
    """Gradient tensor T (N,3,3) in 1/s^2 of the uniform shell of `shell_field`: zero in the cavity,
    trace -4 pi G rho in the solid part, the point-mass tensor outside. On the bounding spheres the
    tensor is discontinuous; there the outside value is returned."""
    d, r, R, ri, M = _shell_parts(points, centre, radius, inner_radius, mass)
    G = float(G)
    n = d.shape[0]
    eye = np.eye(3)
    T = np.zeros((n, 3, 3))
    safe_r = np.where(r > 0, r, 1.0)
    dd = d[:, :, None] * d[:, None, :]
    point_like = -G * M * (eye[None] / safe_r[:, None, None] ** 3
                           - 3.0 * dd / safe_r[:, None, None] ** 5)
    outside = r >= R
    T[outside] = point_like[outside]
    if ri < R:
        solid = (r < R) & (r > ri)
        k = M / (R ** 3 - ri ** 3)   # enclosed mass = k (r^3 - ri^3); k = 4/3 pi rho
        # g = -G k (d - ri^3 d / r^3) in the solid part
        T[solid] = -G * k * (eye[None] - ri ** 3 * (eye[None] / safe_r[solid, None, None] ** 3
                                                     - 3.0 * dd[solid]
                                                     / safe_r[solid, None, None] ** 5))
        if ri == 0.0:
            at_centre = r == 0.0
            T[at_centre] = -G * k * eye
    return T
