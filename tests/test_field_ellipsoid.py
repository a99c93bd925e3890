"""Homogeneous ellipsoid field against the sphere, brute-force quadrature, Poisson and multipoles."""

import numpy as np
import pytest
from scipy.integrate import cubature
from scipy.optimize import brentq

from truepull.geometry.errors import InputError
from truepull.integrate.field_ellipsoid import confocal_parameter, ellipsoid_field
from truepull.integrate.field_point import point_field

G = 6.674e-11
RHO = 8000.0
TRIAXIAL = np.array([0.05, 0.03, 0.02])
SHAPES = [TRIAXIAL, np.array([0.04, 0.04, 0.015]), np.array([0.02, 0.02, 0.06])]


def volume_reference(p, radii, rtol=1e-12):
    """I = int dV/r and J = int (x'-p)/r^3 dV over the ellipsoid by scipy.integrate.cubature in
    ellipsoidal-scaled spherical coordinates x' = (a s sin t cos f, b s sin t sin f, c s cos t),
    dV = a b c s^2 sin t ds dt df."""
    a, b, c = radii
    p = np.asarray(p, float)

    def f(q):
        s, t, ph = q[:, 0], q[:, 1], q[:, 2]
        x = np.stack([a * s * np.sin(t) * np.cos(ph), b * s * np.sin(t) * np.sin(ph),
                      c * s * np.cos(t)], axis=1)
        d = x - p
        r = np.linalg.norm(d, axis=1)
        w = a * b * c * s ** 2 * np.sin(t)
        return np.concatenate([(w / r)[:, None], (w / r ** 3)[:, None] * d], axis=1)

    scale = 4.0 / 3.0 * np.pi * a * b * c / np.dot(p, p)
    res = cubature(f, [0, 0, 0], [1, np.pi, 2 * np.pi], rtol=rtol, atol=rtol * scale * 1e-2,
                   max_subdivisions=20000)
    assert res.status == "converged"
    return res.estimate[0], res.estimate[1:]


def ray_reference(p, radii, rtol=1e-13):
    """The same integrals for a point inside, in spherical coordinates about the point: with t(u)
    the distance to the surface along the direction u, I = 1/2 int t^2 dOmega and
    J = int t u dOmega (scipy.integrate.cubature over the sphere of directions)."""
    a2 = np.asarray(radii, float) ** 2
    p = np.asarray(p, float)

    def f(q):
        th, ph = q[:, 0], q[:, 1]
        u = np.stack([np.sin(th) * np.cos(ph), np.sin(th) * np.sin(ph), np.cos(th)], axis=1)
        al = (u ** 2 / a2).sum(axis=1)
        be = (u * p / a2).sum(axis=1)
        ga = (p ** 2 / a2).sum() - 1.0
        t = (-be + np.sqrt(be ** 2 - al * ga)) / al
        w = np.sin(th)
        return np.concatenate([(0.5 * t ** 2 * w)[:, None], (t * w)[:, None] * u], axis=1)

    res = cubature(f, [0, 0], [np.pi, 2 * np.pi], rtol=rtol, atol=rtol * 10 * max(radii),
                   max_subdivisions=20000)
    assert res.status == "converged"
    return res.estimate[0], res.estimate[1:]


def test_sphere_outside_is_a_point_mass():
    # Shell theorem (Newton): outside a uniform sphere, the field of a point at its centre.
    R = 0.04
    rng = np.random.default_rng(1)
    d = rng.normal(size=(40, 3))
    d /= np.linalg.norm(d, axis=1)[:, None]
    pts = d * rng.uniform(R, 50 * R, 40)[:, None]
    U, g = ellipsoid_field(pts, [R, R, R], RHO, G)
    M = RHO * 4.0 / 3.0 * np.pi * R ** 3
    U0, g0 = point_field(pts, np.zeros((1, 3)), [M], G)
    np.testing.assert_allclose(U, U0, rtol=1e-14)
    np.testing.assert_allclose(g, g0, rtol=1e-13)


def test_sphere_inside_is_linear():
    # Uniform sphere interior (Gauss's law, closed form from memory): g = -(4/3) pi G rho r,
    # U = -2 pi G rho (R^2 - r^2/3).
    R = 0.04
    pts = np.random.default_rng(2).uniform(-0.5, 0.5, size=(30, 3)) * R
    U, g = ellipsoid_field(pts, [R, R, R], RHO, G)
    np.testing.assert_allclose(g, -4.0 / 3.0 * np.pi * G * RHO * pts, rtol=1e-13, atol=1e-25)
    r2 = (pts ** 2).sum(axis=1)
    np.testing.assert_allclose(U, -2 * np.pi * G * RHO * (R ** 2 - r2 / 3), rtol=1e-14)


@pytest.mark.parametrize("radii,scale", [(SHAPES[0], 1.3), (SHAPES[0], 3.0), (SHAPES[1], 2.0),
                                         (SHAPES[2], 2.0)],
                         ids=["triaxial-near", "triaxial-far", "oblate", "prolate"])
