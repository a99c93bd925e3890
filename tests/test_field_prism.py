"""Uniform prism closed form against brute-force quadrature, the Bouguer slab, the far field and
Laplace/Poisson."""

import numpy as np
import pytest
from scipy.integrate import cubature

from truepull.geometry.errors import InputError
from truepull.integrate import field_prism as fp
from truepull.integrate.field_prism import prism_field, prism_gradient

G = 6.674e-11
RHO = 7850.0
H = np.array([0.05, 0.03, 0.02])          # half-sizes in m


def volume_reference(p, h, rtol=1e-12):
    """Brute force of the defining integrals I = int dV/r, J = int (x'-p)/r^3 dV over the box by
    scipy.integrate.cubature (adaptive Gauss-Kronrod), with its own error estimate."""
    p = np.asarray(p, float)

    def f(x):
        d = x - p
        r = np.linalg.norm(d, axis=-1)
        return np.stack([1 / r, d[:, 0] / r ** 3, d[:, 1] / r ** 3, d[:, 2] / r ** 3], axis=-1)

    scale = np.prod(2 * h) / np.linalg.norm(p) ** 2
    res = cubature(f, -h, h, rtol=rtol, atol=rtol * scale * 1e-3, max_subdivisions=20000)
    assert res.status == "converged"
    return res.estimate, res.error


def surface_reference(p, h, rtol=1e-13):
    """The same integrals by the divergence theorem over cones from p to each face:
    I = sum_f d_f/2 int_f dA/r and J = sum_f d_f int_f (x'-p)/r^3 dA, with d_f = n_f.(x'-p) the
    signed distance of the face plane (div of (x'-p)/(2r) is 1/r; div of (x'-p)(x'-p)_i/r^3 is
    (x'-p)_i/r^3). Faces through p have d_f = 0 and drop out, so p may lie inside the prism or on
    its surface, edges and vertices; each remaining face integral is smooth and is done by
    scipy.integrate.cubature."""
    p = np.asarray(p, float)
    I = 0.0
    J = np.zeros(3)
    for axis in range(3):
        others = [k for k in range(3) if k != axis]
        for side in (-1.0, 1.0):
            dist = h[axis] - side * p[axis]          # n.(x' - p), n = side * e_axis outward
            if dist == 0.0:
                continue

            def f(uv, axis=axis, side=side, others=others):
                x = np.empty((uv.shape[0], 3))
                x[:, axis] = side * h[axis]
                x[:, others[0]] = uv[:, 0]
                x[:, others[1]] = uv[:, 1]
                d = x - p
                r = np.linalg.norm(d, axis=-1)
                return np.concatenate([(1.0 / r)[:, None], d / r[:, None] ** 3], axis=1)

            scale = np.prod(2 * h[others]) / max(np.linalg.norm(p), np.linalg.norm(h)) ** 2
            res = cubature(f, -h[others], h[others], rtol=rtol, atol=rtol * scale * 1e-2,
                           max_subdivisions=20000)
            assert res.status == "converged"
            I += dist / 2 * res.estimate[0]
            J += dist * res.estimate[1:]
    return I, J


EXTERIOR = [
    [0.09, 0.01, -0.005],           # beside the +x face
    [0.0503, 0.01, 0.005],          # 0.3 mm from the +x face
    [0.05, 0.04, 0.0],              # in the plane of the +x face, beside the prism
    [0.06, 0.03, 0.01],             # in the plane of the +y face
    [0.08, 0.05, 0.04],             # off a vertex
    [-0.2, 0.15, 0.1],              # a few sizes away
]


@pytest.mark.parametrize("p", EXTERIOR)
def test_exterior_potential_and_field_match_volume_quadrature(p):
    # Reference: scipy.integrate.cubature of the defining volume integral (general-purpose library).
    ref, err = volume_reference(p, H)
    U, g = prism_field([p], H, RHO, G)
    assert abs(err[0] / ref[0]) < 1e-11
    np.testing.assert_allclose(-U[0] / (G * RHO), ref[0], rtol=1e-10)
    gref = ref[1:]
    assert np.linalg.norm(g[0] / (G * RHO) - gref) < 1e-10 * np.linalg.norm(gref)


@pytest.mark.parametrize("p", [[0.01, -0.005, 0.003], [0.049, 0.029, -0.019], [0.0, 0.0, 0.0]])
def test_interior_matches_divergence_theorem_quadrature(p):
    # Reference: Gauss's divergence theorem, face integrals by scipy.integrate.cubature.
    I, J = surface_reference(p, H)
    U, g = prism_field([p], H, RHO, G)
    np.testing.assert_allclose(-U[0] / (G * RHO), I, rtol=1e-11)
    scale = max(np.linalg.norm(J), 1e-3 * np.linalg.norm(H))
    assert np.linalg.norm(g[0] / (G * RHO) - J) < 1e-11 * scale


