"""Point-mass and spherical-shell fields against Newton's law, the shell theorem and quadrature."""

import numpy as np
import pytest
from scipy import integrate
from scipy.constants import G as G_CODATA

from truepull.geometry.errors import InputError
from truepull.integrate.field_point import (point_field, point_gradient, shell_field,
                                            shell_gradient)

G = G_CODATA


def test_single_point_mass_is_newton():
    # Newton's law of gravitation: U = -G m / r, |g| = G m / r^2 toward the mass.
    rng = np.random.default_rng(1)
    pts = rng.normal(size=(20, 3))
    c = np.array([[0.3, -0.2, 0.1]])
    m = np.array([7.5])
    U, g = point_field(pts, c, m, G)
    d = c - pts
    r = np.linalg.norm(d, axis=1)
    np.testing.assert_allclose(U, -G * m[0] / r, rtol=1e-14)
    np.testing.assert_allclose(g, G * m[0] * d / r[:, None] ** 3, rtol=1e-13, atol=0)


def test_superposition_of_many_points():
    # Newton's law, summed by hand in plain numpy (superposition).
    rng = np.random.default_rng(2)
    pts = rng.normal(size=(15, 3)) * 3
    cs = rng.normal(size=(40, 3))
    ms = rng.uniform(0.1, 2.0, size=40)
    U, g = point_field(pts, cs, ms, G)
    d = cs[None, :, :] - pts[:, None, :]
    r = np.linalg.norm(d, axis=2)
    np.testing.assert_allclose(U, -G * (ms / r).sum(1), rtol=1e-13)
    np.testing.assert_allclose(g, G * (ms[None, :, None] * d / r[..., None] ** 3).sum(1),
                               rtol=1e-12, atol=1e-25)


def test_coincident_point_is_nan_not_a_number():
    U, g = point_field([[0.0, 0.0, 0.0]], [[0.0, 0.0, 0.0]], [1.0], G)
    assert np.isnan(U[0]) and np.isnan(g).all()


def test_point_gradient_matches_central_differences_and_is_traceless():
    # Central differences of g (Taylor: error O(h^2)); Laplace's equation: trace T = 0 off source.
    rng = np.random.default_rng(3)
    pts = rng.normal(size=(6, 3)) + 3.0
    cs = rng.normal(size=(4, 3))
    ms = rng.uniform(1.0, 2.0, size=4)
    T = point_gradient(pts, cs, ms, G)
    h = 1e-5
    for j in range(3):
        e = np.zeros(3)
        e[j] = h
        gp = point_field(pts + e, cs, ms, G)[1]
        gm = point_field(pts - e, cs, ms, G)[1]
        np.testing.assert_allclose(T[:, :, j], (gp - gm) / (2 * h), rtol=1e-7,
                                   atol=1e-8 * np.abs(T).max())
    np.testing.assert_allclose(np.trace(T, axis1=1, axis2=2), 0.0, atol=1e-13 * np.abs(T).max())


def test_shell_cavity_has_zero_field_and_constant_potential():
    # Shell theorem (Newton, Principia I prop. 70): no force inside a uniform shell.
    M, R, ri = 3.0, 0.05, 0.03
    rng = np.random.default_rng(4)
    pts = rng.uniform(-1, 1, size=(50, 3))
    pts = pts / np.linalg.norm(pts, axis=1)[:, None] * rng.uniform(0, ri * 0.999, 50)[:, None]
    U, g = shell_field(pts, [0.0, 0.0, 0.0], R, ri, M, G)
    assert np.all(g == 0.0)
    # Constant potential -G M * (3/2)(R^2 - ri^2)/(R^3 - ri^3): the integral of -G dm/s over the
    # layers (Newton's shell theorem, Principia Book I Props. 70-71, integrated layer by layer; from memory).
    np.testing.assert_allclose(U, -1.5 * G * M * (R ** 2 - ri ** 2) / (R ** 3 - ri ** 3),
                               rtol=1e-14)


def test_shell_outside_is_a_point_mass():
    # Shell theorem (Newton, Principia I prop. 71): outside, the field of a point at the centre.
    M, R, ri = 3.0, 0.05, 0.03
    c = np.array([0.1, 0.2, -0.1])
    rng = np.random.default_rng(5)
    dirs = rng.normal(size=(30, 3))
    dirs /= np.linalg.norm(dirs, axis=1)[:, None]
    pts = c + dirs * rng.uniform(R, 10 * R, 30)[:, None]
    U, g = shell_field(pts, c, R, ri, M, G)
    U0, g0 = point_field(pts, c[None], [M], G)
    np.testing.assert_allclose(U, U0, rtol=1e-14)
    np.testing.assert_allclose(g, g0, rtol=1e-13)
    T = shell_gradient(pts, c, R, ri, M, G)
    np.testing.assert_allclose(T, point_gradient(pts, c[None], [M], G), rtol=1e-12,
                               atol=1e-13 * np.abs(T).max())


