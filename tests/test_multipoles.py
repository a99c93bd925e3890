"""Multipole moments and the multipole interaction series.

Outside references: scipy.special.sph_harm_y (spherical harmonics) and eval_legendre; the addition
theorem for 1/|x - y| (closed form); Newton's law for point masses (computed here); the standard moments
of inertia of the cylinder and the box (from memory); scipy.integrate.tplquad as a brute-force reference for
volume integrals; and direct integration by the engine (compare_groups) for extended bodies. A measured
ball on the exact sphere pulls as a point (shell theorem): numpy.fft of Newton's torque for its harmonics.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import tplquad
from scipy.special import eval_legendre, sph_harm_y

from truepull.geometry.scene import Position, load_scene_text
from truepull.geometry.quantities import Measured
from truepull.integrate.interaction import compare_groups
from truepull.integrate.multipoles import (ExpansionFrame, MultipoleRefused, MultipoleSeries, body_inner_moments,
                                           body_outer_moments, inner_moments, interaction_series, moments_table,
                                           outer_moments, regions)
from truepull.integrate.solid_harmonics import full_m, irregular, regular

G = 6.6743e-11


def _points_scene(test_points, source_points):
    """Point masses [(mass kg, (x, y, z) m)] in the pendulum and attractor groups (SI units)."""
    parts = []
    for group, pts in (("pendulum", test_points), ("attractor", source_points)):
        for k, (m, at) in enumerate(pts):
            parts.append(f'[[body]]\nname = "{group}-{k}"\ngroup = "{group}"\nshape = "point"\nmass = {m!r}\n'
                         f'at = [{at[0]!r}, {at[1]!r}, {at[2]!r}]\n')
    return load_scene_text(f"[scene]\nG = {G!r}\n" + "\n".join(parts))


def _newton(test_points, source_points, phi):
    """Energy, torque about z, force on the test points with the source turned by phi about z (Newton)."""
    c, s = math.cos(phi), math.sin(phi)
    R = np.array([[c, -s, 0], [s, c, 0], [0, 0, 1]])
    E, tau, F = 0.0, 0.0, np.zeros(3)
    for m, r in test_points:
        r = np.asarray(r, float)
        for M, q in source_points:
            q = R @ np.asarray(q, float)
            d = q - r
            dist = np.linalg.norm(d)
            E -= G * m * M / dist
            f = G * m * M * d / dist**3
            F += f
            tau += np.cross(r, f)[2]
    return E, tau, F


def test_solid_harmonics_match_scipy_and_the_addition_theorem():
    rng = np.random.default_rng(3)
    p = rng.normal(size=(6, 3)) * 0.3
    L = 10
    R, I = regular(p, L), irregular(p, L)
    r = np.linalg.norm(p, axis=1)
    theta, phi = np.arccos(p[:, 2] / r), np.arctan2(p[:, 1], p[:, 0])
    for l in range(L + 1):
        for m in range(-l, l + 1):
            y = sph_harm_y(l, m, theta, phi)  # scipy.special: orthonormal, Condon-Shortley phase
            f = math.sqrt(4 * math.pi / (2 * l + 1))
            got_r = np.array([full_m(R[i])[l, m + L] for i in range(len(p))])
            got_i = np.array([full_m(I[i])[l, m + L] for i in range(len(p))])
            np.testing.assert_allclose(got_r, f * r**l * y, rtol=1e-11, atol=1e-14 * np.max(np.abs(f * r**l)))
            np.testing.assert_allclose(got_i, f * r ** (-l - 1) * y, rtol=1e-11,
                                       atol=1e-14 * np.max(np.abs(f * r ** (-l - 1.0))))
    # addition theorem: 1/|x - y| = sum conj(R_lm(x)) I_lm(y) for |x| < |y| (closed form)
    x, y = np.array([0.02, -0.03, 0.01]), np.array([0.05, 0.04, -0.03])
    s = np.sum(np.conj(full_m(regular(x[None], 60)[0])) * full_m(irregular(y[None], 60)[0]))
    assert abs(s.real - 1 / np.linalg.norm(x - y)) < 1e-12 / np.linalg.norm(x - y)


def test_moments_of_a_point_pair_are_the_closed_form():
    m, d = 0.25, 0.04
    sc = _points_scene([(m, (d, 0, 0)), (m, (-d, 0, 0))], [(1.0, (0, 0.3, 0))])
    t = moments_table(sc, 6)
    q, _ = t["inner"].display()
    L = 6
    for l in range(L + 1):
        for mm in range(-l, l + 1):
            # q_lm = sum of m d^l conj(Y_lm) at theta = pi/2, phi = 0 and pi (scipy.special.sph_harm_y)
            ref = m * d**l * np.conj(sph_harm_y(l, mm, np.pi / 2, 0.0) + sph_harm_y(l, mm, np.pi / 2, np.pi))
            assert abs(q[l, mm + L] - ref) <= 1e-13 * m * d**l
    # odd m vanish for the pair (closed form: 1 + (-1)^m)
    assert np.all(np.abs(q[:, L + 1::2]) < 1e-15)


def test_moments_of_a_uniform_ring_have_only_m0_terms():
    # N equal points on a circle have exactly the moments of the uniform ring for degrees below N:
    # q_l0 = M a^l P_l(0) sqrt((2l+1)/4pi), all m != 0 zero (closed form; scipy.special.eval_legendre)
    M, a, N, L = 2.0, 0.05, 24, 12
    pts = [(M / N, (a * math.cos(2 * math.pi * k / N), a * math.sin(2 * math.pi * k / N), 0.0)) for k in range(N)]
    sc = _points_scene(pts, [(1.0, (0, 0, 0.5))])
    q, err = inner_moments(sc.group("pendulum"), ExpansionFrame.of(sc.frame.pivot, sc.frame.axis), L).display()
    for l in range(L + 1):
        ref = M * a**l * eval_legendre(l, 0.0) * math.sqrt((2 * l + 1) / (4 * math.pi))
        assert abs(q[l, L] - ref) <= 1e-13 * M * a**l
        others = np.delete(q[l], L)
        assert np.all(np.abs(others) <= 1e-13 * M * a**l)
        assert err[l, L] < 1e-12 * M * a**l


CYLINDER_BOX = """
[scene]
G = 6.6743e-11
[[body]]
name = "c"
group = "pendulum"
shape = "cylinder"
radius = 0.02
inner_radius = 0.008
length = 0.05
density = 7000
[[body]]
name = "b"
group = "pendulum"
shape = "box"
size = [0.03, 0.02, 0.012]
density = 2700
at = [0.01, -0.02, 0.005]
rotate = { axis = [1, 2, 3], angle = 0.4 }
[[body]]
name = "far"
group = "attractor"
shape = "box"
size = [0.04, 0.03, 0.05]
density = 11000
at = [0.12, 0.05, -0.02]
rotate = { axis = [0, 1, 1], angle = 0.7 }
"""


def test_quadrupole_of_a_tube_is_the_handbook_inertia():
    # the Racah-normalised a_20 = integral of r^2 P_2(cos theta) dm = integral of (z^2 - rho^2/2) dm;
    # standard moment-of-inertia integrals, from memory: int z^2 dm = M L^2/12 and int rho^2 dm =
    # M (R^2 + r^2)/2 for a tube
    sc = load_scene_text(CYLINDER_BOX)
    c = sc.body("c")
    frame = ExpansionFrame.of(np.zeros(3), [0, 0, 1])
    a, _ = body_inner_moments(c, frame, 4)
    M, L, R, r = c.mass, 0.05, 0.02, 0.008
    ref = M * (L**2 / 12 - (R**2 + r**2) / 4)
    assert abs(a[2, 0].real - ref) < 1e-13 * abs(ref)
    # and the displayed q_20 carries the orthonormal factor sqrt(5 / 4 pi)
    q, _ = inner_moments([c], frame, 4).display()
    assert abs(q[2, 4].real - math.sqrt(5 / (4 * math.pi)) * ref) < 1e-13 * abs(ref)
    # axial symmetry: only m = 0, and odd l vanish by the mirror symmetry z -> -z
    assert np.all(np.abs(a[:, 1:]) < 1e-15 * M * 0.05 ** np.arange(5)[:, None])
    assert abs(a[1, 0]) < 1e-17 and abs(a[3, 0]) < 1e-19


def _tplquad_box_moment(body, l, m, irregular_kind):
    """Brute-force reference: scipy tplquad of rho r^l conj(Y_lm) (or r^-(l+1)) over a rotated box."""
    half = 0.5 * np.asarray(body.shape.size)
    Rm, t = body.placement.rotation, body.placement.translation

    def f(z, y, x, part):
        p = Rm @ np.array([x, y, z]) + t
        r = np.linalg.norm(p)
        val = np.conj(sph_harm_y(l, m, math.acos(p[2] / r), math.atan2(p[1], p[0])))
        val *= r ** (-(l + 1)) if irregular_kind else r**l
        return body.density * (val.real if part == 0 else val.imag)

    out = []
    for part in (0, 1):
        v, _ = tplquad(f, -half[0], half[0], -half[1], half[1], -half[2], half[2], args=(part,),
                       epsabs=1e-14, epsrel=1e-11)
        out.append(v)
    return complex(*out)


def test_box_moments_against_brute_force_quadrature():
    sc = load_scene_text(CYLINDER_BOX)
    frame = ExpansionFrame.of(np.zeros(3), [0, 0, 1])
    L = 3
    b = sc.body("b")
    q, _ = inner_moments([b], frame, L).display()
    ref = _tplquad_box_moment(b, 3, 2, False)  # scipy.integrate.tplquad
    assert abs(q[3, L + 2] - ref) < 1e-9 * abs(ref)
    far = sc.body("far")
    Q, err = outer_moments([far], frame, L, 1e-13).display()
    ref = _tplquad_box_moment(far, 2, 1, True)
    assert abs(Q[2, L + 1] - ref) < 1e-9 * abs(ref)
    assert err[2, L + 1] < 1e-9 * abs(ref)


def test_mesh_inner_moments_equal_the_box_rule(tmp_path):
    # a closed mesh of a box (trimesh.creation.box) against the exact volume rule of the box primitive;
    # both exact for polynomials, so they agree to rounding (degree 8)
    import trimesh

    # edges in mm, whole numbers: exact in the STL's single precision
    trimesh.creation.box(extents=[30.0, 20.0, 12.0]).export(tmp_path / "box.stl")
    text = CYLINDER_BOX + """
