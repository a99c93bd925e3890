"""Gravity of a uniform rectangular prism, in closed form (Nagy, Papp and Benedek 2000, J. Geodesy
74:552), SI units.

The prism is centred at the origin of its local frame with half-sizes (hx, hy, hz); points are given
in that frame. Sign convention: U = -G rho * integral dV'/|x - x'| (J/kg), g = -grad U (m/s^2, toward
the mass), T_ij = d g_i / d x_j (1/s^2).

How the closed form is evaluated so that it stays accurate:
- The eight-corner sums of ln(w + r) terms are taken pairwise along each edge direction, as one
  logarithm of a ratio written with log1p, so the large logarithms never cancel and the ln(0) of a
  point in the plane of a face or on the line of an edge never appears (those limits are exact).
- The four-corner arctangent sums are the solid angles of the faces, taken by the Van Oosterom and
  Strackee formula with an exact triple product, so they keep full relative precision far away.
- Terms whose coefficient vanishes (x ln x type limits on faces, edges and vertices) are dropped.
- Even so the outer differences lose digits with distance and with aspect ratio: measured against
  a 50-digit mpmath evaluation, about 1e-14 for a cube out to 8 half-diagonals, 1e-13..1e-12 for
  100:1 plates and rods near the prism, 1e-11 for a 2e4:1 slab; the terms of the corner sums are
  about (distance / size)^2 times larger than their sum. So once a point is more than 1.5 largest
  half-sizes away and a tensor Gauss-Legendre rule of at most _MAX_POINTS nodes (_MAX_POINTS_FEW
  for calls with at most _FEW points, as the one-point pairs make; field, gradient and their bounds
  follow the same rule for the same points) has a proven
  truncation bound below 10^-_DIGITS of the field's scale there (the integrand is analytic in
  Bernstein ellipses clear of its singularities, whose size grows with distance / half-size:
  `_axis_truncation`), the defining volume integral is summed by that rule instead: a sum of
  positive-weight terms of one size, nested axis by axis, whose rounding stays at a few tens of ulps.
The potential and field are finite and continuous everywhere (inside, on faces, edges, vertices). The
gradient tensor jumps across faces (Poisson) and diverges logarithmically at edges; on a face it is
the average of the two sides, on an edge or vertex it is not finite.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

from truepull.geometry.errors import InputError

_DIGITS = 15.0              # far-field quadrature: truncation bound below 10^-_DIGITS of the scale
_MAX_ORDER = 32
_MAX_POINTS = 512           # nodes of the far-field rule, calls with many points (speed)
_MAX_POINTS_FEW = 2048      # ... calls with at most _FEW points (one-point pairs: accuracy)
_FEW = 16


def _max_points(n_points):
    """Largest far-field rule for a call with n_points points (the same for field, gradient and bounds)."""
    return _MAX_POINTS_FEW if n_points <= _FEW else _MAX_POINTS
_CHUNK = 64                 # points per parallel work item (scratch arrays are per item)
_GL_NODES = np.zeros((_MAX_ORDER + 1, _MAX_ORDER))
_GL_WEIGHTS = np.zeros((_MAX_ORDER + 1, _MAX_ORDER))
for _n in range(1, _MAX_ORDER + 1):
    _x, _w = np.polynomial.legendre.leggauss(_n)
    _GL_NODES[_n, :_n] = _x
    _GL_WEIGHTS[_n, :_n] = _w
del _n, _x, _w
_ELLIPSE_FRACTIONS = np.array([0.3, 0.5, 0.65, 0.8, 0.88, 0.94, 0.97, 0.985])
"""Semi-minor axes of the Bernstein ellipses tried in the truncation bound, as fractions of the
point's distance to the box (the bound is the least over them)."""


@njit(cache=True, inline="always")
def _log_step(a, w1, w2):
    """ln(w2 + r2) - ln(w1 + r1) with r_k = sqrt(a + w_k^2), a >= 0, w1 < w2, without cancellation.
    Infinite only when a == 0 and w1 <= 0 <= w2 (the point on the edge itself)."""
    r1 = np.sqrt(a + w1 * w1)
    r2 = np.sqrt(a + w2 * w2)
    if w1 >= 0.0:
        den = w1 + r1
        if den == 0.0:
            return np.inf
        return np.log1p((w2 - w1) * (1.0 + (w1 + w2) / (r1 + r2)) / den)
    if w2 <= 0.0:
        den = r2 - w2
        if den == 0.0:
            return np.inf
        return np.log1p((w2 - w1) * (1.0 - (w1 + w2) / (r1 + r2)) / den)
    if a == 0.0:
        return np.inf
    # w1 < 0 < w2: w1 + r1 = a / (r1 - w1)
    return np.log((w2 + r2) * (r1 - w1) / a)


@njit(cache=True, inline="always")
def _triangle_angle(ax, ay, az, bx, by, bz, cx, cy, cz, ra, rb, rc, triple):
    """Signed solid angle of the triangle a, b, c seen from the origin (Van Oosterom and Strackee
    1983), given the corner distances and the triple product a . (b x c)."""
    den = (ra * rb * rc + (ax * bx + ay * by + az * bz) * rc
           + (ax * cx + ay * cy + az * cz) * rb + (bx * cx + by * cy + bz * cz) * ra)
    return 2.0 * np.arctan2(triple, den)


