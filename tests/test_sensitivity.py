"""Sensitivities of the torque and G, and the what-if changes.

Outside references: the analytic derivative of Newton's law for point masses (worked out in
`_newton_gradients`); central finite differences of the engine taken here with their own step;
the exterior field of a homogeneous ellipsoid in Carlson's form with scipy.special.elliprd
(Kellogg / Chandrasekhar's ellipsoid potential; from memory, and checked here against the sphere
limit, Newton); Newton's law for a spherical void (a sphere of negative density, shell theorem);
for the acceleration and servo G columns, the G of each method from Newton's torque of spheres
(numpy's FFT for the harmonic, numpy.polyfit for the servo's line) and its hand derivative, checked
against a central difference of that closed form.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import brentq
from scipy.special import elliprd

from truepull.geometry.bodies import build_body, spec_with
from truepull.geometry.errors import InputError
from truepull.geometry.scene import load_scene_text
from truepull.integrate.interaction import compare_groups
from truepull.integrate.balance.sensitivity import (flatten_what_if, offset_what_if, sensitivities, step_factor,
                                            void_what_if)

G = 6.6743e-11

POINTS = """
[scene]
G = 6.6743e-11
[[body]]
name = "p1"
group = "pendulum"
shape = "point"
mass = 0.02
at = ["0.03 +- 1e-5", 0.004, 0.001]
[[body]]
name = "p2"
group = "pendulum"
shape = "point"
mass = 0.02
at = [-0.03, -0.002, 0.0]
[[body]]
name = "M1"
group = "attractor"
shape = "point"
mass = "1.5 +- 0.001"
at = [0.045, "0.05 +- 2e-5", 0.01]
[[body]]
name = "M2"
group = "attractor"
shape = "point"
mass = 1.5
at = [-0.045, -0.05, -0.01]
"""


def _pairs_of(text):
    sc = load_scene_text(text)
    return ([(b.mass, b.com) for b in sc.group("pendulum")], [(b.mass, b.com) for b in sc.group("attractor")], sc)


def _newton_tau(test, source):
    tau = 0.0
    for m, r in test:
        for M, R in source:
            d = R - r
            tau += G * m * M * (r[0] * R[1] - r[1] * R[0]) / np.linalg.norm(d) ** 3
    return tau


def _newton_gradients(m, r, M, R):
    """Analytic gradients of the pair torque G m M (r x R)_z / |R - r|^3 with respect to R and r."""
    d = R - r
    n = np.linalg.norm(d)
    c = r[0] * R[1] - r[1] * R[0]
    dR = G * m * M * (np.array([-r[1], r[0], 0.0]) / n**3 - 3 * c * d / n**5)
    dr = G * m * M * (np.array([R[1], -R[0], 0.0]) / n**3 + 3 * c * d / n**5)
    return dR, dr


def test_point_mass_sensitivities_are_the_analytic_derivatives_of_newton():
    test, source, sc = _pairs_of(POINTS)
    res = sensitivities(sc, workers=1)
    tau = _newton_tau(test, source)
    assert abs(res.torque_axis - tau) <= 1e-13 * abs(tau)
    rows = {(r.body, r.parameter): r for r in res.rows}
    names_t = [b.name for b in sc.group("pendulum")]
    names_s = [b.name for b in sc.group("attractor")]
    # d tau / d (attractor position): sum over the test masses of the analytic gradient
    for j, (M, R) in enumerate(source):
        grad = sum(_newton_gradients(m, r, M, R)[0] for m, r in test)
        for k, c in enumerate("xyz"):
            row = rows[(names_s[j], f"at.{c}")]
            assert abs(row.d_torque_axis - grad[k]) <= 1e-8 * np.linalg.norm(grad)
            assert abs(row.d_torque_axis - grad[k]) <= row.d_error + 1e-12 * np.linalg.norm(grad)
        share = _newton_tau(test, [(M, R)])
        assert abs(rows[(names_s[j], "mass")].d_torque_axis - share / M) <= 1e-13 * abs(share / M)
    for i, (m, r) in enumerate(test):
        grad = sum(_newton_gradients(m, r, M, R)[1] for M, R in source)
        for k, c in enumerate("xyz"):
            row = rows[(names_t[i], f"at.{c}")]
            assert abs(row.d_torque_axis - grad[k]) <= 1e-8 * np.linalg.norm(grad)
    # ppm per stated uncertainty: the scene states u for p1 at.x, M1 at.y and M1 mass only
    r = rows[("M1", "at.y")]
    assert r.u == 2e-5 and abs(r.torque_ppm - 1e6 * r.d_torque_axis * 2e-5 / tau) < 1e-9 * abs(r.torque_ppm)
    assert rows[("M2", "at.y")].u is None and rows[("M2", "at.y")].torque_ppm is None
    assert all(row.G_ppm is None and row.d_G is None for row in res.rows)  # no measurement
    ranked = [abs(row.torque_ppm) for row in res.rows if row.torque_ppm is not None]
    assert ranked == sorted(ranked, reverse=True) and res.rows[0].torque_ppm is not None
    assert step_factor(1e-9) == pytest.approx(1e-9 ** 0.2)


def test_turn_sensitivity_is_the_derivative_of_newton():
    text = POINTS + '[[position]]\nname = "A"\ngroup = "attractor"\nturn = "10 +- 0.01"\n'
    test, source, sc = _pairs_of(text)
    res = sensitivities(sc, workers=1, bodies=["M1"])
    row = next(r for r in res.rows if r.parameter == "turn[A]")
    assert row.body == "attractor" and row.u == pytest.approx(math.radians(0.01))

    def tau_at(phi):
        c, s = math.cos(phi), math.sin(phi)
        Rm = np.array([[c, -s, 0], [s, c, 0], [0, 0, 1]])
        return _newton_tau(test, [(M, Rm @ R) for M, R in source])

    h = 1e-6
    phi = math.radians(10)
    dtau = (tau_at(phi + h) - tau_at(phi - h)) / (2 * h)  # central difference of Newton
    assert abs(row.d_torque_axis - dtau) <= 1e-7 * abs(dtau)


EXTENDED = """
[scene]
G = 6.6743e-11
[[body]]
name = "beam"
group = "pendulum"
shape = "box"
size = ["0.06 +- 1e-5", 0.006, 0.004]
density = 2700
at = [0.002, 0.001, 0]
rotate = { axis = [0, 0, 1], angle = 12 }
[[body]]
name = "ball"
group = "attractor"
shape = "sphere"
radius = "0.02 +- 1e-5"
density = "11340 +- 3"
at = [0.035, 0.04, 0.005]
"""


def test_extended_body_sensitivities_match_finite_differences_of_the_engine():
    sc = load_scene_text(EXTENDED)
    res = sensitivities(sc, workers=1)
    rows = {(r.body, r.parameter): r for r in res.rows}

    def torque(name, param, value):
        b = sc.body(name)
        return compare_groups(sc.with_body(name, build_body(spec_with(b.spec, param, value))),
                              rtol=1e-11).exact.torque_axis

    def reference(name, param, v0, h):
        """Central differences of the engine at h and h/2, extrapolated (h^2 error term removed)."""
        d1 = (torque(name, param, v0 + h) - torque(name, param, v0 - h)) / (2 * h)
        d2 = (torque(name, param, v0 + h / 2) - torque(name, param, v0 - h / 2)) / h
        return (4 * d2 - d1) / 3, abs(d2 - d1)

    for name, param in (("beam", "size.x"), ("beam", "at.y"), ("ball", "radius")):
        spec = sc.body(name).spec
        v0 = dict(spec.size, **{f"at.{c}": a for c, a in zip("xyz", spec.at)})[param].value
        ref, spread = reference(name, param, v0, 2e-5)
        row = rows[(name, param)]
        scale = max(abs(rows[(name, f"at.{c}")].d_torque_axis) for c in "xyz")  # the gradient's size
        assert abs(row.d_torque_axis - ref) <= 1e-6 * scale + spread, (name, param)
        assert abs(row.d_torque_axis - ref) <= row.d_error + spread, (name, param)
    # density: the torque is linear in it; a central difference of the engine is the same number
    fd = (torque("ball", "density", 11341.0) - torque("ball", "density", 11339.0)) / 2.0
    assert abs(rows[("ball", "density")].d_torque_axis - fd) <= 1e-9 * abs(fd)


def _ellipsoid_field(x, radii, rho):
    """Exterior field of a homogeneous ellipsoid at local point x (semi-axes along x, y, z):
    g_i = -(4/3) pi G rho a b c x_i R_D(..., a_i^2 + lambda), lambda the largest root of
    sum x_i^2 / (a_i^2 + lambda) = 1 (Carlson's form of the ellipsoid potential; from memory)."""
    a2 = np.asarray(radii, float) ** 2
    lam = brentq(lambda t: np.sum(x**2 / (a2 + t)) - 1.0, 0.0, 10 * np.dot(x, x), xtol=1e-300, rtol=1e-15)
    s = a2 + lam
    abc = float(np.prod(radii))
    g = np.empty(3)
    for i in range(3):
        others = [s[j] for j in range(3) if j != i]
        g[i] = -4.0 / 3.0 * math.pi * G * rho * abc * x[i] * elliprd(others[0], others[1], s[i])
    return g


def test_ellipsoid_what_if_against_the_carlson_exterior_field():
    # sphere limit of the reference (Newton): a = b = c gives -G M x / |x|^3
    x = np.array([0.05, -0.02, 0.03])
    g = _ellipsoid_field(x, (0.02, 0.02, 0.02), 1000.0)
    M = 1000.0 * 4 / 3 * math.pi * 0.02**3
    assert np.allclose(g, -G * M * x / np.linalg.norm(x) ** 3, rtol=1e-13, atol=0)
    text = """
[scene]
G = 6.6743e-11
[[body]]
name = "probe"
group = "pendulum"
shape = "point"
mass = 0.05
at = [0.04, 0.015, 0.02]
[[body]]
name = "ball"
group = "attractor"
shape = "sphere"
radius = 0.025
density = 11340
at = [0.09, 0.05, -0.01]
"""
    sc = load_scene_text(text)
    polar = np.array([1.0, 0.5, 0.2])
    w = flatten_what_if(sc, "ball", 0.08, polar, position=None, rtol=1e-11)
    # reference: the off-axis point in the Carlson field of the ellipsoid (local axes: polar axis = local z)
    from truepull.geometry.placement import rotation_z_to

    R = rotation_z_to(polar)
    a = 0.025 * (1 - 0.08) ** (-1 / 3)
    radii = (a, a, a * (1 - 0.08))
    p = np.array([0.04, 0.015, 0.02])
    c = np.array([0.09, 0.05, -0.01])
    g = R @ _ellipsoid_field(R.T @ (p - c), radii, 11340.0)
    tau_ref = 0.05 * np.cross(p, g)[2]
    assert abs(w.torque_after - tau_ref) <= 1e-9 * abs(tau_ref)
    tau_sphere = 0.05 * np.cross(p, -G * 11340 * 4 / 3 * math.pi * 0.025**3 * (p - c) / np.linalg.norm(p - c) ** 3)[2]
    assert abs(w.torque_before - tau_sphere) <= 1e-12 * abs(tau_sphere)
    assert abs(w.torque_ppm - 1e6 * (tau_ref - tau_sphere) / tau_sphere) <= 1e-3 * abs(w.torque_ppm) + 1e-3


MEASURED = POINTS + """
[[position]]
name = "A"
group = "attractor"
turn = 20
[[position]]
name = "B"
group = "attractor"
turn = -20
[measurement]
method = "deflection"
angle = { A = "0.0021 rad", B = "-0.0020 rad" }
period = "400 +- 0.1 s"
"""


def _turned(source, deg):
    c, s = math.cos(math.radians(deg)), math.sin(math.radians(deg))
    Rm = np.array([[c, -s, 0], [s, c, 0], [0, 0, 1]])
    return [(M, Rm @ R) for M, R in source]


def test_void_and_offset_what_ifs_against_newton_and_the_first_order_g_model():
    test, source, sc = _pairs_of(MEASURED)
    # a void: a sphere of radius 4 mm at 5 mm from the centre of a sphere host of the attractor
    text = MEASURED.replace('name = "M2"\ngroup = "attractor"\nshape = "point"\nmass = 1.5',
                            'name = "M2"\ngroup = "attractor"\nshape = "sphere"\nradius = 0.02\ndensity = 11340')
    test, source, sc = _pairs_of(text)
    host = sc.body("M2")
    r_void, off = 0.004, np.array([0.005, -0.002, 0.003])
    w = void_what_if(sc, "M2", r_void, off, rtol=1e-11)
    assert w.body == "M2" and w.kind == "void"
    m_void = -11340 * 4 / 3 * math.pi * r_void**3
    after = source + [(m_void, host.com + off)]
    tauA0, tauA1 = _newton_tau(test, _turned(source, 20)), _newton_tau(test, _turned(after, 20))
    tauB0, tauB1 = _newton_tau(test, _turned(source, -20)), _newton_tau(test, _turned(after, -20))
    assert w.torque_before == pytest.approx(tauA0, rel=1e-12) and w.torque_after == pytest.approx(tauA1, rel=1e-12)
    # first-order model: G proportional to I / (tau_A - tau_B); the attractor does not change I
    G_ppm = 1e6 * ((tauA0 - tauB0) / (tauA1 - tauB1) - 1)
    assert w.G_ppm == pytest.approx(G_ppm, rel=1e-9)
    # offset of a pendulum point mass: changes the torque and the moment of inertia
    d = np.array([0.001, -0.0005, 0.0])
    w = offset_what_if(sc, "p1", d, rtol=1e-11)
    test1 = [(test[0][0], test[0][1] + d), test[1]]
    tA = _newton_tau(test1, _turned(source, 20))
    tB = _newton_tau(test1, _turned(source, -20))
    assert w.torque_after == pytest.approx(tA, rel=1e-12)
    I0 = sum(m * (r[0] ** 2 + r[1] ** 2) for m, r in test)
    I1 = sum(m * (r[0] ** 2 + r[1] ** 2) for m, r in test1)
    G_ppm = 1e6 * ((I1 / I0) * (tauA0 - tauB0) / (tA - tB) - 1)
    assert w.G_ppm == pytest.approx(G_ppm, rel=1e-9)


def test_g_columns_follow_the_first_order_model():
    test, source, sc = _pairs_of(MEASURED)
    res = sensitivities(sc, workers=1, bodies=["M1"])
    assert res.position == "A" and res.G_model is not None
    row = next(r for r in res.rows if r.body == "M1" and r.parameter == "mass")
    M = source[0][0]
    dA = _newton_tau(test, _turned(source[:1], 20)) / M
    dB = _newton_tau(test, _turned(source[:1], -20)) / M
    delta = _newton_tau(test, _turned(source, 20)) - _newton_tau(test, _turned(source, -20))
    dlnG = -(dA - dB) / delta
    assert row.G_ppm == pytest.approx(1e6 * dlnG * 0.001, rel=1e-9)
    assert row.d_G == pytest.approx(G * dlnG, rel=1e-9)
    # the turn of position B: d ln G / d turn_B = +K_B / (tau_A - tau_B), K_B = d tau_B / d turn (Newton)
    turn_b = next(r for r in res.rows if r.parameter == "turn[B]")
    h = 1e-4
    K_B = (_newton_tau(test, _turned(source, -20 + h)) - _newton_tau(test, _turned(source, -20 - h))) / math.radians(2 * h)
    assert turn_b.d_torque_axis == 0.0 and turn_b.u is None and turn_b.G_ppm is None
    assert turn_b.d_G == pytest.approx(G * K_B / delta, rel=1e-6)


# --- the G columns of the acceleration and servo methods: spheres (shell theorem: Newton's law for
# their centres), the closed-form G of each method, and its derivative in one sphere's coordinate


def _newton_axial(bobs, balls, Gc=1.0):
    """Axial torque (N m) on point masses `bobs` from `balls`, both [(mass, (x, y, z))]: sum of
    G m M (b x (a - b))_z / |a - b|^3 (Newton)."""
    total = 0.0
    for m, b in bobs:
        for M, a in balls:
            r = np.subtract(a, b)
            total += Gc * m * M * (b[0] * r[1] - b[1] * r[0]) / np.linalg.norm(r) ** 3
    return total


def _newton_axial_d_ax(m, b, M, a, Gc=1.0):
    """d/d a_x of one pair's axial torque, by hand from Newton's law: with r = a - b and
    c = b_x r_y - b_y r_x, d/d a_x [c / |r|^3] = -b_y / |r|^3 - 3 c r_x / |r|^5."""
    r = np.subtract(a, b)
    n = np.linalg.norm(r)
    c = b[0] * r[1] - b[1] * r[0]
    return Gc * m * M * (-b[1] / n**3 - 3.0 * c * r[0] / n**5)


def _newton_axial_d_bx(m, b, M, a, Gc=1.0):
    """d/d b_x of one pair's axial torque: d/d b_x [c / |r|^3] = (r_y + b_y) / |r|^3 + 3 c r_x / |r|^5."""
    r = np.subtract(a, b)
    n = np.linalg.norm(r)
    c = b[0] * r[1] - b[1] * r[0]
    return Gc * m * M * ((r[1] + b[1]) / n**3 + 3.0 * c * r[0] / n**5)


def _turn(p, phi):
    c, s = math.cos(phi), math.sin(phi)
    return (c * p[0] - s * p[1], s * p[0] + c * p[1], p[2])


def test_acceleration_g_columns_follow_the_harmonic_of_newtons_torque():
    # G = alpha I / |T_2|; T_2 by numpy's FFT of Newton's torque over 64 turns (the harmonics fall
    # off like (0.04/0.11)^n, so the aliases at 62, 66 are negligible). Shifting ball-1 along x:
    # d ln G / d x = -d ln |T_2| / dx, with d tau / d x from the hand derivative of Newton's law
    # (`_newton_axial_d_ax`, the turned ball moving along the turned x axis), checked against a
    # central finite difference of ln |T_2| of the closed form; the bob's mass adds d ln I / d m.
    import synthetic_methods as sm

    amp = sm.fft_amplitudes(lambda p: sm.sphere_torque(p, G=1.0))[2]
    alpha = sm.G_TRUE * amp / sm.INERTIA_SPHERES
    table = f'[measurement]\nmethod = "acceleration"\nharmonic = 2\nacceleration = "{alpha!r} rad/s^2"\n'
    sc = load_scene_text(sm.scene_text(table))
    res = sensitivities(sc, workers=1, bodies=["ball-1", "bob-east"], rtol=1e-11)
    assert "acceleration" in res.G_model

    bobs = [(sm.M_BOB, (sm.D, 0.0, 0.0)), (sm.M_BOB, (-sm.D, 0.0, 0.0))]
    a1, a2 = sm.attractor_centres(0.0)
    n = 64
    phis = 2 * np.pi * np.arange(n) / n
    e2 = np.exp(-2j * phis)

    def harmonic(ball1, bobs=bobs):
        return np.sum([_newton_axial(bobs, [(sm.M_BIG, _turn(ball1, p)), (sm.M_BIG, _turn(a2, p))]) for p in phis]
                      * e2)

    F = harmonic(a1)
    dF = np.sum([sum(_newton_axial_d_ax(m, b, sm.M_BIG, _turn(a1, p)) * math.cos(p)
                     + _newton_axial_y(m, b, sm.M_BIG, _turn(a1, p)) * math.sin(p) for m, b in bobs)
                 for p in phis] * e2)
    dlnT = (F.conjugate() * dF).real / abs(F) ** 2
    h = 1e-6
    fd = (math.log(abs(harmonic((a1[0] + h, a1[1], a1[2])))) - math.log(abs(harmonic((a1[0] - h, a1[1], a1[2]))))) / (2 * h)
    assert dlnT == pytest.approx(fd, rel=1e-6)   # the hand derivative against the closed form's difference
    row = next(r for r in res.rows if r.body == "ball-1" and r.parameter == "at.x")
    assert row.d_G / res.G == pytest.approx(-dlnT, rel=1e-6)

    # the mass of bob-east: T_2 linear in it, and I = sum (2/5 m r^2 + m d^2) (handbook sphere +
    # parallel axis)
    east = harmonic(a1, bobs[:1])
    dlnG = (0.4 * sm.R_BOB**2 + sm.D**2) / sm.INERTIA_SPHERES - (F.conjugate() * east).real / abs(F) ** 2 / sm.M_BOB
    row = next(r for r in res.rows if r.body == "bob-east" and r.parameter == "density")
    rho_row = dlnG * sm.M_BOB / sm.RHO  # the torque and inertia are linear in the density
    assert row.d_G / res.G == pytest.approx(rho_row, rel=1e-9)
    # the turn of the start: |T_2| does not depend on it
    turn = next(r for r in res.rows if r.parameter == "turn")
    assert turn.d_G == 0.0

    # a finite offset: the first-order model's G change is the closed form's (I fixed, |T_2| changed)
    # (and the full reduction, by its own harmonic route, agrees)
    ref = abs(F) / abs(harmonic((a1[0] + 2e-3, a1[1], a1[2]))) - 1.0
    for full in (False, True):
        w = offset_what_if(sc, "ball-1", [2e-3, 0.0, 0.0], rtol=1e-11, full_reduction=full)
        assert w.G_ppm == pytest.approx(1e6 * ref, rel=1e-7)


def _newton_axial_y(m, b, M, a, Gc=1.0):
    """d/d a_y of one pair's axial torque: d/d a_y [c / |r|^3] = b_x / |r|^3 - 3 c r_y / |r|^5."""
    r = np.subtract(a, b)
    n = np.linalg.norm(r)
    c = b[0] * r[1] - b[1] * r[0]
    return Gc * m * M * (b[0] / n**3 - 3.0 * c * r[1] / n**5)


def test_servo_g_columns_follow_the_least_squares_of_newtons_torque():
    # G = -slope of the measured servo torques on the torques per unit G (numpy.polyfit, three
    # positions, torques off the line by a little so that the residuals count); shifting bob-east
    # along x changes every torque by the hand derivative of Newton's law (`_newton_axial_d_bx`),
    # and G by d ln G, checked against a central finite difference of the closed form's G
    import synthetic_balance as sb

    psi = {"A": sb.PSI_A, "B": sb.PSI_B, "C": sb.PSI_C}
    measured = {p: 2e-13 - sb.torque(0.0, v) * (1.0 + 1e-3 * k) for k, (p, v) in enumerate(psi.items())}
    body = ", ".join(f'{p} = "{t!r} N m"' for p, t in measured.items())
    sc = load_scene_text(sb.scene_text(psi, f'method = "servo"\ntorque = {{ {body} }}\n'))
    res = sensitivities(sc, workers=1, bodies=["bob-east"], rtol=1e-11)
    assert "servo" in res.G_model
    y = np.array(list(measured.values()))
    r = math.hypot(sb.D, sb.B)

    def balls(v):
        return [(sb.M_BIG, (s * r * math.cos(sb.ANGLE + v), s * r * math.sin(sb.ANGLE + v), 0.0)) for s in (1, -1)]

    def gammas(x):
        bobs = [(sb.M_BOB, (x, 0.0, 0.0)), (sb.M_BOB, (-sb.D, 0.0, 0.0))]
        return np.array([_newton_axial(bobs, balls(v)) for v in psi.values()])

    def G_of(x):
        return -np.polyfit(gammas(x), y, 1)[0]

    g0 = gammas(sb.D)
    dg = np.array([sum(_newton_axial_d_bx(sb.M_BOB, (sb.D, 0.0, 0.0), M, a) for M, a in balls(v)) for v in psi.values()])
    h = 1e-6
    fd = (math.log(G_of(sb.D + h)) - math.log(G_of(sb.D - h))) / (2 * h)
    # first order by the chain rule through numpy's least squares (its slope's own difference in Gamma)
    eps = 1e-7
    chain = (math.log(-np.polyfit(g0 + eps * dg, y, 1)[0]) - math.log(-np.polyfit(g0 - eps * dg, y, 1)[0])) / (2 * eps)
    assert chain == pytest.approx(fd, rel=1e-6)
    row = next(r for r in res.rows if r.body == "bob-east" and r.parameter == "at.x")
    assert row.d_G / res.G == pytest.approx(fd, rel=1e-6)
    # two positions: -d(Gamma_A - Gamma_B) / (Gamma_A - Gamma_B), the torque difference alone
    two = {p: measured[p] for p in ("A", "B")}
    body = ", ".join(f'{p} = "{t!r} N m"' for p, t in two.items())
    sc2 = load_scene_text(sb.scene_text({p: psi[p] for p in two}, f'method = "servo"\ntorque = {{ {body} }}\n'))
    row2 = next(r for r in sensitivities(sc2, workers=1, bodies=["bob-east"], rtol=1e-11).rows
                if r.body == "bob-east" and r.parameter == "at.x")
    assert row2.d_G / res.G == pytest.approx(-(dg[0] - dg[1]) / (g0[0] - g0[1]), rel=1e-6)
    # a finite move of bob-east: the model's G change is the closed form's least-squares G ratio, and
    # the full reduction agrees
    for full in (False, True):
        w = offset_what_if(sc, "bob-east", [1e-3, 0.0, 0.0], rtol=1e-11, full_reduction=full)
        assert w.G_ppm == pytest.approx(1e6 * (G_of(sb.D + 1e-3) / G_of(sb.D) - 1.0), rel=1e-7)


def test_what_ifs_refuse_impossible_changes():
    sc = load_scene_text(EXTENDED)
    with pytest.raises(InputError, match="only a sphere"):
        flatten_what_if(sc, "beam", 0.1)
    with pytest.raises(InputError, match="does not fit"):
        void_what_if(sc, "ball", 0.01, [0.015, 0, 0])
    with pytest.raises(InputError):
        flatten_what_if(sc, "ball", 1.5)


CYLINDER_ON_AXIS = """
[scene]
G = 6.6743e-11
[[body]]
name = "p"
group = "pendulum"
shape = "point"
mass = 0.05
at = [0.05, 0, 0]
[[body]]
name = "drum"
group = "attractor"
shape = "cylinder"
radius = 0.03
length = 0.06
axis = [0, 1, 0]
density = 11340
at = [0.05, 0.08, 0]
[[position]]
name = "A"
group = "attractor"
[[position]]
name = "B"
group = "attractor"
shift = [0, -0.16, 0]
[measurement]
method = "deflection"
angle = { A = "0.002 rad", B = "-0.002 rad" }
period = "400 s"
"""


def _on_axis_torque(gap, a=0.03, L=0.06, rho=11340.0, m=0.05, lever=0.05):
    """Torque about z on the point `lever` from the fiber whose pull runs along y, from the cylinder's
    on-axis field g = 2 pi G rho (L + sqrt(a^2 + z^2) - sqrt(a^2 + (z + L)^2)), z the gap to the near face
    (Telford, Geldart and Sheriff, Applied Geophysics, 2nd ed.; from memory)."""
    g = 2 * math.pi * G * rho * (L + math.hypot(a, gap) - math.hypot(a, gap + L))
    return lever * m * g


def test_what_if_g_error_bounds_the_true_error_against_the_on_axis_closed_form():
    # a point on the axis of a cylinder at A (beyond it along +y) and B (mirrored); the what-if moves the
    # cylinder 2 mm farther along its axis: every torque is the on-axis closed form, the engine's band
    # field at rtol 1e-6 is not, and the G figure's error bound must cover the difference
    sc = load_scene_text(CYLINDER_ON_AXIS)
    w = offset_what_if(sc, "drum", np.array([0.0, 0.002, 0.0]), rtol=1e-6)
    gap0, gap1 = 0.08 - 0.03, 0.082 - 0.03
    tA0, tA1 = _on_axis_torque(gap0), _on_axis_torque(gap1)
    tB0, tB1 = -tA0, -_on_axis_torque(gap1 - 0.004)          # B: the shifted cylinder is 2 mm nearer
    ref = 1e6 * ((tA0 - tB0) / (tA1 - tB1) - 1)              # G ~ I / (tau_A - tau_B), I unchanged
    assert w.G_ppm_error is not None and w.G_ppm_error > 0
    assert abs(w.G_ppm - ref) <= w.G_ppm_error
    assert w.G_ppm_error < 1e-3 * abs(ref)                    # and it is not vacuous


def test_bias_g_error_bounds_the_true_error_on_the_cylinder_axis():
    # G ~ I / (tau_A - tau_B) and every torque is linear in the drum's density, so d ln G = -d rho / rho
    # exactly; moving the drum along its axis lengthens A's gap and shortens B's by the same amount, so
    # by the mirror symmetry of the closed form G does not change to first order
    text = (CYLINDER_ON_AXIS.replace("at = [0.05, 0.08, 0]", 'at = [0.05, "0.08 +- 0.0001", 0]')
            .replace("density = 11340", 'density = "11340 +- 10"'))
    res = sensitivities(load_scene_text(text), workers=1, bodies=["drum"], rtol=1e-6)
    rows = {r.parameter: r for r in res.rows}
    density, shift = rows["density"], rows["at.y"]
    assert abs(density.G_ppm - (-1e6 * 10 / 11340)) <= density.G_ppm_error
    assert abs(shift.G_ppm - 0.0) <= shift.G_ppm_error
