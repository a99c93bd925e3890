"""Outside references for the engine's tests: closed forms and brute-force scipy quadrature.

Nothing here uses the engine's own quadrature. Each function says which published formula or which
general-purpose library routine it rests on; the engine tests compare against these.

- `ring_field`: a uniform thin ring, by complete elliptic integrals (scipy.special.ellipk/ellipe;
  the ring potential as in Binney and Tremaine, Galactic Dynamics, 2nd ed., 2008, chapter 2; from memory,
  equation number not checked).
- `cylinder_on_axis`, `cone_on_axis`: on-axis fields of uniform discs stacked into cylinders and
  cones (the disc closed form, Telford, Geldart and Sheriff, Applied Geophysics, 2nd ed., 1990, gravity chapter; from memory, equation number not checked; scipy.integrate.quad for the cone).
- `revolution_field`: the field anywhere outside a uniform solid of revolution (cylinder, tube, cone,
  frustum) as the ring field integrated over the body's meridian cross-section with
  scipy.integrate.cubature (the azimuth is closed by the elliptic integrals).
- `parallel_prisms`: energy, force, torque about a parallel axis and stiffness of two uniform right
  cylinders or tubes with parallel axes, by the exact 2-D convolution of the disc-overlap (lens) area
  with the closed-form interaction of two parallel line segments, integrated with
  scipy.integrate.cubature.
- `box_field_on_revolution`: force, torque, stiffness and energy of a uniform solid of revolution in
  the field of a uniform box (the prism closed form, integrate/field_prism.py, tested on its own
  against cubature and the Bouguer slab), integrated over the solid's VOLUME: numpy Gauss-Legendre
  along the axis times scipy.integrate.cubature over the cross-section.
- `ellipsoid_field_on_mesh`: the same for a convex triangle mesh in the field of a homogeneous
  ellipsoid (Carlson form, integrate/field_ellipsoid.py, tested on its own), integrated over the
  mesh's volume cut into tetrahedra with a collapsed (Duffy) numpy Gauss-Legendre rule.
- `plate_on_axis`: field on the axis of a uniform rectangular slab (solid angle of a rectangle,
  from memory), integrated over the thickness with scipy.integrate.quad.
- `prism_mp`, `PolyhedronMP`: the prism corner sums of Nagy, Papp and Benedek (2000) and the
  homogeneous polyhedron of Werner and Scheeres (1997, Celest. Mech. Dyn. Astron. 65:313) at 40
  digits with mpmath, written from the papers' formulas, independent of the numba kernels.

The stiffness convention is the engine's (CONTRACT.md): K = -d(torque . e)/d(theta) for a right-handed
turn theta of the TEST body about the line through the pivot along e. For a body of mass element dm at
r = x - pivot in a field g with gradient T (T_ij = dg_i/dx_j), d(torque . e)/d(theta) =
integral of e . ((e x r) x g + r x (T (e x r))) dm.
"""

from __future__ import annotations

import mpmath as mp
import numpy as np
from scipy.integrate import cubature, quad
from scipy.special import ellipe, ellipk, elliprd

from truepull.geometry.bodies import Body
from truepull.geometry.placement import Placement

G = 6.6743e-11  # CODATA 2018 (scipy.constants.G), used by every engine test
Z = np.array([0.0, 0.0, 1.0])


def body(name, shape, at=(0.0, 0.0, 0.0), rotation=None, density=1.0e4, group="g"):
    """A placed uniform body: local frame turned by `rotation` (3x3, default identity), moved to `at`."""
    R = np.eye(3) if rotation is None else np.asarray(rotation, float)
    return Body(name, group, shape, Placement(R, np.asarray(at, float)), float(density))


def relative(a, b):
    """|a - b| / |b| for scalars or vectors (2-norm)."""
    return float(np.linalg.norm(np.asarray(a, float) - np.asarray(b, float)) / np.linalg.norm(b))


# ------------------------------------------------------------------------------------------
# rings, discs, cylinders and cones
# ------------------------------------------------------------------------------------------

def ring_field(mass, a, rho, z, G=G):
    """(U, g_rho, g_z) of a uniform thin ring (mass kg, radius a m, in the plane z = 0) at cylindrical
    (rho, z), arrays allowed. With Q = (a + rho)^2 + z^2, P = (a - rho)^2 + z^2, m = 4 a rho / Q:
    U = -2 G M K(m) / (pi sqrt Q), g_z = -2 G M z E(m) / (pi P sqrt Q),
    g_rho = -G M (K(m) - (a^2 - rho^2 + z^2) E(m) / P) / (pi rho sqrt Q)
    (complete elliptic integrals with parameter m, scipy.special.ellipk/ellipe)."""
    rho = np.asarray(rho, float)
    z = np.asarray(z, float)
    Q = (a + rho) ** 2 + z**2
    P = (a - rho) ** 2 + z**2
    m = 4.0 * a * rho / Q
    K, E = ellipk(m), ellipe(m)
    sq = np.sqrt(Q)
    U = -2.0 * G * mass * K / (np.pi * sq)
    gz = -2.0 * G * mass * z * E / (np.pi * P * sq)
    with np.errstate(invalid="ignore", divide="ignore"):
        gr = np.where(rho > 0, -G * mass * (K - (a * a - rho * rho + z * z) * E / P) / (np.pi * rho * sq), 0.0)
    return U, gr, gz