@njit(cache=True, inline="always")
def _face_angle(u, v1, v2, w1, w2, r11, r21, r22, r12):
    """Solid angle of the rectangle {u} x [v1,v2] x [w1,w2] seen from the origin, positive for u > 0;
    zero when u == 0 (the average of the two sides for a point on the face)."""
    if u == 0.0:
        return 0.0
    triple = u * (v2 - v1) * (w2 - w1)
    t1 = _triangle_angle(u, v1, w1, u, v2, w1, u, v2, w2, r11, r21, r22, triple)
    t2 = _triangle_angle(u, v1, w1, u, v2, w2, u, v1, w2, r11, r22, r12, triple)
    return t1 + t2


@njit(cache=True)
def _closed_form_parts(px, py, pz, hx, hy, hz, D, Om, X, Y, Z, R):
    """Fill the edge logarithms D and face solid angles Om for a point p.
    D[0, i, j] = step in z at (x_i, y_j); D[1, i, k] = step in y at (x_i, z_k);
    D[2, j, k] = step in x at (y_j, z_k). Om[axis, side] = solid angle of that face."""
    X[0] = -hx - px
    X[1] = hx - px
    Y[0] = -hy - py
    Y[1] = hy - py
    Z[0] = -hz - pz
    Z[1] = hz - pz
    for i in range(2):
        for j in range(2):
            for k in range(2):
                R[i, j, k] = np.sqrt(X[i] * X[i] + Y[j] * Y[j] + Z[k] * Z[k])
    for i in range(2):
        for j in range(2):
            D[0, i, j] = _log_step(X[i] * X[i] + Y[j] * Y[j], Z[0], Z[1])
            D[1, i, j] = _log_step(X[i] * X[i] + Z[j] * Z[j], Y[0], Y[1])
            D[2, i, j] = _log_step(Y[i] * Y[i] + Z[j] * Z[j], X[0], X[1])
    for s in range(2):
        # x-faces: (v, w) = (y, z); y-faces: (v, w) = (z, x); z-faces: (v, w) = (x, y), all right-handed
        Om[0, s] = _face_angle(X[s], Y[0], Y[1], Z[0], Z[1],
                               R[s, 0, 0], R[s, 1, 0], R[s, 1, 1], R[s, 0, 1])
        Om[1, s] = _face_angle(Y[s], Z[0], Z[1], X[0], X[1],
                               R[0, s, 0], R[0, s, 1], R[1, s, 1], R[1, s, 0])
        Om[2, s] = _face_angle(Z[s], X[0], X[1], Y[0], Y[1],
                               R[0, 0, s], R[1, 0, s], R[1, 1, s], R[0, 1, s])


@njit(cache=True, inline="always")
def _edge_step(a, b, d, s):
    """One edge's share of the corner sums, for the log step d along the third axis at corner
    coordinates (a, b) with sign s: (potential term s a b d, s b d for a's field component, s a d for
    b's). A zero coordinate contributes nothing (its log step may be infinite there)."""
    p = s * a * b * d if (a != 0.0 and b != 0.0) else 0.0
    ja = s * b * d if b != 0.0 else 0.0
    jb = s * a * d if a != 0.0 else 0.0
    return p, ja, jb


@njit(cache=True)
def _closed_form_point(px, py, pz, hx, hy, hz, D, Om, X, Y, Z, R):
    """Return (I, Jx, Jy, Jz): I = integral dV/r and J = integral (x' - p)/r^3 dV over the prism."""
    _closed_form_parts(px, py, pz, hx, hy, hz, D, Om, X, Y, Z, R)
    pot = 0.0
    jx = 0.0
    jy = 0.0
    jz = 0.0
    for i in range(2):
        for j in range(2):
            s = 1.0 if i == j else -1.0
            # step in z at (x_i, y_j)
            p, ja, jb = _edge_step(X[i], Y[j], D[0, i, j], s)
            pot += p
            jx += ja
            jy += jb
            # step in y at (x_i, z_j)
            p, ja, jb = _edge_step(X[i], Z[j], D[1, i, j], s)
            pot += p
            jx += ja
            jz += jb
            # step in x at (y_i, z_j)
            p, ja, jb = _edge_step(Y[i], Z[j], D[2, i, j], s)
            pot += p
            jy += ja
            jz += jb
    for k in range(2):
        s = 1.0 if k == 1 else -1.0
        pot -= 0.5 * s * (X[k] * X[k] * Om[0, k] + Y[k] * Y[k] * Om[1, k] + Z[k] * Z[k] * Om[2, k])
        jx -= s * X[k] * Om[0, k]
        jy -= s * Y[k] * Om[1, k]
        jz -= s * Z[k] * Om[2, k]
    # The sums above are the corner sums of the antiderivatives; J = -(field antiderivative sum).
    return pot, -jx, -jy, -jz