@pytest.mark.parametrize("p", [
    [0.05, 0.03, 0.025],     # on the line of an edge, beyond its end
    [0.05, 0.03, 0.01],      # on an edge
    [0.05, 0.03, 0.02],      # on a vertex
    [0.05, 0.01, 0.01],      # on a face
    [-0.05, 0.0, 0.0],       # at the centre of a face
])
def test_surface_edge_and_vertex_points_match_quadrature(p):
    # Reference: divergence theorem over cones from the point, scipy.integrate.cubature per face.
    I, J = surface_reference(p, H)
    U, g = prism_field([p], H, RHO, G)
    assert np.all(np.isfinite(U)) and np.all(np.isfinite(g))
    np.testing.assert_allclose(-U[0] / (G * RHO), I, rtol=1e-11)
    assert np.linalg.norm(g[0] / (G * RHO) - J) < 1e-11 * np.linalg.norm(J)


def test_continuous_when_approaching_faces_edges_and_vertices():
    # A finite density gives a continuous potential and field (Kellogg, Foundations of Potential Theory, 1929; from memory):
    # values a distance eps away converge to the value on the surface, the field error ~ eps log eps.
    targets = np.array([[0.05, 0.01, 0.01], [0.05, 0.03, 0.01], [0.05, 0.03, 0.02]])
    U0, g0 = prism_field(targets, H, RHO, G)
    gscale = np.linalg.norm(g0, axis=1)
    direction = np.array([1.0, 0.7, 0.4]) / np.linalg.norm([1.0, 0.7, 0.4])
    for sgn in (1.0, -1.0):                  # from outside and from inside
        for eps in (1e-7, 1e-9):
            U, g = prism_field(targets + sgn * eps * direction, H, RHO, G)
            np.testing.assert_allclose(U, U0, rtol=100 * eps / 0.05)
            assert np.all(np.linalg.norm(g - g0, axis=1) < 1e3 * eps / 0.05 * gscale)


def test_bouguer_slab_limit():
    # Infinite slab: g = 2 pi G rho t (Bouguer; Telford, Geldart and Sheriff, Applied Geophysics, 2nd ed., 1990, gravity chapter; from memory, equation number not checked). For a square slab of
    # half-width W seen on its axis from height z the missing outer part is G rho t z times the
    # integral of dA/r^3 outside the square, 4 sqrt(2)/W, so the relative deficit is
    # (4 sqrt(2) / (2 pi)) z / W (thin-slab estimate, derived in the comment; it holds to O(z/W)^2).
    t = 0.01
    z = 0.02
    infinite = 2 * np.pi * G * RHO * t
    deficits = []
    for W in (1e2 * t, 1e3 * t, 1e4 * t):
        U, g = prism_field([[0.0, 0.0, z]], [W, W, t / 2], RHO, G)
        assert abs(g[0, 0]) < 1e-12 * infinite and abs(g[0, 1]) < 1e-12 * infinite
        deficit = (infinite + g[0, 2]) / infinite     # g_z points down, toward the slab
        predicted = 4 * np.sqrt(2) / (2 * np.pi) * z / W
        deficits.append(deficit)
        np.testing.assert_allclose(deficit, predicted, rtol=5 * z / W)
    # the approach is like 1/W
    np.testing.assert_allclose(deficits[0] / deficits[2], 100.0, rtol=1e-2)


def quadrupole_field(p, h, rho, G):
    """Point mass plus quadrupole of a centred uniform box (multipole expansion,
    Jackson, Classical Electrodynamics, 3rd ed., sec. 4.1; from memory):
    Q_ij = int (3 x_i x_j - r^2 delta_ij) dm = M diag(2hx^2 - hy^2 - hz^2, ...)/3; the octupole
    vanishes by symmetry, so the next term is the hexadecapole, ~ (h/r)^4 relative."""
    M = rho * np.prod(2 * h)
    s = h ** 2
    Q = M / 3.0 * np.diag([2 * s[0] - s[1] - s[2], 2 * s[1] - s[0] - s[2], 2 * s[2] - s[0] - s[1]])
    r = np.linalg.norm(p, axis=1)
    xQx = np.einsum("ni,ij,nj->n", p, Q, p)
    U = -G * M / r - G * xQx / (2 * r ** 5)
    g = (-G * M * p / r[:, None] ** 3 + G * (p @ Q) / r[:, None] ** 5
         - 2.5 * G * xQx[:, None] * p / r[:, None] ** 7)
    return U, g