def cylinder_on_axis(R, L, rho_m, z, G=G):
    """(U, g_z) on the axis of a uniform solid cylinder (radius R, length L, centred at z = 0) at
    height z outside it: the disc field -2 pi G sigma (1 - d / sqrt(R^2 + d^2)) stacked over the length
    (the disc closed form, Telford, Geldart and Sheriff, Applied Geophysics, 2nd ed., 1990, gravity chapter; from memory, equation number not checked):
    g_z = -2 pi G rho [L - sqrt(R^2 + (z + L/2)^2) + sqrt(R^2 + (z - L/2)^2)] for z > L/2 (odd in z),
    U = -2 pi G rho [F(z + L/2) - F(z - L/2) - ((z + L/2)|z + L/2| - (z - L/2)|z - L/2|) / 2],
    F(u) = (u sqrt(R^2 + u^2) + R^2 asinh(u / R)) / 2."""
    z = np.asarray(z, float)
    h = 0.5 * L
    s = np.sign(z)
    za = np.abs(z)
    # 2h - sqrt(R^2 + a^2) + sqrt(R^2 + b^2) (a = |z| + h, b = |z| - h) rationalised to
    # 2h (R^2/(sa + a) + R^2/(sb + b)) / (sa + sb): nothing cancels far from the cylinder
    a, b = za + h, za - h
    sa, sb = np.sqrt(R * R + a * a), np.sqrt(R * R + b * b)
    gz = -2.0 * np.pi * G * rho_m * (2 * h * (R * R / (sa + a) + R * R / (sb + b)) / (sa + sb)) * s

    # F(u) - u^2/2 = (R^2/2) [u / (sqrt(R^2 + u^2) + u) + asinh(u / R)] (u sqrt(R^2+u^2) - u^2 rationalised),
    # so the u^2 parts that cancel in F(z + h) - F(z - h) - 2 z h are never formed: far from the
    # cylinder the plain form loses about (z/R)^2 ulps, more than the engine's own error
    def F_less_square(u):
        return 0.5 * R * R * (u / (np.sqrt(R * R + u * u) + u) + np.arcsinh(u / R))

    U = -2.0 * np.pi * G * rho_m * (F_less_square(za + h) - F_less_square(za - h))
    return U, gz


def cylinder_axis_gradient(R, L, rho_m, z, G=G):
    """T_zz = d g_z / d z on the axis above the cylinder (z > L/2), the derivative of the closed form
    of `cylinder_on_axis`; by axial symmetry and Laplace's equation T_xx = T_yy = -T_zz / 2 there."""
    h = 0.5 * L
    return -2.0 * np.pi * G * rho_m * (-(z + h) / np.sqrt(R * R + (z + h) ** 2) + (z - h) / np.sqrt(R * R + (z - h) ** 2))


def cone_on_axis(R, L, R_top, rho_m, z, G=G):
    """g_z on the axis of a uniform frustum (base radius R at -L/2, top radius R_top at +L/2) at height z
    outside it: the on-axis field of a uniform disc, -2 pi G sigma sign(d) (1 - |d| / sqrt(r^2 + d^2))
    (from memory; it is the cylinder's closed form above for a single disc), integrated over the height
    with scipy.integrate.quad. Returns (g_z, error)."""
    h = 0.5 * L

    def disc(zp):
        r = R + (R_top - R) * (zp + h) / L
        d = z - zp
        return -2.0 * np.pi * G * rho_m * np.sign(d) * (1.0 - abs(d) / np.sqrt(r * r + d * d))

    return quad(disc, -h, h, epsabs=0.0, epsrel=2e-14, limit=200)


def revolution_field(point_rz, profile, z_range, rho_m, G=G, rtol=1e-12, near=None):
    """(U, g_rho, g_z) and their error estimates at cylindrical (rho, z) of the point, outside a uniform
    solid of revolution whose meridian cross-section is {z0 <= z' <= z1, r_in(z') <= r' <= r_out(z')}:
    the ring field of `ring_field` (mass 2 pi r' rho dr' dz') integrated over the cross-section by
    scipy.integrate.cubature. `profile(z') -> (r_in, r_out)` (vectorised). `near` = (u, z'), the
    cross-section's point nearest the field point (u = 0 at r_in, 1 at r_out), is made a corner of
    the cubature's regions, where the ring kernel's logarithmic peak sits. The tolerance is relative
    to the sizes G M / d and G M / d^2 (M the mass, d the distance to the cross-section's middle)."""
    rho, z = point_rz
    z0, z1 = z_range
    zm = np.linspace(z0, z1, 65)
    ri, ro = profile(zm)
    mass = rho_m * np.pi * np.trapezoid(ro**2 - ri**2, zm)
    d = np.hypot(rho - 0.5 * (ri.mean() + ro.mean()), z - 0.5 * (z0 + z1)) + 0.5 * (z1 - z0)
    scale = np.array([G * mass / d, G * mass / d**2, G * mass / d**2])

    def f(x):
        u, zp = x[:, 0], x[:, 1]
        r_in, r_out = profile(zp)
        rp = r_in + u * (r_out - r_in)
        w = 2.0 * np.pi * rp * rho_m * (r_out - r_in)
        U, gr, gz = ring_field(1.0, rp, rho, z - zp, G)
        return np.stack([w * U, w * gr, w * gz], axis=1) / scale

    pieces = [([0.0, z0], [1.0, z1])]
    if near is not None:
        un, zn = near
        pieces = [([a0, b0], [a1, b1]) for a0, a1 in ((0.0, un), (un, 1.0)) if a1 > a0
                  for b0, b1 in ((z0, zn), (zn, z1)) if b1 > b0]
    est = np.zeros(3)
    err = np.zeros(3)
    for lo, hi in pieces:
        res = cubature(f, lo, hi, rtol=0.0, atol=rtol / len(pieces), max_subdivisions=400000)
        assert res.status == "converged", res.status
        est += res.estimate
        err += res.error
    return est * scale, err * scale