@njit(cache=True)
def _axis_truncation(dist, far, h, n):
    """Bounds (tU, tg, tT), per unit G |rho| V, on the error that an n-point Gauss-Legendre rule along
    one axis of half-length h adds to the tensor rule for the potential, field (vector norm) and
    gradient (Frobenius norm), at a point `dist` from the box and at most `far` from any of its points.

    Gauss-Legendre on [-1, 1] errs by at most (64/15) M rho^(-2n) / (1 - rho^-2) for an integrand
    analytic with |f| <= M in the Bernstein ellipse E_rho (Trefethen, Approximation Theory and
    Approximation Practice, 2013, Theorem 19.3); over the box's other two axes this is multiplied by
    their extent, so each axis adds (32/15) V M rho^(-2n) / (1 - rho^-2). Take the ellipse of
    semi-minor axis b < dist (physical units): its points lie within b of the segment, the
    singularities of 1/r (complex x' with r^2 = 0) at least dist from it, so |r| >= dist - b there,
    and |d| <= far + 2 b. Then M is 1 / (dist - b) for 1/r, (far + 2b) / (dist - b)^3 for d / r^3 and
    (3 + sqrt 3) (far + 2b)^2 / (dist - b)^5 for (3 d d^T - r^2 I) / r^5; the least over a few b."""
    tu = np.inf
    tg = np.inf
    tt = np.inf
    for f in _ELLIPSE_FRACTIONS:
        b = f * dist
        rho = (b + np.sqrt(h * h + b * b)) / h
        c = (32.0 / 15.0) * rho ** (-2.0 * n) / (1.0 - rho ** -2.0)
        gap = dist - b
        top = far + 2.0 * b
        tu = min(tu, c / gap)
        tg = min(tg, c * top / gap ** 3)
        tt = min(tt, c * (3.0 + np.sqrt(3.0)) * top * top / gap ** 5)
    return tu, tg, tt


@njit(cache=True)
def _gl_order(dist, far, h):
    """Least Gauss-Legendre order along an axis of half-length h whose truncation bound
    (_axis_truncation) is below 10^-_DIGITS / 3 of the scales 1/dist, 1/dist^2, sqrt(6)/dist^3 of the
    potential, field and gradient (solved for n per ellipse, the least taken); _MAX_ORDER + 1 if none
    up to _MAX_ORDER is."""
    target = 10.0 ** (-_DIGITS) / 3.0
    best = _MAX_ORDER + 1
    for f in _ELLIPSE_FRACTIONS:
        b = f * dist
        rho = (b + np.sqrt(h * h + b * b)) / h
        c = (32.0 / 15.0) / (1.0 - rho ** -2.0)
        gap = dist - b
        top = far + 2.0 * b
        need = max(c / gap * dist, c * top / gap ** 3 * dist * dist,
                   c * (3.0 + np.sqrt(3.0)) * top * top / gap ** 5 * dist ** 3 / np.sqrt(6.0)) / target
        n = 1
        if need > 1.0:
            n = int(np.ceil(np.log(need) / (2.0 * np.log(rho))))
            # guard against rounding of the logarithms: the bound itself decides
            while n <= _MAX_ORDER and c * rho ** (-2.0 * n) * need / c > 1.0:
                n += 1
        best = min(best, max(n, 1))
    return best


@njit(cache=True)
def _distances(px, py, pz, hx, hy, hz):
    """(distance from the point to the box, distance to its farthest corner), in the box's units."""
    ex = max(abs(px) - hx, 0.0)
    ey = max(abs(py) - hy, 0.0)
    ez = max(abs(pz) - hz, 0.0)
    fx = abs(px) + hx
    fy = abs(py) + hy
    fz = abs(pz) + hz
    return np.sqrt(ex * ex + ey * ey + ez * ez), np.sqrt(fx * fx + fy * fy + fz * fz)


@njit(cache=True)
def _choose_rule(px, py, pz, hx, hy, hz, max_points):
    """Per-axis Gauss-Legendre orders (nx, ny, nz) if the quadrature is to be used at this point,
    else (0, 0, 0) for the closed form. The quadrature is used once the point is at least
    1.5 largest half-sizes away and a rule of at most max_points nodes has a truncation bound below
    10^-_DIGITS of the field's scale: there the closed form's corner terms are (distance / size)^2
    times larger than their sum, and the rule's positive terms are not."""
    dist, far = _distances(px, py, pz, hx, hy, hz)
    if dist < 1.5 * max(hx, max(hy, hz)):
        return 0, 0, 0
    nx = _gl_order(dist, far, hx)
    ny = _gl_order(dist, far, hy)
    nz = _gl_order(dist, far, hz)
    if nx > _MAX_ORDER or ny > _MAX_ORDER or nz > _MAX_ORDER or nx * ny * nz > max_points:
        return 0, 0, 0
    return nx, ny, nz