def test_far_field_is_point_mass_plus_quadrupole():
    # Multipole expansion (Jackson, Classical Electrodynamics, 3rd ed., sec. 4.1; from memory): the point+quadrupole residual falls like (h/r)^4 relative.
    rng = np.random.default_rng(7)
    dirs = rng.normal(size=(20, 3))
    dirs /= np.linalg.norm(dirs, axis=1)[:, None]
    diag = np.linalg.norm(H)
    res = {}
    for k in (10.0, 100.0, 1000.0):
        p = dirs * k * diag
        U, g = prism_field(p, H, RHO, G)
        Uq, gq = quadrupole_field(p, H, RHO, G)
        res[k] = max(np.max(np.abs(U / Uq - 1)),
                     np.max(np.linalg.norm(g - gq, axis=1) / np.linalg.norm(gq, axis=1)))
        assert res[k] < 5.0 / k ** 4
    assert res[10.0] / res[100.0] > 0.5e4       # the fourth-power approach, measured
    # while the point mass alone (Newton) is off by the quadrupole term, ~ (h/r)^2 relative
    p = dirs * 10 * diag
    U, g = prism_field(p, H, RHO, G)
    M = RHO * np.prod(2 * H)
    point_only = np.max(np.abs(U / (-G * M / np.linalg.norm(p, axis=1)) - 1))
    assert 1e-4 < point_only < 1e-2 and point_only > 100 * res[10.0]


def ld_gauss_legendre(n):
    """Gauss-Legendre nodes and weights refined by Newton's method in numpy long double."""
    x, _ = np.polynomial.legendre.leggauss(n)
    x = x.astype(np.longdouble)
    for _ in range(4):
        p0, p1 = np.ones_like(x), x.copy()
        for k in range(2, n + 1):
            p0, p1 = p1, ((2 * k - 1) * x * p1 - (k - 1) * p0) / k
        dp = n * (x * p1 - p0) / (x * x - 1)
        x = x - p1 / dp
    p0, p1 = np.ones_like(x), x.copy()
    for k in range(2, n + 1):
        p0, p1 = p1, ((2 * k - 1) * x * p1 - (k - 1) * p0) / k
    dp = n * (x * p1 - p0) / (x * x - 1)
    return x, 2 / ((1 - x * x) * dp * dp)


@pytest.mark.parametrize("h", [[0.05, 0.03, 0.02], [0.05, 0.0005, 0.015], [0.5, 0.5, 0.005]])
def test_far_points_keep_full_precision(h):
    # Reference: a 24^3 Gauss-Legendre rule of the defining integral in long double (80-bit),
    # converged far below double precision at these distances (general quadrature theory).
    h = np.array(h)
    x, w = ld_gauss_legendre(24)
    rng = np.random.default_rng(3)
    worst = 0.0
    for k in (4.0, 30.0, 1e3, 1e6):
        for _ in range(3):
            d = rng.normal(size=3)
            p = d / np.linalg.norm(d) * k * np.linalg.norm(h)
            X, Y, Z = np.meshgrid(h[0] * x - p[0], h[1] * x - p[1], h[2] * x - p[2],
                                  indexing="ij")
            W = w[:, None, None] * w[None, :, None] * w[None, None, :] * np.prod(h)
            r = np.sqrt(X * X + Y * Y + Z * Z)
            I = float((W / r).sum())
            J = np.array([float((W * c / r ** 3).sum()) for c in (X, Y, Z)])
            U, g = prism_field([p], h, 1.0, 1.0)
            worst = max(worst, abs(-U[0] / I - 1), np.linalg.norm(g[0] - J) / np.linalg.norm(J))
    assert worst < 1e-13


def test_gradient_matches_central_differences():
    # Central differences of the field (Taylor: error O(step^2)), inside, outside, near and far.
    pts = np.array([[0.07, 0.01, 0.03], [0.02, 0.04, -0.01], [0.01, 0.01, 0.01],
                    [0.3, 0.2, 0.1], [1.0, -0.5, 0.3]])
    T = prism_gradient(pts, H, RHO, G)
    step = 1e-6
    for j in range(3):
        e = np.zeros(3)
        e[j] = step
        fd = (prism_field(pts + e, H, RHO, G)[1] - prism_field(pts - e, H, RHO, G)[1]) / (2 * step)
        err = np.abs(T[:, :, j] - fd).max(axis=1) / np.abs(T).max(axis=(1, 2))
        assert np.all(err < 1e-7)
    assert np.allclose(T, np.transpose(T, (0, 2, 1)), rtol=0, atol=1e-15 * np.abs(T).max())


def test_gradient_obeys_laplace_outside_and_poisson_inside():
    # Laplace: trace T = 0 outside the mass; Poisson: trace T = -4 pi G rho inside
    # (Kellogg, Foundations of Potential Theory, 1929; from memory).
    rng = np.random.default_rng(11)
    pts = rng.uniform(-0.08, 0.08, size=(400, 3))
    inside = np.all(np.abs(pts) < H, axis=1)
    T = prism_gradient(pts, H, RHO, G)
    tr = np.trace(T, axis1=1, axis2=2)
    scale = 4 * np.pi * G * RHO
    assert inside.sum() > 5
    np.testing.assert_allclose(tr[inside], -scale, rtol=1e-12)
    assert np.all(np.abs(tr[~inside]) < 1e-12 * scale)