def test_exterior_matches_volume_quadrature(radii, scale):
    # Reference: scipy.integrate.cubature of the defining volume integral.
    p = np.array([0.6, -0.5, 0.62]) / np.linalg.norm([0.6 / radii[0], 0.5 / radii[1],
                                                       0.62 / radii[2]]) * scale
    I, J = volume_reference(p, radii, rtol=1e-11)
    U, g = ellipsoid_field([p], radii, RHO, G)
    np.testing.assert_allclose(-U[0] / (G * RHO), I, rtol=1e-10)
    assert np.linalg.norm(g[0] / (G * RHO) - J) < 1e-10 * np.linalg.norm(J)


@pytest.mark.parametrize("radii", SHAPES, ids=["triaxial", "oblate", "prolate"])
def test_interior_matches_ray_quadrature(radii):
    # Reference: scipy.integrate.cubature over directions from the point (exact exit distance).
    for p in (np.array([0.3, -0.2, 0.4]) * radii, np.zeros(3), np.array([0.0, 0.9, 0.0]) * radii):
        I, J = ray_reference(p, radii)
        U, g = ellipsoid_field([p], radii, RHO, G)
        np.testing.assert_allclose(-U[0] / (G * RHO), I, rtol=1e-12)
        assert np.linalg.norm(g[0] / (G * RHO) - J) < 1e-12 * max(np.linalg.norm(J), max(radii))


def test_interior_field_obeys_poisson():
    # Poisson's equation (Kellogg, Foundations of Potential Theory, 1929; from memory): div g = -4 pi G rho inside; the interior field is linear, so
    # its divergence is sum_i g_i(e_i)/1 for unit offsets along the axes.
    for radii in SHAPES:
        g = ellipsoid_field(np.diag(radii * 0.5), radii, RHO, G)[1]
        div = sum(g[i, i] / (radii[i] * 0.5) for i in range(3))
        np.testing.assert_allclose(div, -4 * np.pi * G * RHO, rtol=1e-13)


def test_continuous_across_the_surface():
    # A finite density gives a continuous potential and field (Kellogg, Foundations of Potential Theory, 1929; from memory).
    rng = np.random.default_rng(3)
    d = rng.normal(size=(20, 3))
    surf = d / np.sqrt(((d / TRIAXIAL) ** 2).sum(axis=1))[:, None]
    U0, g0 = ellipsoid_field(surf, TRIAXIAL, RHO, G)
    for eps in (1e-8, 1e-11):
        for sgn in (1.0, -1.0):
            U, g = ellipsoid_field(surf * (1 + sgn * eps), TRIAXIAL, RHO, G)
            np.testing.assert_allclose(U, U0, rtol=10 * eps)
            assert np.all(np.linalg.norm(g - g0, axis=1) < 10 * eps * np.linalg.norm(g0, axis=1))


def test_far_field_is_point_mass_plus_quadrupole():
    # Multipole expansion (Jackson, Classical Electrodynamics, 3rd ed., sec. 4.1; from memory): second moments int x^2 dm = M a^2 / 5 give
    # Q = M/5 diag(2a^2 - b^2 - c^2, ...); the octupole vanishes by symmetry, so the residual is
    # ~ (a/r)^4 relative.
    a2 = TRIAXIAL ** 2
    M = RHO * 4.0 / 3.0 * np.pi * TRIAXIAL.prod()
    Q = M / 5.0 * np.diag([2 * a2[0] - a2[1] - a2[2], 2 * a2[1] - a2[0] - a2[2],
                           2 * a2[2] - a2[0] - a2[1]])
    rng = np.random.default_rng(4)
    d = rng.normal(size=(20, 3))
    d /= np.linalg.norm(d, axis=1)[:, None]
    res = []
    for k in (10.0, 100.0):
        p = d * k * TRIAXIAL[0]
        r = np.linalg.norm(p, axis=1)
        xQx = np.einsum("ni,ij,nj->n", p, Q, p)
        Uq = -G * M / r - G * xQx / (2 * r ** 5)
        U, _ = ellipsoid_field(p, TRIAXIAL, RHO, G)
        res.append(np.max(np.abs(U / Uq - 1)))
        assert res[-1] < 1.0 / k ** 4
    assert res[0] / res[1] > 0.5e4


def test_confocal_parameter_matches_a_bracketing_solver():
    # Reference: scipy.optimize.brentq on sum x_i^2/(a_i^2 + l) = 1 in [0, r^2].
    rng = np.random.default_rng(5)
    pts = rng.normal(size=(60, 3)) * np.exp(rng.uniform(-1, 6, size=(60, 1))) * 0.03
    lam = confocal_parameter(pts, TRIAXIAL)
    for p, l in zip(pts, lam):
        if ((p / TRIAXIAL) ** 2).sum() <= 1:
            assert l == 0.0
            continue
        ref = brentq(lambda x: (p ** 2 / (TRIAXIAL ** 2 + x)).sum() - 1, 0, (p ** 2).sum(),
                     xtol=1e-300, rtol=1e-15, maxiter=500)
        assert abs(l - ref) < 4e-15 * (ref + TRIAXIAL.min() ** 2)


@pytest.mark.parametrize("radii", [[0.1, 0.1], [0.1, -0.1, 0.1], [0.0, 1, 1], [np.inf, 1, 1]])
def test_bad_radii_are_input_errors(radii):
    with pytest.raises(InputError):
        ellipsoid_field([[1.0, 0, 0]], radii, RHO, G)