@njit(cache=True)
def _quadrature_point(px, py, pz, hx, hy, hz, nx, ny, nz, nodes, weights):
    """(I, Jx, Jy, Jz) as in _closed_form_point, by an nx*ny*nz tensor Gauss-Legendre rule. Summed
    axis by axis (inner sums first), so each term passes through at most nx + ny + nz additions."""
    pot = 0.0
    jx = 0.0
    jy = 0.0
    jz = 0.0
    for a in range(nx):
        dx = hx * nodes[nx, a] - px
        pa = 0.0
        xa = 0.0
        ya = 0.0
        za = 0.0
        for b in range(ny):
            dy = hy * nodes[ny, b] - py
            pb = 0.0
            xb = 0.0
            yb = 0.0
            zb = 0.0
            for c in range(nz):
                dz = hz * nodes[nz, c] - pz
                w = weights[nz, c]
                inv_r = 1.0 / np.sqrt(dx * dx + dy * dy + dz * dz)
                pb += w * inv_r
                s = w * inv_r * inv_r * inv_r
                xb += s * dx
                yb += s * dy
                zb += s * dz
            wb = weights[ny, b]
            pa += wb * pb
            xa += wb * xb
            ya += wb * yb
            za += wb * zb
        wa = weights[nx, a]
        pot += wa * pa
        jx += wa * xa
        jy += wa * ya
        jz += wa * za
    vol = hx * hy * hz
    return pot * vol, jx * vol, jy * vol, jz * vol


@njit(cache=True)
def _scratch():
    """Scratch arrays (D, Om, X, Y, Z, R) of _closed_form_parts for one point at a time."""
    return np.empty((3, 2, 2)), np.empty((3, 2)), np.empty(2), np.empty(2), np.empty(2), np.empty((2, 2, 2))


@njit(cache=True)
def _rule(px, py, pz, hx, hy, hz, allow_quadrature, max_points):
    """_choose_rule, or (0, 0, 0) (the closed form) when the quadrature is not allowed."""
    if allow_quadrature:
        return _choose_rule(px, py, pz, hx, hy, hz, max_points)
    return 0, 0, 0


@njit(cache=True)
def _field_at(px, py, pz, hx, hy, hz, nx, ny, nz, nodes, weights, D, Om, X, Y, Z, R):
    """(I, Jx, Jy, Jz) of _closed_form_point at one point, by the far-field rule (nx, ny, nz) of
    _choose_rule, or by the closed form when nx is 0; D ... R are scratch arrays."""
    if nx > 0:
        return _quadrature_point(px, py, pz, hx, hy, hz, nx, ny, nz, nodes, weights)
    return _closed_form_point(px, py, pz, hx, hy, hz, D, Om, X, Y, Z, R)


@njit(cache=True, parallel=True)
def _prism_field_kernel(points, hx, hy, hz, rho, G, allow_quadrature, nodes, weights, max_points):
    n = points.shape[0]
    U = np.empty(n)
    g = np.empty((n, 3))
    scale = G * rho
    n_chunks = (n + _CHUNK - 1) // _CHUNK
    for c in prange(n_chunks):
        D, Om, X, Y, Z, R = _scratch()
        for i in range(c * _CHUNK, min(n, (c + 1) * _CHUNK)):
            px, py, pz = points[i, 0], points[i, 1], points[i, 2]
            nx, ny, nz = _rule(px, py, pz, hx, hy, hz, allow_quadrature, max_points)
            pot, jx, jy, jz = _field_at(px, py, pz, hx, hy, hz, nx, ny, nz, nodes, weights, D, Om, X, Y, Z, R)
            U[i] = -scale * pot
            g[i, 0] = scale * jx
            g[i, 1] = scale * jy
            g[i, 2] = scale * jz
    return U, g


@njit(cache=True)
def _quadrature_gradient(px, py, pz, hx, hy, hz, nx, ny, nz, nodes, weights, t):
    """t += integral (3 d d^T - r^2 I) / r^5 dV by a tensor Gauss-Legendre rule (d = x' - p), summed
    axis by axis like _quadrature_point."""
    vol = hx * hy * hz
    acc = np.zeros(6)       # xx, yy, zz, xy, xz, yz
    acc_b = np.zeros(6)
    acc_c = np.zeros(6)
    for a in range(nx):
        dx = hx * nodes[nx, a] - px
        acc_b[:] = 0.0
        for b in range(ny):
            dy = hy * nodes[ny, b] - py
            acc_c[:] = 0.0
            for c in range(nz):
                dz = hz * nodes[nz, c] - pz
                r2 = dx * dx + dy * dy + dz * dz
                inv_r2 = 1.0 / r2
                s = weights[nz, c] * inv_r2 / np.sqrt(r2)
                s3 = 3.0 * s * inv_r2
                acc_c[0] += s3 * dx * dx - s
                acc_c[1] += s3 * dy * dy - s
                acc_c[2] += s3 * dz * dz - s
                acc_c[3] += s3 * dx * dy
                acc_c[4] += s3 * dx * dz
                acc_c[5] += s3 * dy * dz
            wb = weights[ny, b]
            for k in range(6):
                acc_b[k] += wb * acc_c[k]
        wa = weights[nx, a]
        for k in range(6):
            acc[k] += wa * acc_b[k]
    t[0, 0] += vol * acc[0]
    t[1, 1] += vol * acc[1]
    t[2, 2] += vol * acc[2]
    t[0, 1] += vol * acc[3]
    t[1, 0] += vol * acc[3]
    t[0, 2] += vol * acc[4]
    t[2, 0] += vol * acc[4]
    t[1, 2] += vol * acc[5]
    t[2, 1] += vol * acc[5]


