"""Field of a uniform body from its surface alone, by adaptive Gauss quadrature (numba).

For a uniform body of density rho bounded by the closed surface S (outward n), the divergence theorem
turns the volume integrals into surface integrals with bounded or weakly singular kernels:
    U(x) = -(G rho / 2) * surface integral of ((x' - x) . n') / |x' - x| dA'
    g(x) = -G rho * surface integral of n' / |x' - x| dA'
valid at every point x outside the body (and on its surface, where the kernels stay integrable).

Each point gets its own adaptive subdivision: a cell's n x n Gauss value is compared with the sum over
its four children; the children are kept when the difference is below the cell's share (by area) of the
requested absolute tolerance, otherwise each child is refined in turn. The differences are summed into an
error estimate, which bounds the error of the kept (finer) values with a wide margin because the rule
converges spectrally on cells that are small compared with their distance from x.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

from truepull.integrate.gauss import gauss_unit
from truepull.integrate.patches import patch_point

MAX_DEPTH = 40
STACK = 64 + 4 * MAX_DEPTH


@njit(cache=True, inline="always")
def _cell_sums(kind, p, s0, s1, t0, t1, px, py, pz, xg, wg):
    """Integrals over one cell of ((x'-x).N)/R, N/R and |N| (area)."""
    n = xg.shape[0]
    ds = s1 - s0
    dt = t1 - t0
    iu = 0.0
    gx = 0.0
    gy = 0.0
    gz = 0.0
    ar = 0.0
    for i in range(n):
        s = s0 + ds * xg[i]
        for j in range(n):
            t = t0 + dt * xg[j]
            x, y, z, nx, ny, nz = patch_point(kind, p, s, t)
            w = wg[i] * wg[j]
            dx = x - px
            dy = y - py
            dz = z - pz
            r2 = dx * dx + dy * dy + dz * dz
            if r2 > 0.0:
                inv = w / math.sqrt(r2)
                iu += (dx * nx + dy * ny + dz * nz) * inv
                gx += nx * inv
                gy += ny * inv
                gz += nz * inv
            ar += w * math.sqrt(nx * nx + ny * ny + nz * nz)
    a = ds * dt
    return iu * a, gx * a, gy * a, gz * a, ar * a


@njit(cache=True, parallel=True)
def adaptive_surface_field(points, kinds, params, cell_patch, cell_dom, total_area, xg, wg,
                           tol_u, tol_g, max_depth):
    """Unit-density, unit-G surface integrals at each point, adaptively.

    Returns (IU, IG, EU, EG, OK): IU (N,) = integral of ((x'-x).n')/R dA', IG (N, 3) = integral of
    n'/R dA', EU, EG (N,) their absolute error estimates, OK (N,) False where the depth limit was hit.
    tol_u, tol_g are absolute tolerances on IU and |IG| for the whole surface.
    """
    npts = points.shape[0]
    nc0 = cell_patch.shape[0]
    IU = np.zeros(npts)
    IG = np.zeros((npts, 3))
    EU = np.zeros(npts)
    EG = np.zeros(npts)
    OK = np.ones(npts, dtype=np.bool_)
    for q in prange(npts):
        px = points[q, 0]
        py = points[q, 1]
        pz = points[q, 2]
        st_patch = np.empty(STACK + nc0, dtype=np.int64)
        st_dom = np.empty((STACK + nc0, 4))
        st_val = np.empty((STACK + nc0, 5))
        st_depth = np.empty(STACK + nc0, dtype=np.int64)
        top = 0
        for c in range(nc0):
            k = cell_patch[c]
            v = _cell_sums(kinds[k], params[k], cell_dom[c, 0], cell_dom[c, 1], cell_dom[c, 2],
                           cell_dom[c, 3], px, py, pz, xg, wg)
            st_patch[top] = k
            st_dom[top, 0] = cell_dom[c, 0]
            st_dom[top, 1] = cell_dom[c, 1]
            st_dom[top, 2] = cell_dom[c, 2]
            st_dom[top, 3] = cell_dom[c, 3]
            for m in range(5):
                st_val[top, m] = v[m]
            st_depth[top] = 0
            top += 1
        iu = 0.0
        gx = 0.0
        gy = 0.0
        gz = 0.0
        eu = 0.0
        eg = 0.0
        ok = True
        kid = np.empty((4, 5))
        while top > 0:
            top -= 1
            k = st_patch[top]
            s0 = st_dom[top, 0]
            s1 = st_dom[top, 1]
            t0 = st_dom[top, 2]
            t1 = st_dom[top, 3]
            depth = st_depth[top]
            kind = kinds[k]
            p = params[k]
            sm = 0.5 * (s0 + s1)
            tm = 0.5 * (t0 + t1)
            v = _cell_sums(kind, p, s0, sm, t0, tm, px, py, pz, xg, wg)
            for m in range(5):
                kid[0, m] = v[m]
            v = _cell_sums(kind, p, sm, s1, t0, tm, px, py, pz, xg, wg)
            for m in range(5):
                kid[1, m] = v[m]
            v = _cell_sums(kind, p, s0, sm, tm, t1, px, py, pz, xg, wg)
            for m in range(5):
                kid[2, m] = v[m]
            v = _cell_sums(kind, p, sm, s1, tm, t1, px, py, pz, xg, wg)
            for m in range(5):
                kid[3, m] = v[m]
            su = kid[0, 0] + kid[1, 0] + kid[2, 0] + kid[3, 0]
            sx = kid[0, 1] + kid[1, 1] + kid[2, 1] + kid[3, 1]
            sy = kid[0, 2] + kid[1, 2] + kid[2, 2] + kid[3, 2]
            sz = kid[0, 3] + kid[1, 3] + kid[2, 3] + kid[3, 3]
            du = abs(su - st_val[top, 0])
            dg = math.sqrt((sx - st_val[top, 1]) ** 2 + (sy - st_val[top, 2]) ** 2 + (sz - st_val[top, 3]) ** 2)
            frac = st_val[top, 4] / total_area
            if (du <= tol_u * frac and dg <= tol_g * frac) or depth >= max_depth or top + 4 > STACK + nc0:
                if depth >= max_depth or top + 4 > STACK + nc0:
                    if du > tol_u * frac or dg > tol_g * frac:
                        ok = False
                iu += su
                gx += sx
                gy += sy
                gz += sz
                eu += du
                eg += dg
            else:
                cs = (s0, sm, s0, sm)
                ce = (sm, s1, sm, s1)
                ts = (t0, t0, tm, tm)
                te = (tm, tm, t1, t1)
                for c in range(4):
                    st_patch[top] = k
                    st_dom[top, 0] = cs[c]
                    st_dom[top, 1] = ce[c]
                    st_dom[top, 2] = ts[c]
                    st_dom[top, 3] = te[c]
                    for m in range(5):
                        st_val[top, m] = kid[c, m]
                    st_depth[top] = depth + 1
                    top += 1
        IU[q] = iu
        IG[q, 0] = gx
        IG[q, 1] = gy
        IG[q, 2] = gz
        EU[q] = eu
        EG[q] = eg
        OK[q] = ok
    return IU, IG, EU, EG, OK


def surface_field(points, patchset, density, G, tol_u, tol_g, order=8, max_depth=MAX_DEPTH):
    """Potential U (J/kg) and field g (m/s^2) of a uniform body from its surface patches.

    tol_u, tol_g: absolute tolerances on U and |g| (numbers, the same at every point). Returns
    (U, g, err_U, err_g, ok).
    """
    points = np.ascontiguousarray(points, dtype=float).reshape(-1, 3)
    xg, wg = gauss_unit(order)
    # area of the whole surface (for the tolerance shares)
    from truepull.integrate.patches import cell_nodes

    _, W = cell_nodes(patchset.kinds, patchset.params, patchset.cell_patch, patchset.cell_dom, xg, wg)
    total_area = float(np.linalg.norm(W, axis=1).sum())
    fu = 0.5 * G * abs(density)
    fg = G * abs(density)
    IU, IG, EU, EG, OK = adaptive_surface_field(
        points, patchset.kinds, patchset.params, patchset.cell_patch, patchset.cell_dom, total_area,
        xg, wg, float(tol_u) / max(fu, 1e-300), float(tol_g) / max(fg, 1e-300), int(max_depth))
    U = -0.5 * G * density * IU
    g = -G * density * IG
    return U, g, fu * EU, fg * EG, OK