# ------------------------------------------------------------------------------------------
# two parallel cylinders or tubes: exact reduction to a 2-D integral
# ------------------------------------------------------------------------------------------

def lens_area(s, a, b):
    """Area of the intersection of two discs of radii a, b whose centres are s apart (standard circle-
    circle intersection formula, e.g. MathWorld 'Circle-Circle Intersection')."""
    s = np.asarray(s, float)
    out = np.zeros_like(s)
    out[s <= abs(a - b)] = np.pi * min(a, b) ** 2
    mid = (s > abs(a - b)) & (s < a + b)
    sm = s[mid]
    c1 = np.clip((sm * sm + a * a - b * b) / (2 * sm * a), -1.0, 1.0)
    c2 = np.clip((sm * sm + b * b - a * a) / (2 * sm * b), -1.0, 1.0)
    k = (-sm + a + b) * (sm + a - b) * (sm - a + b) * (sm + a + b)
    out[mid] = a * a * np.arccos(c1) + b * b * np.arccos(c2) - 0.5 * np.sqrt(np.maximum(k, 0.0))
    return out


def segment_pair(r, c, l1, l2):
    """Phi = integral over z1 in [-l1, l1], z2 in [c - l2, c + l2] of 1 / sqrt(r^2 + (z2 - z1)^2) and its
    derivatives (Phi, Phi_r, Phi_rr, Phi_c, Phi_cc): two parallel line segments at distance r, by the
    elementary antiderivative F2(zeta) = zeta asinh(zeta / r) - sqrt(r^2 + zeta^2) of 1 / sqrt(r^2 + zeta^2)
    taken twice; dF2/dr = -sqrt(r^2 + zeta^2) / r, d2F2/dr2 = zeta^2 / (r^2 sqrt(r^2 + zeta^2))."""
    P = Pr = Prr = Pc = Pcc = 0.0
    for zeta, sg in ((c + l2 + l1, 1.0), (c - l2 + l1, -1.0), (c + l2 - l1, -1.0), (c - l2 - l1, 1.0)):
        q = np.sqrt(r * r + zeta * zeta)
        P = P + sg * (zeta * np.arcsinh(zeta / r) - q)
        Pr = Pr + sg * (-q / r)
        Prr = Prr + sg * (zeta * zeta / (r * r * q))
        Pc = Pc + sg * np.arcsinh(zeta / r)
        Pcc = Pcc + sg / q
    return P, Pr, Prr, Pc, Pcc