@njit(cache=True)
def _gradient_at(px, py, pz, hx, hy, hz, nx, ny, nz, nodes, weights, t, D, Om, X, Y, Z, R):
    """t (3, 3) = integral (3 d d^T - r^2 I) / r^5 dV at one point (G rho times it is the gradient), by
    the far-field rule (nx, ny, nz) of _choose_rule, else (nx 0) from the closed form's edge logarithms
    and face solid angles; D ... R are scratch arrays."""
    t[:, :] = 0.0
    if nx > 0:
        _quadrature_gradient(px, py, pz, hx, hy, hz, nx, ny, nz, nodes, weights, t)
        return
    _closed_form_parts(px, py, pz, hx, hy, hz, D, Om, X, Y, Z, R)
    for k in range(2):
        s = 1.0 if k == 1 else -1.0
        for a in range(3):
            t[a, a] -= s * Om[a, k]
    for i2 in range(2):
        for j2 in range(2):
            s = 1.0 if i2 == j2 else -1.0
            t[0, 1] += s * D[0, i2, j2]
            t[0, 2] += s * D[1, i2, j2]
            t[1, 2] += s * D[2, i2, j2]
    t[1, 0] = t[0, 1]
    t[2, 0] = t[0, 2]
    t[2, 1] = t[1, 2]


@njit(cache=True, parallel=True)
def _prism_gradient_kernel(points, hx, hy, hz, rho, G, allow_quadrature, nodes, weights, max_points):
    n = points.shape[0]
    T = np.zeros((n, 3, 3))
    scale = G * rho
    n_chunks = (n + _CHUNK - 1) // _CHUNK
    for c in prange(n_chunks):
        t = np.empty((3, 3))
        D, Om, X, Y, Z, R = _scratch()
        for i in range(c * _CHUNK, min(n, (c + 1) * _CHUNK)):
            px, py, pz = points[i, 0], points[i, 1], points[i, 2]
            nx, ny, nz = _rule(px, py, pz, hx, hy, hz, allow_quadrature, max_points)
            _gradient_at(px, py, pz, hx, hy, hz, nx, ny, nz, nodes, weights, t, D, Om, X, Y, Z, R)
            for a in range(3):
                for b in range(3):
                    T[i, a, b] = scale * t[a, b]
    return T


def _check(points, half_sizes):
    p = np.ascontiguousarray(points, dtype=np.float64)
    if p.ndim == 1 and p.shape[0] == 3:
        p = p.reshape(1, 3)
    if p.ndim != 2 or p.shape[1] != 3:
        raise InputError(None, "points", f"expected an (N, 3) array of positions, got {p.shape}")
    h = np.asarray(half_sizes, dtype=np.float64).reshape(-1)
    if h.shape != (3,) or not np.all(np.isfinite(h)) or np.any(h <= 0.0):
        raise InputError(None, "size", f"a box needs three positive half-sizes, got {h.tolist()}")
    return p, h


def prism_field(points, half_sizes, rho, G):
    """Potential U (N,) in J/kg and field g (N,3) in m/s^2 of a uniform prism of density `rho`
    (kg/m^3, negative for a hole) centred at the origin with `half_sizes` (hx, hy, hz) in m, at
    `points` (N,3) in m in the prism's frame. Finite and continuous everywhere."""
    p, h = _check(points, half_sizes)
    return _prism_field_kernel(p, h[0], h[1], h[2], float(rho), float(G), True,
                               _GL_NODES, _GL_WEIGHTS, _max_points(p.shape[0]))


def prism_gradient(points, half_sizes, rho, G):
    """Gradient tensor T (N,3,3) in 1/s^2, T_ij = d g_i / d x_j, of the prism of `prism_field`.
    Symmetric; trace 0 outside and -4 pi G rho inside; on a face the mean of both sides; not finite
    on edges and vertices (logarithmic singularity)."""
    p, h = _check(points, half_sizes)
    return _prism_gradient_kernel(p, h[0], h[1], h[2], float(rho), float(G), True,
                                  _GL_NODES, _GL_WEIGHTS, _max_points(p.shape[0]))


def prism_error_estimate(half_sizes):
    """Bound on the relative rounding error of `prism_field` (U relative to |U|, g to |g|; where g
    nearly cancels inside, absolute to G |rho| max(half_sizes)): eps (1000 + 2 (h_max/h_min)^2).
    The closed form is used only near the prism, where its digits are lost mainly to the aspect
    ratio (measured against 50-digit mpmath: 1e-14 for cubes, 2e-12 for 100:1 rods, 1.5e-8 for
    1e4:1 rods, 1e-11 for 1e4:1 plates); the far-field quadrature is good to about 1e-15."""
    _, h = _check(np.zeros((1, 3)), half_sizes)
    aspect = h.max() / h.min()
    return float(np.finfo(float).eps * (1000.0 + 2.0 * aspect * aspect))