def test_density_scales_and_hole_is_negative():
    # Linearity of the volume integral in the density.
    p = [[0.1, 0.02, 0.0]]
    U1, g1 = prism_field(p, H, 1000.0, G)
    U2, g2 = prism_field(p, H, -2000.0, G)
    np.testing.assert_allclose(U2, -2 * U1, rtol=1e-15)
    np.testing.assert_allclose(g2, -2 * g1, rtol=1e-15)
    assert U1[0] < 0 and g1[0, 0] < 0      # attraction toward the prism (at -x from the point)


def test_quadrature_switch_is_seamless():
    # The closed form and the far-field quadrature agree where they meet (both vs each other,
    # and both exact to ~1e-13 by the tests above).
    diag = np.linalg.norm(H)
    pts = np.array([[k * diag, 0.3 * diag, 0.1 * diag] for k in np.linspace(1.5, 12, 40)])
    Uc, gc = fp._prism_field_kernel(pts, *H, RHO, G, False, fp._GL_NODES, fp._GL_WEIGHTS, fp._MAX_POINTS)
    Uq, gq = prism_field(pts, H, RHO, G)
    np.testing.assert_allclose(Uq, Uc, rtol=1e-12)
    assert np.all(np.linalg.norm(gq - gc, axis=1) < 1e-12 * np.linalg.norm(gc, axis=1))
    Tc = fp._prism_gradient_kernel(pts, *H, RHO, G, False, fp._GL_NODES, fp._GL_WEIGHTS, fp._MAX_POINTS)
    Tq = prism_gradient(pts, H, RHO, G)
    assert np.all(np.abs(Tq - Tc).max(axis=(1, 2)) < 1e-11 * np.abs(Tc).max(axis=(1, 2)))


@pytest.mark.parametrize("h", [[0.1, -0.1, 0.1], [0.1, 0.0, 0.1], [0.1, 0.2], [np.nan, 1, 1]])
def test_bad_sizes_are_input_errors(h):
    with pytest.raises(InputError):
        prism_field([[1.0, 0, 0]], h, RHO, G)


def test_error_estimate_bounds_the_rounding_error():
    # Reference: the plain eight-corner Nagy-Papp-Benedek sums evaluated at 50 digits with mpmath
    # (arbitrary precision), so the difference is this kernel's rounding alone.
    mp = pytest.importorskip("mpmath")
    mp.mp.dps = 50

    def nagy(p, h):
        p = [mp.mpf(float(c)) for c in p]
        h = [mp.mpf(float(c)) for c in h]
        I = mp.mpf(0)
        J = [mp.mpf(0)] * 3

        def at(a, b, c, r):
            return mp.atan(b * c / (a * r)) if a != 0 else mp.mpf(0)

        for i in (0, 1):
            for j in (0, 1):
                for k in (0, 1):
                    x = (2 * i - 1) * h[0] - p[0]
                    y = (2 * j - 1) * h[1] - p[1]
                    z = (2 * k - 1) * h[2] - p[2]
                    s = (-1) ** (i + j + k + 1)
                    r = mp.sqrt(x * x + y * y + z * z)
                    lx, ly, lz = mp.log(x + r), mp.log(y + r), mp.log(z + r)
                    I += s * (y * z * lx + x * z * ly + x * y * lz - x * x / 2 * at(x, y, z, r)
                              - y * y / 2 * at(y, x, z, r) - z * z / 2 * at(z, x, y, r))
                    J[0] -= s * (y * lz + z * ly - x * at(x, y, z, r))
                    J[1] -= s * (x * lz + z * lx - y * at(y, x, z, r))
                    J[2] -= s * (x * ly + y * lx - z * at(z, x, y, r))
        return float(I), np.array([float(c) for c in J])

    rng = np.random.default_rng(12)
    for h in ([0.05, 0.03, 0.02], [0.05, 0.0005, 0.0005], [0.05, 0.05, 0.0005]):
        h = np.array(h)
        bound = fp.prism_error_estimate(h)
        for _ in range(12):
            d = rng.normal(size=3)
            p = d / np.linalg.norm(d) * rng.uniform(1.0, 4.0) * np.linalg.norm(h)
            if np.all(np.abs(p) <= h):
                continue
            I, J = nagy(p, h)
            U, g = prism_field([p], h, 1.0, 1.0)
            assert abs(-U[0] / I - 1) < bound
            assert np.linalg.norm(g[0] - J) / np.linalg.norm(J) < bound