def parallel_cylinders(test, source, pivot, G=G, rtol=1e-13):
    """Exact interaction of two uniform cylinders (or tubes) whose axes are both parallel to the world z
    axis, for the TEST body: dict(E, F (3,), torque_z about the vertical line through `pivot`, K for a turn
    of the test body about that line, relerr of the integrals).

    E = -G rho1 rho2 * integral over both cross-sections of Phi(|x2 - x1|, c), with Phi the segment-pair
    closed form (`segment_pair`) and c the height offset. Substituting w = x2 - x1 turns the 4-D integral
    into integral d^2v A(|v|) Phi(|D - v|, c), A the lens area of the two discs (tubes by inclusion and
    exclusion of their bore discs) and D the offset of the axes; derivatives in D act on Phi, which is
    smooth where A is not zero. The test body is symmetric about its own axis, so its torque about the
    vertical line is (c1 - p) x F and, with u = e x (c1 - p), K = u . H u + F . (c1 - p) (H the
    Hessian of E in D). Integrated with scipy.integrate.cubature in polar coordinates about v = 0."""
    for b in (test, source):
        assert b.shape.kind == "cylinder" and np.allclose(np.abs(b.placement.rotation[:, 2]), [0, 0, 1])
    c1, c2 = test.placement.translation, source.placement.translation
    a, ia, l1 = test.shape.radius, test.shape.inner_radius, 0.5 * test.shape.length
    b, ib, l2 = source.shape.radius, source.shape.inner_radius, 0.5 * source.shape.length
    Dv = c2[:2] - c1[:2]
    d = np.linalg.norm(Dv)
    ex = Dv / d
    ey = np.array([-ex[1], ex[0]])
    c = c2[2] - c1[2]
    discs = [(a, b, 1.0)]
    if ia > 0:
        discs.append((ia, b, -1.0))
    if ib > 0:
        discs.append((a, ib, -1.0))
    if ia > 0 and ib > 0:
        discs.append((ia, ib, 1.0))
    tot = np.zeros(6)
    err = np.zeros(6)
    for A, B, sgn in discs:
        s0, s1 = abs(A - B), A + B
        width = s1 - s0

        def integrand(x, inner):
            if inner:
                r = x[:, 0]
                jac = r
                lam = np.full_like(r, np.pi * min(A, B) ** 2)
            else:  # r = s0 + width (1 - cos psi) / 2 smooths the lens area's 3/2-power ends
                psi = x[:, 0]
                r = s0 + 0.5 * width * (1.0 - np.cos(psi))
                jac = r * 0.5 * width * np.sin(psi)
                lam = lens_area(r, A, B)
            phi = x[:, 1]
            wx = d - r * np.cos(phi)
            wy = -r * np.sin(phi)
            rr = np.sqrt(wx * wx + wy * wy)
            ux, uy = wx / rr, wy / rr
            P, Pr, Prr, Pc, Pcc = segment_pair(rr, c, l1, l2)
            f = 2.0 * lam * jac  # phi over [0, pi], doubled (the odd parts vanish)
            return np.stack([f * P, f * Pr * ux, f * Pc, f * (Prr * ux * ux + Pr / rr * (1 - ux * ux)),
                             f * (Prr * uy * uy + Pr / rr * (1 - uy * uy)), f * Pcc], axis=-1)

        regions = [(True, [0.0, 0.0], [s0, np.pi])] if s0 > 0 else []
        regions.append((False, [0.0, 0.0], [np.pi, np.pi]))
        # level bodies (c = 0): the axial force vanishes by mirror symmetry about the common mid-plane,
        # and a relative tolerance on an exact zero could never be met, so that component is left out
        keep = np.array([0, 1, 3, 4, 5] if c == 0.0 else [0, 1, 2, 3, 4, 5])
        for inner, lo, hi in regions:
            res = cubature(lambda x, inner=inner: integrand(x, inner)[:, keep], lo, hi, rtol=rtol, atol=0.0,
                           max_subdivisions=200000)
            assert res.status == "converged", res.status
            tot[keep] += sgn * res.estimate
            err[keep] += res.error
    k = -G * test.density * source.density
    E = k * tot[0]
    f_plane = k * tot[1] * ex
    F = np.array([f_plane[0], f_plane[1], k * tot[2]])
    r1 = c1 - np.asarray(pivot, float)
    torque_z = r1[0] * F[1] - r1[1] * F[0]
    u = np.array([-r1[1], r1[0]])
    K = k * tot[3] * (u @ ex) ** 2 + k * tot[4] * (u @ ey) ** 2 + f_plane @ r1[:2]
    return dict(E=E, F=F, torque_z=torque_z, K=K, relerr=err / np.maximum(np.abs(tot), 1e-300))


# ------------------------------------------------------------------------------------------
# volume integrals of closed-form source fields over a test body
# ------------------------------------------------------------------------------------------

def _moments(X, w, U, g, T, pivot, axis):
    """Per-node [F(3), torque(3), K, E] weights (N, 8) for mass weights w."""
    r = X - pivot
    exr = np.cross(axis, r)
    dtau = np.cross(exr, g) @ axis + np.cross(r, np.einsum("nij,nj->ni", T, exr)) @ axis
    return w[:, None] * np.concatenate([g, np.cross(r, g), -dtau[:, None], U[:, None]], axis=1)


def box_field(box):
    """(U, g, T) in world axes of a placed uniform box, from the prism closed form."""
    from truepull.integrate.field_prism import prism_field, prism_gradient

    R, t = box.placement.rotation, box.placement.translation
    half = 0.5 * np.asarray(box.shape.size, float)

    def f(X, G=G):
        L = (X - t) @ R
        U, g = prism_field(L, half, box.density, G)
        T = prism_gradient(L, half, box.density, G)
        return U, g @ R.T, np.einsum("ij,njk,lk->nil", R, T, R)

    return f