@njit(cache=True, error_model="numpy", inline="always")
def _log_step_bounds(a, w1, w2, r1, r2):
    """|ln(w2 + r2) - ln(w1 + r1)| for the error bound (by the stable formula of `_log_step`) and the
    size of its gradient in the field point, sum_k |grad ln(w_k + r_k)| = sum_k sqrt(2 / (r_k (w_k + r_k))),
    with w + r = a / (r - w) for w < 0."""
    s1 = w1 + r1 if w1 >= 0.0 else a / (r1 - w1)
    s2 = w2 + r2 if w2 >= 0.0 else a / (r2 - w2)
    d = np.log(s2) - np.log(s1)
    return abs(d), np.sqrt(2.0 / (r1 * s1)) + np.sqrt(2.0 / (r2 * s2))


@njit(cache=True, error_model="numpy", inline="always")
def _triangle_angle_size(ax, ay, az, bx, by, bz, cx, cy, cz):
    """(|solid angle|, its sensitivity to rounding) of the triangle (a, b, c) seen from the origin, by
    Van Oosterom-Strackee (see field_polyhedron._solid_angle_sizes)."""
    a = np.sqrt(ax * ax + ay * ay + az * az)
    b = np.sqrt(bx * bx + by * by + bz * bz)
    c = np.sqrt(cx * cx + cy * cy + cz * cz)
    ab = ax * bx + ay * by + az * bz
    ac = ax * cx + ay * cy + az * cz
    bc = bx * cx + by * cy + bz * cz
    triple = ax * (by * cz - bz * cy) + ay * (bz * cx - bx * cz) + az * (bx * cy - by * cx)
    den = a * b * c + ab * c + ac * b + bc * a
    dsum = a * b * c + abs(ab) * c + abs(ac) * b + abs(bc) * a
    cond = abs(triple) * dsum / (triple * triple + den * den) if triple != 0.0 else 0.0
    return abs(2.0 * np.arctan2(triple, den)), 2.0 * cond


@njit(cache=True, error_model="numpy", inline="always")
def _rectangle_angle_size(u, a0, a1, b0, b1):
    """(|solid angle|, its sensitivity to rounding) of the rectangle {u} x [a0, a1] x [b0, b1] seen from
    the origin, as two triangles of its corners (u, a0, b0), (u, a1, b0), (u, a1, b1), (u, a0, b1)."""
    t1, c1 = _triangle_angle_size(u, a0, b0, u, a1, b0, u, a1, b1)
    t2, c2 = _triangle_angle_size(u, a0, b0, u, a1, b1, u, a0, b1)
    return t1 + t2, c1 + c2


@njit(cache=True, error_model="numpy")
def _closed_form_bounds(c, delta, s):
    """(eU, eg, eT) of the closed form at one point, from its corner offsets c (3, 2) (box minus point per
    axis, m), the coordinates' rounding delta (m) and s = G |rho| (see prism_rounding_bounds)."""
    eps = 2.220446049250313e-16
    C = 64.0
    sU = sg = sT = sg0 = sT0 = dT = 0.0
    for ax in range(3):
        ia, ib = (ax + 1) % 3, (ax + 2) % 3          # the two transverse axes
        w0, w1 = c[ax, 0], c[ax, 1]
        for i in range(2):
            A = c[ia, i]
            for j in range(2):
                B = c[ib, j]
                a = A * A + B * B
                r1 = np.sqrt(a + w0 * w0)
                r2 = np.sqrt(a + w1 * w1)
                d, grad = _log_step_bounds(a, w0, w1, r1, r2)
                if a == 0.0 and w0 <= 0 and w1 >= 0:
                    d = np.inf
                ab = abs(A * B)
                if ab > 0:
                    sU += ab * d
                side = (abs(B) * d if abs(B) > 0 else 0.0) + (abs(A) * d if abs(A) > 0 else 0.0)
                sg += side
                sg0 += side
                sT += d
                sT0 += d
                dT += grad
        # the two faces normal to this axis: solid angle at most 2 pi, its gradient bounded by the
        # four edges' line integrals, each at most 2 / (distance to the edge's line)
        for k in range(2):
            u = c[ax, k]
            om, cond = _rectangle_angle_size(u, c[ia, 0], c[ia, 1], c[ib, 0], c[ib, 1])
            on = 1.0 if u != 0.0 else 0.0
            om_r = (om + cond) * on            # with the atan2's rounding, for the C eps sums
            om = om * on
            sU += 0.5 * u * u * om_r
            sg += abs(u) * om_r
            sT += om_r
            sg0 += abs(u) * om
            sT0 += om
            for i in range(2):
                dT += 2.0 / np.sqrt(u * u + c[ia, i] ** 2) + 2.0 / np.sqrt(u * u + c[ib, i] ** 2)
    eU = C * eps * s * sU + 2.0 * delta * s * sg0
    eg = C * eps * s * sg + 2.0 * delta * s * sT0
    eT = C * eps * s * sT + 2.0 * delta * s * dT
    # within 2 delta of a face's plane the gradient may be on either side of its jump 4 pi G rho
    # (on the face itself, not elsewhere in its plane, where the gradient is continuous)
    tol = 2.0 * delta
    inside0 = c[0, 0] <= tol and c[0, 1] >= -tol
    inside1 = c[1, 0] <= tol and c[1, 1] >= -tol
    inside2 = c[2, 0] <= tol and c[2, 1] >= -tol
    on0 = min(abs(c[0, 0]), abs(c[0, 1])) <= tol
    on1 = min(abs(c[1, 0]), abs(c[1, 1])) <= tol
    on2 = min(abs(c[2, 0]), abs(c[2, 1])) <= tol
    if (on0 and inside1 and inside2) or (on1 and inside0 and inside2) or (on2 and inside0 and inside1):
        eT += 2.0 * np.pi * s
    return eU, eg, eT


