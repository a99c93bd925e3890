"""Surface rules for volume integrals of homogeneous functions, by the divergence theorem.

For f homogeneous of degree l about an origin o (f(o + s x) = s^l f(o + x)), div((x - o) f) =
(l + 3) f, so  integral_V f dV = 1/(l + 3) * closed integral over dV of f (x - o).n dS.
A solid harmonic R_lm about the pivot is such an f, so a body's inner moments need only a surface
rule: 2-D instead of 3-D, several times fewer nodes at the same exactness.

`flux_nodes(body, origin, degree)` gives world nodes (N, 3) m and flux weights
density (x - o).n dS (N,) kg such that sum(w * f(x)) / (l + 3) is the body's integral of rho f,
exactly (up to rounding) for every polynomial f of total degree <= `degree`:
- flat faces (box faces, cylinder ends, mesh triangles): (x - o).n is constant on a face, so the
  integrand is a polynomial of degree `degree` in the face's coordinates (tensor Gauss on a
  rectangle; Gauss in rho (weight rho) times the periodic trapezoid in azimuth on a disk or ring;
  the collapsed Gauss rule on a triangle);
- the curved side of a cylinder or tube: (x - o).n = rho + (c - o).n(phi) is a trigonometric
  polynomial of degree 1 in the azimuth, so the azimuth rule has one point more.
Holes carry their negative density like every other rule here.
"""

from __future__ import annotations

import math

import numpy as np

from truepull.integrate.gauss import gauss_unit

TWO_PI = 2.0 * math.pi
KINDS = ("box", "cylinder", "mesh")


def _gauss_points(degree: int) -> int:
    """Gauss points exact for a polynomial of this degree in one variable."""
    return max(1, (int(degree) + 2) // 2)


def _trapezoid(n: int):
    """Periodic trapezoid rule on [0, 2 pi): exact for trigonometric polynomials of degree < n."""
    phi = TWO_PI * (np.arange(n) + 0.5) / n
    return phi, np.full(n, TWO_PI / n)


def _box_faces(shape, degree):
    """Local points, outward normals and areas of the tensor Gauss rule on the six faces."""
    s = np.asarray(shape.size, float)
    u, wu = gauss_unit(_gauss_points(degree))
    U, V = np.meshgrid(u - 0.5, u - 0.5, indexing="ij")
    W = np.outer(wu, wu).ravel()
    pts, nrm, area = [], [], []
    for axis in range(3):
        i, j = [k for k in range(3) if k != axis]
        for sign in (-1.0, 1.0):
            p = np.zeros((U.size, 3))
            p[:, axis] = sign * 0.5 * s[axis]
            p[:, i] = U.ravel() * s[i]
            p[:, j] = V.ravel() * s[j]
            n = np.zeros((U.size, 3))
            n[:, axis] = sign
            pts.append(p)
            nrm.append(n)
            area.append(W * s[i] * s[j])
    return np.concatenate(pts), np.concatenate(nrm), np.concatenate(area)


def _cylinder_faces(shape, degree):
    """Local points, outward normals and areas on the ends (disks or rings) and the curved sides."""
    ro, ri, L = shape.radius, shape.inner_radius, shape.length
    pts, nrm, area = [], [], []
    # ends: rho in [ri, ro] with the Jacobian rho (degree + 1 in rho), azimuth exact to `degree`
    t, wt = gauss_unit(_gauss_points(degree + 1))
    phi, wphi = _trapezoid(degree + 1)
    R, P = np.meshgrid(ri + t * (ro - ri), phi, indexing="ij")
    Wend = (np.outer(wt, wphi) * R * (ro - ri)).ravel()
    for sign in (-1.0, 1.0):
        p = np.stack([(R * np.cos(P)).ravel(), (R * np.sin(P)).ravel(), np.full(R.size, sign * L / 2)], axis=1)
        n = np.zeros_like(p)
        n[:, 2] = sign
        pts.append(p)
        nrm.append(n)
        area.append(Wend)
    # sides: azimuth exact to degree + 1 ((x - o).n carries one harmonic), z exact to `degree`
    z, wz = gauss_unit(_gauss_points(degree))
    phi, wphi = _trapezoid(degree + 2)
    P, Z = np.meshgrid(phi, (z - 0.5) * L, indexing="ij")
    Wside = np.outer(wphi, wz * L).ravel()
    for radius, outward in ((ro, 1.0), (ri, -1.0)):
        if radius <= 0.0:
            continue
        c, s = np.cos(P).ravel(), np.sin(P).ravel()
        pts.append(np.stack([radius * c, radius * s, Z.ravel()], axis=1))
        nrm.append(outward * np.stack([c, s, np.zeros_like(c)], axis=1))
        area.append(Wside * radius)
    return np.concatenate(pts), np.concatenate(nrm), np.concatenate(area)


def _mesh_faces(shape, degree):
    """Local points, normals and areas of the collapsed Gauss rule on each triangle (degree `degree`)."""
    tri = np.asarray(shape.triangles(), float)
    s, ws = gauss_unit(_gauss_points(degree + 1))  # Jacobian s: one degree more in s
    t, wt = gauss_unit(_gauss_points(degree))
    S, T = np.meshgrid(s, t, indexing="ij")
    Wst = (np.outer(ws, wt) * S).ravel()
    S, T = S.ravel(), T.ravel()
    a, b, c = tri[:, 0], tri[:, 1], tri[:, 2]
    normal2 = np.cross(b - a, c - a)  # 2 A n
    X = a[:, None, :] + S[None, :, None] * (b - a)[:, None, :] + (S * T)[None, :, None] * (c - b)[:, None, :]
    area2 = np.linalg.norm(normal2, axis=1)
    n = normal2 / np.where(area2 > 0, area2, 1.0)[:, None]
    N = np.repeat(n, S.size, axis=0)
    A = (area2[:, None] * Wst[None, :]).ravel()
    return X.reshape(-1, 3), N, A


def flux_nodes(body, origin, degree: int) -> tuple[np.ndarray, np.ndarray]:
    """World nodes (N, 3) m and flux weights density (x - o).n dS (N,) kg on the body's surface,
    exact for polynomials of total degree `degree` (see the module docstring)."""
    k = body.shape.kind
    if k == "box":
        p, n, a = _box_faces(body.shape, degree)
    elif k == "cylinder":
        p, n, a = _cylinder_faces(body.shape, degree)
    elif k == "mesh":
        p, n, a = _mesh_faces(body.shape, degree)
    else:
        raise KeyError(f"no surface rule for a {k} body")
    X = body.placement.apply(p)
    N = n @ body.placement.rotation.T
    xn = np.einsum("ij,ij->i", X - np.asarray(origin, float), N)
    return X, body.density * xn * a