def box_field_on_revolution(test, box, pivot, axis, phi_near, n_axial, atol=1e-12, scales=None, G=G):
    """[F(3), torque(3), K, E] (8,) on a uniform cylinder or frustum `test` in the field of `box`, and
    the cubature's error estimate (8,): the test body's volume in coordinates (u, phi, z), radius
    u * r(z), with an n_axial-point numpy Gauss-Legendre rule along its axis z (where the integrand is
    smooth when the nearest approach is a whole generator line, away from the box's edges) and
    scipy.integrate.cubature over (u, phi), phi centred on `phi_near`, the azimuth of closest approach.
    `scales` (8,): sizes used to make the absolute tolerance `atol` relative."""
    shape = test.shape
    l = 0.5 * shape.length
    if shape.kind == "cylinder":
        def radius(z):
            return np.full_like(z, shape.radius)
    else:
        def radius(z):
            return shape.radius + (shape.radius_top - shape.radius) * (z + l) / shape.length
    Rt, ct = test.placement.rotation, test.placement.translation
    zx, zw = np.polynomial.legendre.leggauss(n_axial)
    zx, zw = zx * l, zw * l
    field = box_field(box)
    pivot = np.asarray(pivot, float)
    axis = np.asarray(axis, float) / np.linalg.norm(axis)
    scales = np.ones(8) if scales is None else np.asarray(scales, float)

    def f(x):
        u, ph = x[:, 0], x[:, 1]
        m = len(u)
        zz = np.repeat(zx[None, :], m, axis=0)
        ro = radius(zz)
        r = u[:, None] * ro
        P = np.stack([r * np.cos(ph)[:, None], r * np.sin(ph)[:, None], zz], axis=-1).reshape(-1, 3)
        w = test.density * (r * ro * zw[None, :]).reshape(-1)
        X = P @ Rt.T + ct
        U, g, T = field(X, G)
        return _moments(X, w, U, g, T, pivot, axis).reshape(m, n_axial, 8).sum(axis=1) / scales

    res = cubature(f, [0.0, phi_near - np.pi], [1.0, phi_near + np.pi], rtol=0.0, atol=atol,
                   max_subdivisions=200000)
    assert res.status == "converged", res.status
    return res.estimate * scales, res.error * scales


def ellipsoid_gradient(points, radii, rho, G=G):
    """T_ij = d g_i / d x_j outside a homogeneous ellipsoid (local frame), differentiating the classical
    exterior field g_i = -2 pi G rho a b c x_i I_i(lambda), I_i = (2/3) R_D (Carlson, scipy.special):
    T_ij = -2 pi G rho abc [delta_ij I_i - 2 x_i x_j / (A_i A_j Delta S)], A_i = a_i^2 + lambda,
    Delta = sqrt(A_x A_y A_z), S = sum x_k^2 / A_k^2 (from d lambda / d x_j and dI_i/d lambda = -1/(A_i Delta))."""
    from truepull.integrate.field_ellipsoid import confocal_parameter

    r = np.asarray(radii, float)
    lam = confocal_parameter(points, r)
    A = r[None, :] ** 2 + lam[:, None]
    I = (2.0 / 3.0) * np.stack([elliprd(A[:, 1], A[:, 2], A[:, 0]), elliprd(A[:, 2], A[:, 0], A[:, 1]),
                                elliprd(A[:, 0], A[:, 1], A[:, 2])], axis=1)
    k = np.pi * G * rho * r.prod()
    D = np.sqrt(A.prod(axis=1))
    S = (points**2 / A**2).sum(axis=1)
    q = points / A
    return -2.0 * k * (np.einsum("ni,ij->nij", I, np.eye(3)) - 2.0 * np.einsum("ni,nj->nij", q, q) / (D * S)[:, None, None])


def tetrahedron_rule(n):
    """Barycentric coordinates (M, 4) and weights (M,) (summing to 1/6, the unit tetrahedron's volume) of
    the collapsed Gauss rule: x = v0 + s (v1 - v0) + s t (v2 - v1) + s t w (v3 - v2), Jacobian s^2 t, an
    n-point numpy Gauss-Legendre rule in each of s, t, w."""
    x, w = np.polynomial.legendre.leggauss(n)
    x, w = 0.5 * (x + 1.0), 0.5 * w
    S, T, W = (a.ravel() for a in np.meshgrid(x, x, x, indexing="ij"))
    ws = np.einsum("i,j,k->ijk", w, w, w).ravel() * S * S * T
    return np.stack([1 - S, S * (1 - T), S * T * (1 - W), S * T * W], axis=1), ws


def ellipsoid_field_on_mesh(mesh_body, ellipsoid, pivot, axis, n, G=G):
    """[F(3), torque(3), K, E] (8,) on a convex uniform mesh body in the field of a homogeneous ellipsoid:
    the mesh's volume as tetrahedra fanned from its centroid, each with `tetrahedron_rule(n)`, the
    ellipsoid's exterior field (Carlson closed form) and `ellipsoid_gradient` at the nodes."""
    from truepull.integrate.field_ellipsoid import ellipsoid_field

    V = mesh_body.placement.apply(np.asarray(mesh_body.shape.vertices, float))
    F = np.asarray(mesh_body.shape.faces)
    c0 = mesh_body.com
    tets = np.stack([np.repeat(c0[None], len(F), 0), V[F[:, 0]], V[F[:, 1]], V[F[:, 2]]], axis=1)
    vol6 = np.abs(np.einsum("ni,ni->n", np.cross(tets[:, 2] - tets[:, 0], tets[:, 3] - tets[:, 0]),
                            tets[:, 1] - tets[:, 0]))
    bary, w = tetrahedron_rule(n)
    X = np.einsum("qk,fkd->fqd", bary, tets).reshape(-1, 3)
    wt = mesh_body.density * (vol6[:, None] * w[None, :]).reshape(-1)
    Re, te = ellipsoid.placement.rotation, ellipsoid.placement.translation
    radii = np.asarray(ellipsoid.shape.radii, float)
    L = (X - te) @ Re
    U, gl = ellipsoid_field(L, radii, ellipsoid.density, G)
    T = np.einsum("ij,njk,lk->nil", Re, ellipsoid_gradient(L, radii, ellipsoid.density, G), Re)
    axis = np.asarray(axis, float) / np.linalg.norm(axis)
    return _moments(X, wt, U, gl @ Re.T, T, np.asarray(pivot, float), axis).sum(axis=0)