@njit(cache=True, error_model="numpy")
def _rounding_bounds_kernel(points, hx, hy, hz, s, position_error, max_points):
    """(eU, eg, eT) (N,) of prism_rounding_bounds, one point at a time; position_error (N,) m."""
    n = points.shape[0]
    eU = np.empty(n)
    eg = np.empty(n)
    eT = np.empty(n)
    c = np.empty((3, 2))
    for i in range(n):
        px, py, pz = points[i, 0], points[i, 1], points[i, 2]
        nx, ny, nz = _choose_rule(px, py, pz, hx, hy, hz, max_points)
        eU[i], eg[i], eT[i] = _bounds_at(px, py, pz, hx, hy, hz, nx, ny, nz, s, position_error[i], c)
    return eU, eg, eT


@njit(cache=True, error_model="numpy")
def _bounds_at(px, py, pz, hx, hy, hz, nx, ny, nz, s, position_error, c):
    """(eU, eg, eT) of prism_rounding_bounds at one point with the rule (nx, ny, nz) of _choose_rule;
    position_error (m); c (3, 2) scratch."""
    eps = 2.220446049250313e-16
    m = s * 8.0 * hx * hy * hz
    hmax = max(hx, max(hy, hz))
    # rounding of the corner offsets, plus that of the point itself (m, e.g. from the frame change)
    delta = eps * (max(abs(px), max(abs(py), abs(pz))) + hmax) + position_error
    if nx == 0:
        c[0, 0], c[0, 1] = -hx - px, hx - px
        c[1, 0], c[1, 1] = -hy - py, hy - py
        c[2, 0], c[2, 1] = -hz - pz, hz - pz
        return _closed_form_bounds(c, delta, s)
    # far-field quadrature: rounding of the nested sums of positive-weight terms, bounded by the
    # sums of |integrand| over the nodes (at most G|rho| V / dist^k), plus the rule's truncation;
    # each term has its own few roundings (sqrt, divisions, weights, offsets: 32 ulps) and one per
    # addition on its way through the three nested sums
    d, far = _distances(px, py, pz, hx, hy, hz)
    tU = tg = tT = 0.0
    for h, order in ((hx, nx), (hy, ny), (hz, nz)):
        u, g, t = _axis_truncation(d, far, h, order)
        tU += u
        tg += g
        tT += t
    rel = (nx + ny + nz + 32.0) * eps
    return (rel * m / d + m * tU + 2.0 * delta * m / d ** 2,
            rel * m / d ** 2 + m * tg + 4.0 * delta * m / d ** 3,
            (3.0 + np.sqrt(3.0)) * rel * m / d ** 3 + m * tT + 12.0 * delta * m / d ** 4)


def prism_rounding_bounds(points, half_sizes, rho, G, position_error=0.0):
    """Absolute error bounds (eU (N,) J/kg, eg (N,) m/s^2 as a vector norm, eT (N,) 1/s^2 as a
    Frobenius norm) of `prism_field` and `prism_gradient` at `points` (N,3) in the prism's frame.

    Condition-number bounds, so that cancellation between the corner terms is covered: each sum is
    bounded by C eps times the sum of the absolute values of its terms (every log step and solid
    angle is itself good to a few ulps), plus the effect of rounding the point's coordinates
    (delta = eps (|p| + h) per axis) through the size of each term's gradient: near an edge the
    log steps and solid angles change like 1/distance, which is where the gradient loses digits.
    Where the far-field quadrature is used: (nx + ny + nz + 32) eps times the sums of its terms' sizes
    (at most G|rho|V/d^k, d the distance to the box; each term passes through its own few roundings
    and one addition per nested sum), plus the rule's proven truncation bound (`_axis_truncation`).
    Within 2 delta of a face's plane the gradient's jump there (4 pi G rho) is added: the point may be
    on either side of it. Infinite on an edge or vertex for eT (the gradient is not finite there). `position_error` (m):
    how far the point itself may be off by rounding before it got here (the frame change), a number
    or one per point. One numba pass over the points (`_rounding_bounds_kernel`)."""
    p, h = _check(points, half_sizes)
    s = abs(float(G) * float(rho))
    shift = np.ascontiguousarray(np.broadcast_to(np.asarray(position_error, dtype=float), (p.shape[0],)))
    return _rounding_bounds_kernel(np.ascontiguousarray(p, dtype=float), float(h[0]), float(h[1]), float(h[2]), s,
                                   shift, _max_points(p.shape[0]))


