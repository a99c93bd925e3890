"""Tests of integrate/linear_density.py: bodies with a linear density rho0 + g . (x - at).

Outside references: potential theory (a ball's linear density has exactly a monopole and a dipole
exterior field, dipole moment p = g 4 pi R^5 / 15, since g . x is a degree-1 harmonic and the ball's
other moments vanish), differentiated by mpmath; scipy.integrate.tplquad of the Newton integrand
over a box; the closed-form second moments of a box (V a^2 / 12).
"""

from __future__ import annotations

import math

import mpmath as mp
import numpy as np
from scipy.integrate import tplquad

from truepull.geometry.bodies import Body
from truepull.geometry.placement import Placement
from truepull.geometry.shapes import Box, Point, Sphere
from truepull.integrate.field_at_points import group_field_at_points
from truepull.integrate.pairs import pair_interaction

G = 6.6743e-11
PIVOT = np.zeros(3)
AXIS = np.array([0.0, 0.0, 1.0])


def gbody(name, shape, at, density, gradient, rotation=None):
    R = np.eye(3) if rotation is None else rotation
    pl = Placement(R, np.asarray(at, float))
    grad = None if gradient is None else R.T @ np.asarray(gradient, float)
    return Body(name, "g", shape, pl, float(density), gradient=grad)


def ball_reference(x, c, M, p):
    """U, g, T of a monopole M plus dipole p at c (potential theory), by mpmath at 30 digits."""
    mp.mp.dps = 30
    c = [mp.mpf(float(v)) for v in c]
    p = [mp.mpf(float(v)) for v in p]

    def U(*q):
        d = [q[i] - c[i] for i in range(3)]
        r = mp.sqrt(sum(v * v for v in d))
        return -G * (M / r + sum(p[i] * d[i] for i in range(3)) / r**3)

    q = [mp.mpf(float(v)) for v in x]
    u = U(*q)
    grad = [mp.diff(U, q, tuple(1 if k == i else 0 for k in range(3))) for i in range(3)]
    T = [[-mp.diff(U, q, tuple((k == i) + (k == j) for k in range(3))) for j in range(3)] for i in range(3)]
    return float(u), -np.array([float(v) for v in grad]), np.array([[float(v) for v in row] for row in T])


def test_gradient_ball_field_is_monopole_plus_dipole():
    R, rho0, grad = 0.05, 11340.0, np.array([30.0, -20.0, 1100.0])  # kg/m^4
    c = np.array([0.01, 0.02, -0.03])
    ball = gbody("ball", Sphere(R), c, rho0, grad)
    M = rho0 * 4 / 3 * math.pi * R**3
    p = grad * 4 * math.pi * R**5 / 15  # potential theory
    assert abs(ball.mass - M) <= 1e-13 * M
    assert np.allclose(ball.com, c + p / M, rtol=0, atol=1e-15)
    pts = np.array([[0.12, 0.0, 0.0], [0.0, -0.09, 0.07], [0.04, 0.05, 0.11]])
    f = group_field_at_points([ball], pts, G, rtol=1e-12)
    for i, x in enumerate(pts):
        u, g, T = ball_reference(x, c, M, p)
        assert abs(f.U[i] - u) <= max(f.err_U[i], 1e-13 * abs(u))
        assert np.linalg.norm(f.g[i] - g) <= max(f.err_g[i], 1e-13 * np.linalg.norm(g))
        assert np.linalg.norm(f.T[i] - T) <= max(f.err_T[i], 1e-12 * np.linalg.norm(T))
        # the dipole is visible: without it the field is off by far more than the error estimate
        assert np.linalg.norm(g - (-G * M * (x - c) / np.linalg.norm(x - c) ** 3)) > 1e3 * f.err_g[i]