def test_shell_solid_part_against_radial_quadrature():
    # Inside the solid part: g(r) = -G M(<r)/r^2 (Gauss's law), and U(r) = -int_r^inf g dr;
    # the potential is checked against scipy.integrate.quad of the field from r outward.
    M, R, ri = 2.0, 0.1, 0.04
    rho = M / (4.0 / 3.0 * np.pi * (R ** 3 - ri ** 3))
    for r in (0.05, 0.07, 0.0999):
        U, g = shell_field([[0.0, 0.0, r]], [0, 0, 0], R, ri, M, G)
        menc = 4.0 / 3.0 * np.pi * rho * (r ** 3 - ri ** 3)
        np.testing.assert_allclose(g[0], [0, 0, -G * menc / r ** 2], rtol=1e-13, atol=0)

        def field(s):
            mm = 4.0 / 3.0 * np.pi * rho * (min(s, R) ** 3 - ri ** 3)
            return G * mm / s ** 2

        ref = -(integrate.quad(field, r, R, epsabs=0, epsrel=1e-13)[0] + G * M / R)
        np.testing.assert_allclose(U[0], ref, rtol=1e-12)


def test_shell_potential_and_field_are_continuous_at_both_radii():
    # A finite mass density gives a continuous potential and field (Gauss's law).
    M, R, ri = 2.0, 0.1, 0.04
    for rad in (ri, R):
        a, ga = shell_field([[rad * (1 - 1e-12), 0, 0]], [0, 0, 0], R, ri, M, G)
        b, gb = shell_field([[rad * (1 + 1e-12), 0, 0]], [0, 0, 0], R, ri, M, G)
        np.testing.assert_allclose(a, b, rtol=1e-10)
        np.testing.assert_allclose(ga, gb, rtol=0, atol=1e-10 * G * M / R ** 2)


def test_solid_sphere_interior_is_linear():
    # Uniform solid sphere: g = -(4/3) pi G rho r inside, U(0) = -3 G M / (2 R) (Gauss's law
    # for a uniform ball, from memory).
    M, R = 5.0, 0.2
    rho = M / (4.0 / 3.0 * np.pi * R ** 3)
    pts = np.array([[0.0, 0.0, 0.0], [0.05, -0.02, 0.1], [0.0, 0.19, 0.0]])
    U, g = shell_field(pts, [0, 0, 0], R, 0.0, M, G)
    np.testing.assert_allclose(g, -4.0 / 3.0 * np.pi * G * rho * pts, rtol=1e-13, atol=1e-30)
    np.testing.assert_allclose(U[0], -1.5 * G * M / R, rtol=1e-14)
    T = shell_gradient(pts, [0, 0, 0], R, 0.0, M, G)
    # Poisson's equation: trace T = -4 pi G rho inside the matter.
    np.testing.assert_allclose(np.trace(T, axis1=1, axis2=2), -4 * np.pi * G * rho, rtol=1e-13)


def test_thin_shell_limit():
    # inner_radius == radius: a massive surface; the inside potential is -G M / R (Newton's shell theorem, Principia Book I Props. 70-71;
    # from memory).
    U, g = shell_field([[0.0, 0.0, 0.01], [0.0, 0.0, 0.3]], [0, 0, 0], 0.1, 0.1, 1.0, G)
    np.testing.assert_allclose(U, [-G / 0.1, -G / 0.3], rtol=1e-14)
    assert np.all(g[0] == 0.0)


def test_shell_gradient_in_solid_part_matches_differences():
    # Central differences of g (Taylor, O(h^2)); Poisson: trace -4 pi G rho in the matter.
    M, R, ri = 2.0, 0.1, 0.04
    rho = M / (4.0 / 3.0 * np.pi * (R ** 3 - ri ** 3))
    p = np.array([[0.03, 0.04, 0.05]])
    T = shell_gradient(p, [0, 0, 0], R, ri, M, G)
    h = 1e-6
    for j in range(3):
        e = np.zeros(3)
        e[j] = h
        d = (shell_field(p + e, [0, 0, 0], R, ri, M, G)[1]
             - shell_field(p - e, [0, 0, 0], R, ri, M, G)[1]) / (2 * h)
        np.testing.assert_allclose(T[0, :, j], d[0], rtol=1e-6, atol=1e-7 * np.abs(T).max())
    np.testing.assert_allclose(np.trace(T[0]), -4 * np.pi * G * rho, rtol=1e-12)


@pytest.mark.parametrize("radius,inner", [(-1.0, 0.0), (0.1, 0.2), (0.1, -0.01)])
def test_bad_shell_sizes_are_input_errors(radius, inner):
    with pytest.raises(InputError):
        shell_field([[1.0, 0, 0]], [0, 0, 0], radius, inner, 1.0, G)


def test_bad_shapes_are_input_errors():
    with pytest.raises(InputError):
        point_field(np.zeros((3, 2)), [[0, 0, 0]], [1.0], G)
    with pytest.raises(InputError):
        point_field(np.zeros((3, 3)), [[0, 0, 0]], [1.0, 2.0], G)