@njit(cache=True)
def at_point_into(point, rotation, translation, hx, hy, hz, rho, G, nodes, weights, max_points, out):
    """Write [U, g (3), T (9, row by row), eU, eg, eT] (16,) in world axes at one world point into `out`:
    the numbers of prism_field, prism_gradient and prism_rounding_bounds at the point's local position,
    turned to the world, with the frame change's rounding as sources.SourceField adds it (prism_at_point;
    nodes, weights, max_points from `point_rule_tables`)."""
    eps = 2.220446049250313e-16
    local = np.empty(3)
    for j in range(3):
        local[j] = ((point[0] - translation[0]) * rotation[0, j] + (point[1] - translation[1]) * rotation[1, j]
                    + (point[2] - translation[2]) * rotation[2, j])
    px, py, pz = local[0], local[1], local[2]
    D, Om, X, Y, Z, R = _scratch()
    scale = G * rho
    # one rule for the three, as the separate kernels choose it for the same point
    nx, ny, nz = _choose_rule(px, py, pz, hx, hy, hz, max_points)
    pot, jx, jy, jz = _field_at(px, py, pz, hx, hy, hz, nx, ny, nz, nodes, weights, D, Om, X, Y, Z, R)
    t = np.empty((3, 3))
    _gradient_at(px, py, pz, hx, hy, hz, nx, ny, nz, nodes, weights, t, D, Om, X, Y, Z, R)
    gl0, gl1, gl2 = scale * jx, scale * jy, scale * jz
    out[0] = -scale * pot
    for i in range(3):
        out[1 + i] = gl0 * rotation[i, 0] + gl1 * rotation[i, 1] + gl2 * rotation[i, 2]
    # T = R (G rho t) R^T
    Rt = np.empty((3, 3))
    for i in range(3):
        for k in range(3):
            Rt[i, k] = (rotation[i, 0] * (scale * t[0, k]) + rotation[i, 1] * (scale * t[1, k])
                        + rotation[i, 2] * (scale * t[2, k]))
    nT2 = 0.0
    for i in range(3):
        for k in range(3):
            v = Rt[i, 0] * rotation[k, 0] + Rt[i, 1] * rotation[k, 1] + Rt[i, 2] * rotation[k, 2]
            out[4 + 3 * i + k] = v
            nT2 += v * v
    shift = 4.0 * eps * (max(abs(point[0]), max(abs(point[1]), abs(point[2])))
                         + max(abs(translation[0]), max(abs(translation[1]), abs(translation[2]))))
    c = np.empty((3, 2))
    eU, eg, eT = _bounds_at(px, py, pz, hx, hy, hz, nx, ny, nz, abs(G * rho), shift, c)
    # the rotation back to world axes: a few ulps of the rotated vector and tensor
    out[13] = eU
    out[14] = eg + 4.0 * eps * np.sqrt(out[1] * out[1] + out[2] * out[2] + out[3] * out[3])
    out[15] = eT + 8.0 * eps * np.sqrt(nT2)


def point_rule_tables():
    """(nodes, weights, max_points) of the far-field rule for `at_point_into` (one point per call)."""
    return _GL_NODES, _GL_WEIGHTS, _max_points(1)


def checked_half_sizes(half_sizes) -> tuple[float, float, float]:
    """(hx, hy, hz) as floats; InputError unless all three are positive and finite."""
    hx, hy, hz = (float(v) for v in half_sizes)
    if not (0.0 < hx < math.inf and 0.0 < hy < math.inf and 0.0 < hz < math.inf):
        raise InputError(None, "size", f"a box needs three positive half-sizes, got {[hx, hy, hz]}")
    return hx, hy, hz


def prism_at_point(point, rotation, translation, half_sizes, rho, G):
    """Potential U (J/kg), field g (3,) m/s^2 and gradient T (3, 3) 1/s^2 in world axes at one world
    `point` (3,) m of the prism placed by `rotation` (local to world) and `translation` (m), with their
    rigorous rounding bounds (eU, eg, eT): what sources.SourceField gives for a box at one point
    (prism_field, prism_gradient, prism_rounding_bounds with the frame change's rounding) in one numba
    call (`at_point_into`). Returns (U, g, T, eU, eg, eT)."""
    hx, hy, hz = checked_half_sizes(half_sizes)
    out = np.empty(16)
    at_point_into(np.ascontiguousarray(point, dtype=float).reshape(3), np.ascontiguousarray(rotation, dtype=float),
                  np.ascontiguousarray(translation, dtype=float), hx, hy, hz, float(rho), float(G),
                  *point_rule_tables(), out)
    return float(out[0]), out[1:4], out[4:13].reshape(3, 3), float(out[13]), float(out[14]), float(out[15])