def plate_on_axis(hx, hy, t, rho_m, z, G=G):
    """g_z above the centre of a uniform box of half-widths hx, hy and thickness t (centred at z = 0) at
    height z > t/2: a thin rectangular plate at depth d pulls with 4 G sigma atan(hx hy / (d sqrt(hx^2 +
    hy^2 + d^2))) (its solid angle, from memory), integrated over the thickness with scipy.integrate.quad.
    Returns (g_z, error)."""
    def plate(zp):
        d = z - zp
        return -4.0 * G * rho_m * np.arctan(hx * hy / (d * np.sqrt(hx * hx + hy * hy + d * d)))

    return quad(plate, -0.5 * t, 0.5 * t, epsabs=0.0, epsrel=2e-14, limit=200)


# ------------------------------------------------------------------------------------------
# the prism closed form at 40 digits (mpmath), independent of integrate/field_prism.py
# ------------------------------------------------------------------------------------------

def _xlog(c, v):
    """c ln(v), zero when c == 0 (the x ln x limits of the corner sums)."""
    return mp.mpf(0) if c == 0 else c * mp.log(v)


def _xatan(c, num, den):
    """c atan(num / den), zero when c == 0 or num == 0."""
    if c == 0 or num == 0:
        return mp.mpf(0)
    return c * mp.atan(num / den)


def prism_mp(point, half, rho, G=G, dps=40):
    """(U, g (3,), T (3,3)) as mpmath numbers at `dps` digits for a uniform prism of half-sizes
    `half` centred at the origin, at `point` (its frame), by the corner sums of Nagy, Papp and
    Benedek (2000, J. Geodesy 74:552, eqs. 3-5 and their second derivatives): with x, y, z the corner
    minus the point and r their length, integral dV/r = sum_corners s F,
    F = xy ln(z+r) + yz ln(x+r) + zx ln(y+r) - x^2/2 atan(yz/(xr)) - y^2/2 atan(zx/(yr))
    - z^2/2 atan(xy/(zr)), s = +1 / -1 for the upper / lower end of each axis; integral x/r^3 dV =
    -sum s dF/dx with dF/dx = y ln(z+r) + z ln(y+r) - x atan(yz/(xr)); d2F/dxdy = ln(z+r),
    d2F/dx2 = -atan(yz/(xr)). U = -G rho I, g = G rho J, T_ij = -G rho sum s d2F/dx_i dx_j.
    The point's coordinates are taken exactly as given (doubles or mpf)."""
    with mp.workdps(dps):
        p = [mp.mpf(c) for c in point]
        h = [mp.mpf(c) for c in half]
        I = mp.mpf(0)
        J = [mp.mpf(0)] * 3
        T = [[mp.mpf(0)] * 3 for _ in range(3)]
        for i in (0, 1):
            for j in (0, 1):
                for k in (0, 1):
                    s = (1 if i else -1) * (1 if j else -1) * (1 if k else -1)
                    c = [(h[0] if i else -h[0]) - p[0], (h[1] if j else -h[1]) - p[1],
                         (h[2] if k else -h[2]) - p[2]]
                    r = mp.sqrt(c[0] ** 2 + c[1] ** 2 + c[2] ** 2)
                    F = mp.mpf(0)
                    for a in range(3):
                        x, y, z = c[a], c[(a + 1) % 3], c[(a + 2) % 3]
                        F += _xlog(x * y, z + r) - _xatan(x * x / 2, y * z, x * r)
                    I += s * F
                    for a in range(3):
                        x, y, z = c[a], c[(a + 1) % 3], c[(a + 2) % 3]
                        dF = _xlog(y, z + r) + _xlog(z, y + r) - _xatan(x, y * z, x * r)
                        J[a] -= s * dF
                        if y * z != 0:
                            T[a][a] += s * mp.atan(y * z / (x * r)) if x != 0 else 0
                        b = (a + 1) % 3
                        T[a][b] -= s * mp.log(z + r) if (x != 0 or y != 0 or z > 0) else 0
        k = mp.mpf(float(G)) * mp.mpf(float(rho))
        U = -k * I
        g = [k * v for v in J]
        Tm = [[mp.mpf(0)] * 3 for _ in range(3)]
        for a in range(3):
            Tm[a][a] = -k * T[a][a]
            b = (a + 1) % 3
            Tm[a][b] = Tm[b][a] = -k * T[a][b]
        return U, g, Tm