[[body]]
name = "mesh"
group = "stand"
shape = "mesh"
file = "box.stl"
file_units = "mm"
density = 2700
at = [0.01, -0.02, 0.005]
rotate = { axis = [1, 2, 3], angle = 0.4 }
"""
    sc = load_scene_text(text, "x", str(tmp_path))
    frame = ExpansionFrame.of(np.array([0.001, 0.002, -0.003]), [0.2, 0.1, 1.0])
    a1, _ = body_inner_moments(sc.body("b"), frame, 8)
    a2, _ = body_inner_moments(sc.body("mesh"), frame, 8)
    scale = sc.body("b").mass * 0.05 ** np.arange(9)[:, None]
    assert np.all(np.abs(a1 - a2) <= 1e-12 * scale)


SEPARABLE = """
[scene]
G = 6.6743e-11
[units]
length = "mm"
[[body]]
name = "bob-1"
group = "pendulum"
shape = "sphere"
radius = 5
density = 11340
at = [25, 0, 0]
[[body]]
name = "bob-2"
group = "pendulum"
shape = "sphere"
radius = 5
density = 11340
at = [-25, 0, 0]
[[body]]
name = "beam"
group = "pendulum"
shape = "box"
size = [40, 4, 2]
density = 2700
[[body]]
name = "ball"
group = "attractor"
shape = "sphere"
radius = 20
density = 11340
at = [50, 60, 0]
[[body]]
name = "block"
group = "attractor"
shape = "box"
size = [30, 30, 30]
density = 11340
at = [-50, -60, 10]
"""


def test_multipole_torque_matches_direct_integration():
    sc = load_scene_text(SEPARABLE)
    tb, sb = sc.group("pendulum"), sc.group("attractor")
    series = interaction_series(tb, sb, sc.frame.pivot, sc.frame.axis, sc.G.value, rtol=1e-10)
    err = series.errors()
    for deg in (0.0, 40.0, 135.0):
        phi = math.radians(deg)
        c = compare_groups(sc, position=Position("p", "attractor", Measured(phi)), rtol=1e-10)  # the engine
        tau = series.torque_axis(phi)[0]
        assert abs(tau - c.exact.torque_axis) <= 1e-9 * abs(c.exact.torque_axis)
        assert abs(tau - c.exact.torque_axis) <= err["torque_axis"] + c.error.torque_axis
        K = series.stiffness_axis(phi)[0]
        assert abs(K - c.exact.stiffness_axis) <= 1e-9 * abs(c.exact.stiffness_axis)
        F = series.force(phi)[0]
        assert np.linalg.norm(F - c.exact.force) <= 1e-9 * np.linalg.norm(c.exact.force)
        assert abs(series.energy(phi)[0] - c.exact.energy) <= 1e-9 * abs(c.exact.energy)


def test_point_pair_series_is_newton_and_the_bound_holds():
    # the normalisation W = -G sum a conj(b) and the signs of torque and force against Newton's law
    test_pts = [(0.01, (0.03, 0.01, 0.005)), (0.02, (-0.02, 0.0, -0.01))]
    src_pts = [(1.5, (0.06, 0.07, 0.02)), (0.7, (-0.08, 0.02, -0.03))]
    sc = _points_scene(test_pts, src_pts)
    tb, sb = sc.group("pendulum"), sc.group("attractor")
    frame = ExpansionFrame.of(sc.frame.pivot, sc.frame.axis)
    inner, outer = inner_moments(tb, frame, 40), outer_moments(sb, frame, 40)
    for L in (3, 8, 40):
        s = MultipoleSeries.build(G, frame, inner.truncated(L), outer.truncated(L), L)
        bound = s.errors()
        for phi in np.linspace(0, 2 * np.pi, 7):
            E, tau, F = _newton(test_pts, src_pts, phi)
            assert abs(s.energy(phi)[0] - E) <= bound["energy"]
            assert abs(s.torque_axis(phi)[0] - tau) <= bound["torque_axis"]
            assert np.linalg.norm(s.force(phi)[0] - F) <= bound["force"]
            if L == 40:
                assert abs(s.torque_axis(phi)[0] - tau) <= 1e-9 * abs(E) / 0.1
    # stiffness: K = -d tau / d theta of the pendulum = +d tau / d phi (central difference of Newton)
    s = MultipoleSeries.build(G, frame, inner, outer, 40)
    h = 1e-5
    dtau = (_newton(test_pts, src_pts, 0.3 + h)[1] - _newton(test_pts, src_pts, 0.3 - h)[1]) / (2 * h)
    assert abs(s.stiffness_axis(0.3)[0] - dtau) <= 1e-7 * abs(dtau)


def test_interleaved_regions_are_refused_with_a_reason():
    sc = _points_scene([(0.01, (0.05, 0, 0))], [(1.0, (0, 0.04, 0))])
    sep = regions(sc.group("pendulum"), sc.group("attractor"), sc.frame.pivot)
    assert not sep.ok
    with pytest.raises(MultipoleRefused, match="interleave"):
        interaction_series(sc.group("pendulum"), sc.group("attractor"), sc.frame.pivot, sc.frame.axis, G)
    # an attractor body that reaches the pivot has no outer moments
    text = SEPARABLE.replace('at = [-50, -60, 10]', 'at = [0, 0, 30]').replace("size = [30, 30, 30]",
                                                                             "size = [30, 30, 80]")
    sc2 = load_scene_text(text)
    with pytest.raises(MultipoleRefused):
        body_outer_moments(sc2.body("block"), ExpansionFrame.of(sc2.frame.pivot, sc2.frame.axis), 4)
    t = moments_table(sc2, 3)
    assert t["outer"] is None and "reaches the pivot" in t["outer_reason"]


def test_moments_display_and_json(tmp_path):
    # the point-pair closed form again, through the display layer the compare verb uses
    from truepull.cli.moments import format_moments, moments_json
    from truepull.geometry.errors import InputError

    sc = _points_scene([(0.25, (0.04, 0, 0)), (0.25, (-0.04, 0, 0))], [(1.0, (0, 0.3, 0))])
    data = moments_json(sc, 4)
    assert data["valid"] and data["outer"] is not None
    q22 = next(e for e in data["inner"] if (e["l"], e["m"]) == (2, 2))
    ref = 2 * 0.25 * 0.04**2 * np.conj(sph_harm_y(2, 2, np.pi / 2, 0.0))  # scipy.special
    assert abs(complex(q22["re"], q22["im"]) - ref) < 1e-15
    text = format_moments(sc, 2)
    assert "inner moments q_lm of pendulum" in text and "outer moments Q_lm of attractor" in text
    for bad in (-1, 2.5, "x", 1000):
        with pytest.raises(InputError):
            moments_json(sc, bad)


def test_torque_harmonics_are_the_fourier_series_of_newton():
    # tau(phi) of point masses by Newton's law (computed here), sampled at 64 turns; its Fourier
    # coefficients by numpy's FFT (exact for a trigonometric polynomial, aliasing below 1e-12 here)
    from truepull.cli.moments import moments_json

    test_pts = [(0.02, (0.03, 0.004, 0.002)), (0.03, (-0.025, -0.01, -0.003))]
    src_pts = [(1.1, (0.02, 0.09, 0.01)), (0.8, (-0.05, -0.08, -0.02))]
    sc = _points_scene(test_pts, src_pts)
    N = 64
    phis = 2 * np.pi * np.arange(N) / N
    tau = np.array([_newton(test_pts, src_pts, p)[1] for p in phis])
    spec = np.fft.rfft(tau) / N
    data = moments_json(sc, 30)
    h = data["torque_harmonics"]
    assert h["truncation_bound"] < 1e-8 * np.max(np.abs(tau))
    for term in h["terms"][:8]:
        m = term["m"]
        C, S = 2 * spec[m].real, -2 * spec[m].imag
        assert abs(term["cos"] - C) <= 1e-9 * np.max(np.abs(tau)) + h["truncation_bound"]
        assert abs(term["sin"] - S) <= 1e-9 * np.max(np.abs(tau)) + h["truncation_bound"]
    # the series summed at one turn is the torque there
    phi = phis[5]
    total = sum(t["cos"] * np.cos(t["m"] * phi) + t["sin"] * np.sin(t["m"] * phi) for t in h["terms"])
    assert abs(total - tau[5]) <= h["truncation_bound"] + 1e-12 * np.max(np.abs(tau))
    # interleaved: no series
    sc2 = _points_scene([(0.01, (0.05, 0, 0))], [(1.0, (0, 0.04, 0))])
    assert moments_json(sc2, 4)["torque_harmonics"] is None


RAISED = """
[scene]
G = 6.6743e-11
[units]
length = "mm"
[[body]]
name = "bob-east"
group = "pendulum"
shape = "sphere"
radius = 5
density = 11340
at = [40, 0, 0]
[[body]]
name = "bob-west"
group = "pendulum"
shape = "sphere"
radius = 5
density = 11340
at = [-40, 0, 0]
[[body]]
name = "ball-north"
group = "attractor"
shape = "sphere"
radius = 20
density = 11340
at = [0, 50, 30]
[[body]]
name = "ball-south"
group = "attractor"
shape = "sphere"
radius = 20
density = 11340
at = [0, -50, -30]
"""

BEAM = """
[[body]]
name = "beam"
group = "pendulum"
shape = "box"
size = [70, 4, 4]
density = 2700
"""


def test_spheres_act_by_their_centres_when_no_turn_brings_bodies_together():
    # the balls come within hypot(50, 30) - 20 = 38.3 mm of the pivot, inside the bobs' reach of
    # 45 mm, but their centres (58.3 mm) lie outside the bobs' centres (40 mm), and the circles the
    # centres travel on stay hypot(50 - 40, 30) = 31.6 mm > 5 + 20 mm apart (plane geometry): the
    # series holds. Reference: Newton's law between the centres (shell theorem), computed here.
    from truepull.integrate.multipoles import never_meet
    from truepull.integrate.scans import Sweep, scan

    sc = load_scene_text(RAISED)
    tb, sb = sc.group("pendulum"), sc.group("attractor")
    sep = regions(tb, sb, sc.frame.pivot, sc.frame.axis)
    assert sep.ok and sep.by_centres
    assert not regions(tb, sb, sc.frame.pivot).ok  # by actual extent they interleave
    assert abs(sep.inner_radius - 0.04) < 1e-15 and abs(sep.outer_radius - math.hypot(0.05, 0.03)) < 1e-15
    assert all(never_meet(t, s, sc.frame.pivot, sc.frame.axis) for t in tb for s in sb)
    values = tuple(math.radians(v) for v in range(0, 360, 20))
    res = scan(sc, Sweep("turn", values, "attractor"), workers=1, checks=2)
    assert res.method == "multipole"
    pts = lambda group: [(b.mass, tuple(b.com)) for b in sc.group(group)]  # noqa: E731
    for row in res.rows:
        _, tau, _ = _newton(pts("pendulum"), pts("attractor"), row.value)
        assert abs(row.exact_torque_axis - tau) <= row.error_torque_axis + 1e-12 * abs(tau)
        assert abs(row.exact_torque_axis - tau) <= 1e-9 * 2e-12 + 1e-9 * abs(tau)


def test_a_beam_below_raised_balls_never_meets_them_and_the_series_matches_direct_integration():
    # the beam's height range [-2, 2] mm and the north ball's [10, 50] mm do not overlap (support
    # functions): no turn can bring them together. Reference: direct integration (compare_groups)
    from truepull.integrate.multipoles import never_meet

    sc = load_scene_text(RAISED + BEAM)
    beam, north = sc.body("beam"), sc.body("ball-north")
    assert never_meet(beam, north, sc.frame.pivot, sc.frame.axis)
    sep = regions(sc.group("pendulum"), sc.group("attractor"), sc.frame.pivot, sc.frame.axis)
    assert sep.ok and sep.by_centres and abs(sep.inner_radius - 0.04) < 1e-15  # the bobs, not the beam (35.1 mm)
    series = interaction_series(sc.group("pendulum"), sc.group("attractor"), sc.frame.pivot, sc.frame.axis, G, 1e-10)
    for phi in (0.3, 1.9):
        moved = sc.with_bodies([b.moved(sc.frame.turn(phi)) if b.group == "attractor" else b for b in sc.bodies])
        direct = compare_groups(moved, "pendulum", "attractor", None, 1e-10)
        tau = series.torque_axis(phi)[0]
        allowed = series.errors()["torque_axis"] + direct.error.torque_axis
        assert abs(tau - direct.exact.torque_axis) <= allowed
        assert abs(tau - direct.exact.torque_axis) <= 1e-9 * abs(direct.exact.torque_axis)


def test_bodies_that_a_turn_brings_together_are_not_separated_by_centres():
    # a ball on the bobs' circle at their height: its centre (40 mm) is no farther than theirs, and
    # a turn would put it inside a bob; lifted to z = 8 mm above a bob's track it would still meet it
    # (hypot(0, 8) < 5 + 5 mm)
    from truepull.integrate.multipoles import never_meet

    text = RAISED.replace("at = [0, 50, 30]", "at = [0, 40, 8]").replace("radius = 20", "radius = 5")
    sc = load_scene_text(text)
    assert not never_meet(sc.body("bob-east"), sc.body("ball-north"), sc.frame.pivot, sc.frame.axis)
    sep = regions(sc.group("pendulum"), sc.group("attractor"), sc.frame.pivot, sc.frame.axis)
    assert not sep.ok and not sep.by_centres and "interleave" in sep.reason


def test_measured_ball_series_errors_hold_its_chord_error():
    """A measured form on the exact sphere (scene_fixtures.MEASURED_BALL) in the series: the torque's
    harmonics against numpy's FFT of Newton's torque (the exact ball pulls as a point: shell theorem),
    and torque, force and energy at a few turns against Newton's law, each within its error estimate,
    which holds the pairs' change against the coarser tessellation; without that change it would not."""
    from tests.scene_fixtures import exact_measured_ball_scene

    sc, test, source = exact_measured_ball_scene(G)
    series = interaction_series(sc.group("pendulum"), sc.group("attractor"), sc.frame.pivot, sc.frame.axis, G, 1e-9)
    assert series.tessellation is not None and series.tessellation.pairs == (("pendulum-0", "attractor-0"),
                                                                             ("pendulum-0", "attractor-1"))
    n = 64  # reference: numpy.fft of Newton's torque; harmonics fall as (35 / 90)^m, no aliasing at 64
    X = np.fft.rfft([_newton(test, source, 2 * np.pi * k / n)[1] for k in range(n)]) / n
    chord = series.tessellation.harmonic_errors()
    missed = 0
    for m, C, S, err in series.torque_harmonics():
        true = max(abs(C - 2 * X[m].real), abs(S + 2 * X[m].imag))
        assert true <= err + series.bounds.torque, m
        missed += true > err - chord[m - 1] + series.bounds.torque
    assert missed > 0                                   # the chord change is what bounds them
    phi = np.radians([10.0, 50.0, 100.0])
    at = series.errors_at(phi)
    uniform = series.errors()
    for k, p in enumerate(phi):
        E, tau, F = _newton(test, source, p)              # reference: Newton's law
        assert abs(series.torque_axis(p)[0] - tau) <= at["torque_axis"][k]
        assert np.linalg.norm(series.force(p)[0] - F) <= at["force"][k]
        assert abs(series.energy(p)[0] - E) <= at["energy"][k]
        assert all(at[q][k] <= uniform[q] for q in uniform)