def test_gradient_ball_as_source_and_as_test_body():
    """Force, torque, stiffness on a point in a gradient ball's field, and on the ball in the point's
    field (Newton's third law; stiffness the same), against the monopole-plus-dipole closed form."""
    R, rho0, grad = 0.04, 19250.0, np.array([200.0, 500.0, -900.0])
    c = np.array([0.0, 0.0, 0.0])
    rot = Placement.turn_about(np.zeros(3), [1, 1, 0], 0.4).rotation
    ball = gbody("ball", Sphere(R), c, rho0, grad, rot)
    M, p = rho0 * 4 / 3 * math.pi * R**3, grad * 4 * math.pi * R**5 / 15
    m, xp = 0.02, np.array([0.1, 0.06, 0.01])
    pt = Body("pt", "g", Point(), Placement.shift(xp), 0.0, point_mass=m)
    u, g, T = ball_reference(xp, c, M, p)
    r = xp - PIVOT
    F = m * g
    tau = np.cross(r, F)
    exr = np.cross(AXIS, r)
    K = -m * (AXIS @ np.cross(exr, g) + AXIS @ np.cross(r, T @ exr))
    on_point = pair_interaction(pt, ball, PIVOT, AXIS, G, rtol=1e-11)
    on_ball = pair_interaction(ball, pt, PIVOT, AXIS, G, rtol=1e-11)
    for res, sign in ((on_point, 1.0), (on_ball, -1.0)):
        assert np.all(np.abs(res.force - sign * F) <= res.errors[0:3] + 1e-13 * np.linalg.norm(F))
        assert np.all(np.abs(res.torque - sign * tau) <= res.errors[3:6] + 1e-13 * np.linalg.norm(tau))
        assert abs(res.stiffness_axis - K) <= res.errors[6] + 1e-12 * abs(K)
        assert abs(res.energy - m * u) <= res.errors[7] + 1e-13 * abs(m * u)
        assert res.reached


def test_gradient_box_against_tplquad():
    """A point source beside a linear-density box: force and axial torque on the box by scipy tplquad
    of G m rho(x) (xp - x)/|xp - x|^3 over the box (the box as test body), and the force on the point
    (the box as source) is minus that."""
    a = np.array([0.03, 0.02, 0.04])
    at = np.array([0.05, 0.01, 0.0])
    rho0, grad = 8000.0, np.array([400.0, -300.0, 800.0])
    box = gbody("box", Box(tuple(a)), at, rho0, grad)
    m, xp = 1.5, np.array([-0.04, 0.05, 0.03])
    pt = Body("pt", "g", Point(), Placement.shift(xp), 0.0, point_mass=m)

    def integrand(z, y, x, k):
        q = np.array([x, y, z])
        d = xp - (at + q)
        rho = rho0 + grad @ q
        f = G * m * rho * d / np.linalg.norm(d) ** 3
        if k < 3:
            return f[k]
        return np.cross(at + q - PIVOT, f)[2]

    h = a / 2
    ref = [tplquad(integrand, -h[0], h[0], -h[1], h[1], -h[2], h[2], args=(k,), epsabs=0, epsrel=1e-11)[0]
           for k in (0, 1, 3)]
    res = pair_interaction(box, pt, PIVOT, AXIS, G, rtol=1e-11)
    for val, err, r in ((res.force[0], res.errors[0], ref[0]), (res.force[1], res.errors[1], ref[1]),
                        (res.torque[2], res.errors[5], ref[2])):
        assert abs(val - r) <= err + 2e-10 * abs(r)  # tplquad's own relative tolerance
    src = pair_interaction(pt, box, PIVOT, AXIS, G, rtol=1e-11)
    assert abs(src.force[0] + ref[0]) <= src.errors[0] + 2e-10 * abs(ref[0])


def test_gradient_box_mass_properties():
    """Centred box, rho = rho0 + g.x: mass rho0 V, first moment V a_i^2 g_i / 12 (box second moments),
    inertia about the centre that of the uniform box (the cubic moments vanish by symmetry)."""
    a = np.array([0.1, 0.2, 0.3])
    rho0, grad = 2700.0, np.array([50.0, 20.0, -40.0])
    b = gbody("b", Box(tuple(a)), np.zeros(3), rho0, grad)
    V = float(np.prod(a))
    m = rho0 * V
    d = V * a**2 * grad / 12 / m
    assert abs(b.mass - m) <= 1e-13 * m
    assert np.allclose(b.com, d, rtol=1e-12, atol=0)
    i0 = m / 12 * np.diag([a[1]**2 + a[2]**2, a[0]**2 + a[2]**2, a[0]**2 + a[1]**2])
    expect = i0 - m * (d @ d * np.eye(3) - np.outer(d, d))
    assert np.allclose(b.inertia_com, expect, rtol=1e-12, atol=1e-18)