def placed_field_mp(local_field, placement, point, dps=40):
    """(U, g (3x1), T (3x3), mpmath matrices) at world `point` (doubles) of a body placed by
    `placement` whose field in its own frame is `local_field(local point, 3 mpf) -> (U, g, T)`: the
    change to the body's frame, local = R^T (p - t), and the rotation back, g = R g_local and
    T = R T_local R^T, are done in mpmath from the doubles, so the result is the exact answer to the
    question asked of the engine."""
    with mp.workdps(dps):
        R = mp.matrix([[mp.mpf(float(x)) for x in row] for row in placement.rotation])
        d = mp.matrix([mp.mpf(float(point[i])) - mp.mpf(float(placement.translation[i])) for i in range(3)])
        local = R.T * d
        u, gl, Tl = local_field([local[i] for i in range(3)])
        return u, R * mp.matrix(gl), R * mp.matrix(Tl) * R.T


# ------------------------------------------------------------------------------------------
# the homogeneous polyhedron at 40 digits (mpmath), independent of integrate/field_polyhedron.py
# ------------------------------------------------------------------------------------------

class PolyhedronMP:
    """Potential, field and gradient of a homogeneous closed triangle mesh (outward-wound) at `dps`
    digits, by the closed form of Werner and Scheeres (1997, Celest. Mech. Dyn. Astron. 65:313,
    eqs. 15-16 and 27-28): with r_e, r_f the vectors from the point to any point of edge e / face f,
    U = -(G rho / 2)(sum_e r_e.E_e.r_e L_e - sum_f r_f.F_f.r_f w_f), g = -grad U
    = -G rho sum_e E_e r_e L_e + G rho sum_f F_f r_f w_f, T = dg/dx = G rho (sum_e E_e L_e - sum_f F_f w_f),
    F_f = n_f n_f^T, E_e = n_A n_A12^T + n_B n_B21^T (face normals times the outward in-plane edge
    normals of the two faces sharing edge e), L_e = ln((a + b + e)/(a + b - e)) and w_f the signed
    solid angle 2 atan2(r_1.(r_2 x r_3), r_1 r_2 r_3 + r_1 r_2.r_3 + r_2 r_3.r_1 + r_3 r_1.r_2)
    (Van Oosterom and Strackee 1983). Every quantity is formed in mpmath from the doubles given; a
    point must not lie on an edge (there L is infinite and its zero coefficient is not separated)."""

    def __init__(self, vertices, faces, dps=40):
        self.dps = dps
        with mp.workdps(dps):
            self.v = [[mp.mpf(float(c)) for c in row] for row in np.asarray(vertices, float)]
            self.faces = [tuple(int(i) for i in f) for f in np.asarray(faces)]
            self.normals = []
            owner = {}
            for k, (i, j, l) in enumerate(self.faces):
                n = _mp_cross(_mp_sub(self.v[j], self.v[i]), _mp_sub(self.v[l], self.v[i]))
                self.normals.append(_mp_scale(n, 1 / mp.sqrt(_mp_dot(n, n))))
                for a, b in ((i, j), (j, l), (l, i)):
                    owner[(a, b)] = k
            self.edges = []      # (vertex a, vertex b, length, dyad as 3x3 lists)
            for (a, b), fa in owner.items():
                if a > b:
                    continue
                fb = owner[(b, a)]
                d = _mp_sub(self.v[b], self.v[a])
                length = mp.sqrt(_mp_dot(d, d))
                u = _mp_scale(d, 1 / length)
                na, nb = self.normals[fa], self.normals[fb]
                ea = _mp_cross(u, na)                       # in face A's plane, out of face A (a -> b in A)
                eb = _mp_cross(_mp_scale(u, -1), nb)        # face B runs b -> a
                E = [[na[r] * ea[c] + nb[r] * eb[c] for c in range(3)] for r in range(3)]
                self.edges.append((a, b, length, E))

    def field(self, point, rho, G):
        """(U, g (3,), T (3x3 lists)) as mpf at `point` (3 doubles or mpf, the mesh's frame)."""
        with mp.workdps(self.dps):
            p = [mp.mpf(c) for c in point]
            r = [_mp_sub(v, p) for v in self.v]
            rn = [mp.sqrt(_mp_dot(x, x)) for x in r]
            SU = mp.mpf(0)
            Sg = [mp.mpf(0)] * 3
            ST = [[mp.mpf(0)] * 3 for _ in range(3)]
            for (i, j, l), n in zip(self.faces, self.normals):
                r1, r2, r3 = r[i], r[j], r[l]
                a, b, c = rn[i], rn[j], rn[l]
                num = _mp_dot(r1, _mp_cross(r2, r3))
                den = a * b * c + a * _mp_dot(r2, r3) + b * _mp_dot(r3, r1) + c * _mp_dot(r1, r2)
                w = 2 * mp.atan2(num, den) if num != 0 else mp.mpf(0)
                h = _mp_dot(n, r1)
                SU -= h * h * w
                for k in range(3):
                    Sg[k] += n[k] * h * w
                    for m in range(3):
                        ST[k][m] -= n[k] * n[m] * w
            for ia, ib, length, E in self.edges:
                ra = r[ia]
                L = mp.log((rn[ia] + rn[ib] + length) / (rn[ia] + rn[ib] - length))
                Er = [_mp_dot(E[k], ra) for k in range(3)]
                SU += _mp_dot(ra, Er) * L
                for k in range(3):
                    Sg[k] -= Er[k] * L
                    for m in range(3):
                        ST[k][m] += E[k][m] * L
            s = mp.mpf(float(G)) * mp.mpf(float(rho))
            return -s * SU / 2, [s * x for x in Sg], [[s * x for x in row] for row in ST]


def _mp_sub(a, b):
    return [a[0] - b[0], a[1] - b[1], a[2] - b[2]]


def _mp_dot(a, b):
    return a[0] * b[0] + a[1] * b[1] + a[2] * b[2]


def _mp_cross(a, b):
    return [a[1] * b[2] - a[2] * b[1], a[2] * b[0] - a[0] * b[2], a[0] * b[1] - a[1] * b[0]]


def _mp_scale(a, s):
    return [a[0] * s, a[1] * s, a[2] * s]


# ------------------------------------------------------------------------------------------
# solids of revolution at 40 digits (mpmath): the surface form of the field, azimuth by mp.quad
# ------------------------------------------------------------------------------------------

def cylinder_meridian(R, L):
    """The meridian boundary of a solid cylinder (radius R, length L, centred at z = 0) as generators
    (r0, z0, r1, z1), run so that (dz, -dr) points out of the body: base, side, top."""
    h = 0.5 * L
    return [(0.0, -h, R, -h), (R, -h, R, h), (R, h, 0.0, h)]


def _generator_mp(r0, z0, r1, z1, rho, z, cphi):
    """integral over s in [0, 1] of r(s) / |x'(s) - x| at mpmath precision, x'(s) the generator at
    azimuth cos phi' = cphi, x = (rho, 0, z): |x' - x|^2 = A s^2 + B s + C, and with h^2 = C - B^2/(4A),
    s* = -B/(2A): integral of ds/sqrt(Q) = (asinh(sqrt A (1 - s*)/h) + asinh(sqrt A s*/h)) / sqrt A,
    integral of s ds/sqrt(Q) = (sqrt Q(1) - sqrt Q(0))/A + s* times the first (standard integrals,
    e.g. Gradshteyn and Ryzhik, Table of Integrals, 7th ed., 2.261 and 2.264; from memory)."""
    dr, dz = r1 - r0, z1 - z0
    A = dr * dr + dz * dz
    B = 2 * (dr * (r0 - rho * cphi) + dz * (z0 - z))
    C = r0 * r0 - 2 * r0 * rho * cphi + rho * rho + (z0 - z) ** 2
    sa = mp.sqrt(A)
    s_star = -B / (2 * A)
    h = mp.sqrt(C - B * B / (4 * A))
    i0 = (mp.asinh(sa * (1 - s_star) / h) + mp.asinh(sa * s_star / h)) / sa
    i1 = (mp.sqrt(A + B + C) - mp.sqrt(C)) / A + s_star * i0
    return r0 * i0 + dr * i1


def revolution_surface_mp(generators, rho_m, rho, z, G=G, dps=40, splits=()):
    """(U, g_rho, g_z) as mpmath numbers at `dps` digits of a uniform solid of revolution whose meridian
    boundary is `generators` (see `cylinder_meridian`), at cylindrical (rho, z): by the divergence
    theorem U = -(G rho/2) integral of ((x' - x).n')/|x' - x| dA', g = -G rho integral of n'/|x' - x| dA',
    with n' dA' = (dz cos phi', dz sin phi', -dr) r(s) ds dphi' on each generator, so that
    (x' - x).n' dA' = (dz (r0 - rho cos phi') - dr (z0 - z)) r(s) ds dphi'; s in closed form
    (`_generator_mp`), phi' over [0, pi] (twice, by symmetry) by mpmath.quad (tanh-sinh), split at
    `splits` (azimuths in (0, pi) where the integrand is steep)."""
    with mp.workdps(dps):
        g = [tuple(mp.mpf(float(c)) for c in gen) for gen in generators]
        rho_, z_ = mp.mpf(float(rho)), mp.mpf(float(z))
        pts = [mp.mpf(0)] + [mp.mpf(float(s)) for s in splits] + [mp.pi]

        def part(which):
            def f(phi):
                c = mp.cos(phi)
                tot = mp.mpf(0)
                for r0, z0, r1, z1 in g:
                    J = _generator_mp(r0, z0, r1, z1, rho_, z_, c)
                    dr, dz = r1 - r0, z1 - z0
                    if which == 0:
                        tot += (dz * (r0 - rho_ * c) - dr * (z0 - z_)) * J
                    elif which == 1:
                        tot += dz * c * J
                    else:
                        tot -= dr * J
                return tot
            return 2 * mp.quad(f, pts)

        k = mp.mpf(float(G)) * mp.mpf(float(rho_m))
        return -k / 2 * part(0), -k * part(1), -k * part(2)