def test_scene_reads_density_gradient_with_units_and_uncertainty():
    """density_gradient in units.density per units.length (here g/cm^3 per mm: 1e6 kg/m^4, the SI
    definition of the units), '+-' kept for the budget; a point body refuses it."""
    import pytest

    from truepull.geometry.bodies import body_parameters
    from truepull.geometry.errors import InputError
    from truepull.geometry.scene import load_scene_text

    text = """
[units]
length = "mm"
density = "g/cm^3"
[[body]]
name = "s"
group = "attractor"
shape = "sphere"
radius = 20
density = 11.34
density_gradient = [0, 0, "2e-5 +- 1e-5"]
"""
    sc = load_scene_text(text)
    b = sc.body("s")
    assert np.allclose(b.gradient, [0, 0, 20.0], rtol=1e-12)
    p = body_parameters(b.spec)["density_gradient.z"]
    assert p.value == pytest.approx(20.0, rel=1e-12) and p.u == pytest.approx(10.0, rel=1e-12)
    bad = text.replace('shape = "sphere"\nradius = 20\ndensity = 11.34', 'shape = "point"\nmass = 1')
    with pytest.raises(InputError, match="density_gradient"):
        load_scene_text(bad)


def test_a_gradient_that_takes_the_density_below_zero_is_refused():
    """rho = rho0 + g z over a ball of radius R is lowest at z = -R (for g along +z): positive when
    g R < rho0 (the linear form's minimum over the ball, elementary). 11.34 g/cm^3 over 20 mm allows
    g up to 0.567 g/cm^3 per mm: 0.56 loads, 0.57 is refused naming the key, also turned and as a hole."""
    import pytest

    from truepull.geometry.errors import InputError
    from truepull.geometry.scene import load_scene_text

    def scene(g, extra=""):
        return f"""
[units]
length = "mm"
density = "g/cm^3"
[[body]]
name = "s"
group = "attractor"
shape = "sphere"
radius = 20
density = 11.34
density_gradient = [0, {g}, 0]
{extra}
"""

    load_scene_text(scene(0.56))
    load_scene_text(scene(-0.56, 'rotate = { axis = [0, 0, 1], angle = 90 }'))
    for g, extra in [(0.57, ""), (-0.57, 'rotate = { axis = [0, 0, 1], angle = 90 }'), (0.57, "subtract = true")]:
        with pytest.raises(InputError, match=r"body\[s\]\.density_gradient.*below zero"):
            load_scene_text(scene(g, extra))


def test_view_field_includes_the_gradient_and_refuses_points_inside():
    """The 3-D view's field (interaction.group_field) carries the linear density part: a gradient
    ball's field against the monopole-plus-dipole closed form (potential theory, as above); a point
    inside the ball is refused rather than given the exterior formula's value."""
    import pytest

    from truepull.geometry.errors import InputError
    from truepull.integrate.interaction import group_field

    R, rho0, grad = 0.03, 8000.0, np.array([0.0, 400.0, -250.0])
    c = np.array([0.0, 0.0, 0.0])
    ball = gbody("ball", Sphere(R), c, rho0, grad)
    M, p = rho0 * 4 / 3 * math.pi * R**3, grad * 4 * math.pi * R**5 / 15
    pts = np.array([[0.07, 0.01, 0.0], [0.0, 0.0, -0.05]])
    U, g, eU, eg = group_field([ball], pts, G, 1e-10)
    for i, x in enumerate(pts):
        u_ref, g_ref, _ = ball_reference(x, c, M, p)
        assert abs(U[i] - u_ref) <= max(eU[i], 1e-13 * abs(u_ref))
        assert np.linalg.norm(g[i] - g_ref) <= max(eg[i], 1e-13 * np.linalg.norm(g_ref))
    with pytest.raises(InputError, match="inside or on body 'ball'"):
        group_field([ball], np.array([[0.01, 0.0, 0.0]]), G, 1e-10)
