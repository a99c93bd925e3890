"""Measured cylinder (geometry/measured_cylinder.py): fit, polyhedron, chord error, scene key and bias.

Outside references:
- Potential theory to first order in the deviation: a uniform body whose side radius is R + dr(phi, z)
  differs from the cylinder of radius R by a surface layer of density rho dr per unit area of the side,
  whose exterior field is G rho integral of dr (X - P) / |X - P|^3 R dphi dz (Kellogg, Foundations of
  Potential Theory, ch. III, single-layer potentials; from memory), computed by scipy.integrate.cubature.
- The ideal cylinder's exterior field: the engine's band field (itself checked against closed forms and
  scipy quadrature in tests/test_field_band.py).
- The volume in closed form: V = integral of r(phi, z)^2 / 2 dphi dz for flat end faces.
- Elementary geometry of the regular N-gon: area (N / 2) R^2 sin(2 pi / N); its chord height at the
  edge middle R (1 - cos(pi / N)); the Richardson remainder of the area (derived below).
- numpy.linalg.lstsq on an independently built design matrix (scipy.special.eval_legendre) and the
  least-squares covariance s^2 (A^T A)^-1 (Press et al., Numerical Recipes, 3rd ed., section 15.4).
- trimesh for watertightness, winding and volume.
"""

from __future__ import annotations

import math
import subprocess
import sys

import numpy as np
import pytest

from tests.scene_fixtures import measured_cylinder_points
from truepull.geometry.bodies import Body
from truepull.geometry.errors import InputError
from truepull.geometry.measured_cylinder import (COARSE, FINE, CylinderFit, chord_height, cylinder_polyhedron,
                                                 face_terms, fit_cylinder, split_points)
from truepull.geometry.meshes import load_mesh
from truepull.geometry.placement import Placement
from truepull.geometry.shapes import Cylinder, MeshShape, Sphere
from truepull.integrate.sources import SourceField

G = 6.6743e-11


def _fit(R, H, eps=0.0, tau=0.0, order=2, degree=1):
    """A CylinderFit of r = R (1 + eps cos 2 phi) + tau z with flat faces at z = +-H (no covariance)."""
    K1 = degree + 1
    side = np.zeros((2 * order + 1) * K1)
    side[0], side[1] = R, tau * H                  # T_0 P_0, T_0 P_1 (P_1 = z / H)
    side[3 * K1] = eps * R                         # cos 2 phi P_0
    nf = len(face_terms(order))
    top, bottom = np.zeros(nf), np.zeros(nf)
    top[0], bottom[0] = H, -H
    c = np.concatenate([side, top, bottom])
    return CylinderFit(order, degree, R, H, c, np.zeros((len(c), len(c))), (0.0,) * 3, (0.0,) * 3, (0,) * 3)


def _body(fit, rho, fine=True):
    v, f = fit.polyhedron(fine=fine)
    return Body("m", "g", MeshShape(v, f), Placement.identity(), rho)




def test_ovality_and_taper_have_the_first_order_layer_field():
    """r = R (1 + eps cos 2 phi) + tau z: the field less the ideal cylinder's (band field) is the surface
    layer's (module docstring, scipy cubature), to the first-order error ~ dr / R."""
    from scipy.integrate import cubature

    R, H, rho, eps, tau = 0.02, 0.03, 8000.0, 2e-3, 1e-3
    fit = _fit(R, H, eps, tau)
    P = np.array([[0.05, 0.01, 0.02], [0.0, 0.06, -0.01], [0.03, 0.03, 0.05], [0.0, 0.0, 0.07], [-0.045, 0.0, 0.0]])
    g_m = SourceField(_body(fit, rho), G).field(P)[1]
    g_0 = SourceField(Body("c", "g", Cylinder(R, 2 * H), Placement.identity(), rho), G).field(P)[1]

    def layer(x):                                  # x (n, 2): phi, z -> (n, len(P) * 3)
        phi, z = x[:, 0], x[:, 1]
        X = np.stack([R * np.cos(phi), R * np.sin(phi), z], axis=1)
        d = X[:, None, :] - P[None, :, :]
        dr = R * eps * np.cos(2 * phi) + tau * z
        w = (G * rho * R * dr)[:, None, None] * d / np.linalg.norm(d, axis=2, keepdims=True) ** 3
        return w.reshape(len(x), -1)

    # atol 1e-20 m/s^2: about 1e-9 of the layer's field at these points (6e-12 to 2e-11 m/s^2), for components that vanish by symmetry
    ref = cubature(layer, [0.0, -H], [2 * math.pi, H], rtol=1e-7, atol=1e-20).estimate.reshape(-1, 3)
    err = np.linalg.norm(g_m - g_0 - ref, axis=1) / np.linalg.norm(ref, axis=1)
    assert np.all(err < 5 * max(eps, tau * H / R)), err       # first order: eps^2 terms ~ eps of the layer's


def test_polyhedron_is_watertight_with_the_closed_form_volume():
    """trimesh: watertight, consistently wound, outward (positive volume); its volume is the fitted volume,
    which is V = 2 pi H R^2 + pi H eps^2 R^2 + 2 pi tau^2 H^3 / 3 (integral of r^2 / 2) up to the
    Romberg remainder of the polygon area, 1 - x^6 / 322560 with x = 2 pi / (N_phi of COARSE): from
    A_N / (pi R^2) = sin(x) / x = 1 - x^2 / 6 + x^4 / 120 - x^6 / 5040 + ... (Taylor series of sin),
    (4 A(2N) - A(N)) / 3 = 1 - x^4 / 480 + x^6 / 16128, and the second step (16 R(2N) - R(N)) / 15
    leaves -x^6 / 322560."""
    import trimesh

    R, H, eps, tau = 0.02, 0.03, 2e-3, 1e-3
    fit = _fit(R, H, eps, tau)
    for fine in (True, False):
        v, f = fit.polyhedron(fine=fine)
        m = trimesh.Trimesh(v, f, process=False)
        assert m.is_watertight and m.is_winding_consistent and m.volume > 0
        assert m.volume == pytest.approx(fit.volume()[0], rel=1e-12)
    exact = 2 * math.pi * H * R**2 + math.pi * H * eps**2 * R**2 + 2 * math.pi * tau**2 * H**3 / 3
    x = 2 * math.pi / COARSE[0]
    assert fit.volume()[0] / exact == pytest.approx(1 - x**6 / 322560, abs=2e-13)


def test_chord_height_falls_as_one_over_n_squared():
    """Exact cylinder: the volume-matched regular N-gon (x and y scaled by s, s^2 = 2 pi / (N sin(2 pi / N)))
    has its vertices s R out and its edge middles s R cos(pi / N) in: chord height max(sR - R, R - sR cos(pi/N)),
    ~ (pi / N)^2 R / 2, falling fourfold per doubling."""
    R, H = 0.02, 0.03
    fit = _fit(R, H)
    heights = []
    for n in (32, 64, 128):
        v, f, k = cylinder_polyhedron(fit, (n, 4, 4))
        v, f, s = fit.matched((n, 4, 4))
        s_exact = math.sqrt(2 * math.pi / (n * math.sin(2 * math.pi / n)))
        closed = max(s_exact * R - R, R - s_exact * R * math.cos(math.pi / n))
        h = chord_height(fit, v, f, k)
        assert h == pytest.approx(closed, rel=1e-4)
        heights.append(h)
    assert heights[0] / heights[1] == pytest.approx(4, rel=0.01) and heights[1] / heights[2] == pytest.approx(4, rel=0.01)


def test_pair_error_bounds_the_true_chord_error():
    """The exact cylinder as measured (fine and coarse polyhedra) beside a sphere, through
    tessellated_pair: its error estimate bounds the difference from the band-field cylinder's pair."""
    from truepull.integrate.pairs import pair_interaction
    from truepull.integrate.tessellation import tessellated_pair

    R, H, rho = 0.02, 0.03, 8000.0
    fit = _fit(R, H)
    v, f = fit.polyhedron()
    vc, fc = fit.polyhedron(fine=False)
    m = Body("m", "p", MeshShape(v, f, "", False, MeshShape(vc, fc)), Placement.identity(), rho)
    ideal = Body("c", "p", Cylinder(R, 2 * H), Placement.identity(), rho)
    for at in ([0.045, 0.0, 0.01], [0.03, 0.04, 0.0]):
        s = Body("s", "a", Sphere(0.015), Placement.shift(at), 11340.0)
        got = tessellated_pair(m, s, np.zeros(3), np.array([0.0, 0.0, 1.0]), G, rtol=1e-10)
        ref = pair_interaction(ideal, s, np.zeros(3), np.array([0.0, 0.0, 1.0]), G, 1e-11)
        true = np.abs(got.values - ref.values)
        assert np.all(true <= got.errors + ref.errors), (true, got.errors)


def test_fit_statistics_are_lstsq_s():
    """Noisy scan of a known form: side coefficients and covariance equal those of numpy.linalg.lstsq on an
    independently built design matrix (columns P_k(z/H) cos/sin(m phi), scipy.special.eval_legendre),
    the RMS finds the noise, the amplitudes lie within 4 standard uncertainties."""
    from scipy.special import eval_legendre

    R, H, eps, tau, noise = 0.02, 0.03, 2e-3, 1e-3, 5e-7
    pts = split_points(measured_cylinder_points(R, H, eps, tau, noise, np.random.default_rng(7)), "scan.csv")
    fit = fit_cylinder(pts, (2, 2))
    s = pts.side
    phi, zeta = np.arctan2(s[:, 1], s[:, 0]), s[:, 2] / pts.half_length
    cols, names = [], []
    for k in range(3):
        for m in range(3):
            for trig, tag in ((np.cos, 0), (np.sin, 1)):
                if m == 0 and tag == 1:
                    continue
                cols.append(trig(m * phi) * eval_legendre(k, zeta))
                names.append((m, tag, k))
    A = np.column_stack(cols)
    y = np.hypot(s[:, 0], s[:, 1])
    c, rss, *_ = np.linalg.lstsq(A, y, rcond=None)
    cov = rss[0] / (len(y) - A.shape[1]) * np.linalg.inv(A.T @ A)
    index = [(0 if m == 0 else 2 * m - 1 + tag) * 3 + k for m, tag, k in names]     # the module's m-major order
    assert np.allclose(fit.coefficients[index], c, rtol=0, atol=1e-15)
    assert np.allclose(np.diag(fit.covariance)[index], np.diag(cov), rtol=1e-9)
    assert fit.rms[0] == pytest.approx(noise, rel=0.1)
    assert abs(fit.coefficient("side", 0)[0] - R) < 4 * fit.coefficient("side", 0)[1]
    assert abs(fit.coefficient("side", 1)[0] - tau * pts.half_length) < 4 * fit.coefficient("side", 1)[1]
    assert abs(fit.coefficient("side", 9)[0] - eps * R) < 4 * fit.coefficient("side", 9)[1]
    assert abs(fit.coefficient("top", 0)[0] - H) < 4 * fit.coefficient("top", 0)[1]


def test_volume_uncertainty_is_the_linear_propagation():
    """The fitted volume's uncertainty: grad^T C grad with dV/dc from the rebuilt polyhedra (central
    differences of trimesh volumes, an independent route to the module's quadrature) agrees within 1 %."""
    import trimesh

    pts = split_points(measured_cylinder_points(0.02, 0.03, 2e-3, 1e-3, 5e-7, np.random.default_rng(3)), "scan.csv")
    fit = fit_cylinder(pts, (2, 1))
    h = 1e-7
    grad = []
    for i in range(len(fit.coefficients)):
        dc = np.zeros(len(fit.coefficients))
        dc[i] = h
        vol = [trimesh.Trimesh(*_raw(fit, fit.coefficients + s * dc), process=False).volume for s in (1, -1)]
        grad.append((vol[0] - vol[1]) / (2 * h))
    grad = np.array(grad)
    assert fit.volume()[1] == pytest.approx(math.sqrt(grad @ fit.covariance @ grad), rel=0.01)


def _raw(fit, c):
    from dataclasses import replace

    return cylinder_polyhedron(replace(fit, coefficients=c), tuple(2 * n for n in FINE))[:2]


def _scene(csv, extra=""):
    return f"""[units]
length = "mm"
[[body]]
name = "cyl"
group = "pendulum"
shape = "mesh"
file = "{csv}"
form = "cylinder"
{extra}
density = 8000
at = [40, 0, 0]
[[body]]
name = "ball"
group = "attractor"
shape = "sphere"
radius = 15
density = 11340
at = [80, 20, 0]
[[position]]
name = "A"
group = "attractor"
turn = 20
"""


def test_bias_measured_cylinder_against_the_layer_torque(tmp_path):
    """bias --measured-form of an oval cylinder (eps = 2e-3, noiseless points): the torque change equals the
    first-order layer's torque (scipy cubature of the layer's force density on the ball's point mass at its
    centre, the ball being a sphere: its field outside is a point's, shell theorem) within 2 %."""
    import json

    from scipy.integrate import cubature

    R, H, eps, rho = 0.012, 0.015, 2e-3, 8000.0
    pts = measured_cylinder_points(R, H, eps, 0.0, 0.0, np.random.default_rng(1), n_phi=40, n_z=9)
    np.savetxt(tmp_path / "c.csv", pts * 1e3, delimiter=",", header="x,y,z", comments="")
    (tmp_path / "s.toml").write_text(_scene("c.csv", "fit_degree = [2, 1]"))
    p = subprocess.run([sys.executable, "-m", "truepull", "bias", str(tmp_path / "s.toml"), "--no-table",
                        "--measured-form", "cyl", "--rtol", "1e-4", "--json"], capture_output=True, text=True)
    assert p.returncode == 0, p.stderr
    w = json.loads(p.stdout)["what_if"][0]   # rtol 1e-4: the check is to 2 %; 1e-6 is not reached, the
    # chord error of the 128-sided polyhedra (about 5e-7 of the torque) being larger (exit 3, honestly)
    change = w["torque_after"] - w["torque_before"]
    turn = math.radians(20)
    ball = np.array([80e-3 * math.cos(turn) - 20e-3 * math.sin(turn), 80e-3 * math.sin(turn) + 20e-3 * math.cos(turn), 0])
    M = 11340 * 4 / 3 * math.pi * 0.015**3
    c0 = np.array([0.04, 0.0, 0.0])

    def torque_z(x):                               # the layer's torque about the fiber (z through the origin)
        phi, z = x[:, 0], x[:, 1]
        X = c0 + np.stack([R * np.cos(phi), R * np.sin(phi), z], axis=1)
        d = ball - X
        F = (G * M * rho * R * R * eps * np.cos(2 * phi))[:, None] * d / np.linalg.norm(d, axis=1)[:, None] ** 3
        return (X[:, 0] * F[:, 1] - X[:, 1] * F[:, 0])[:, None]

    ref = cubature(torque_z, [0.0, -H], [2 * math.pi, H], rtol=1e-10).estimate[0]
    assert change == pytest.approx(ref, rel=0.02), (change, ref)


@pytest.mark.parametrize("extra, words", [
    ('form = "cone"', 'form: expected "sphere" or "cylinder"'),
    ("fit_degree = [2]", "fit_degree: expected a whole number or a pair"),
])
def test_bad_cylinder_keys_exit_2(tmp_path, extra, words):
    pts = measured_cylinder_points(0.012, 0.015, 0.0, 0.0, 0.0, np.random.default_rng(1), n_phi=24, n_z=5)
    np.savetxt(tmp_path / "c.csv", pts * 1e3, delimiter=",", header="x,y,z", comments="")
    text = _scene("c.csv", extra).replace('form = "cylinder"\n', "") if "form" in extra else _scene("c.csv", extra)
    (tmp_path / "s.toml").write_text(text)
    p = subprocess.run([sys.executable, "-m", "truepull", "check", str(tmp_path / "s.toml")], capture_output=True,
                       text=True)
    assert p.returncode == 2 and words in p.stderr and len(p.stderr.strip().splitlines()) == 1, p.stderr


def test_a_cylinder_without_end_face_points_is_refused(tmp_path):
    pts = measured_cylinder_points(0.012, 0.015, 0.0, 0.0, 0.0, np.random.default_rng(1), n_phi=24, n_z=5)
    side = pts[np.abs(pts[:, 2]) < 0.0149]
    np.savetxt(tmp_path / "c.csv", np.vstack([side, pts[pts[:, 2] > 0.0149]]) * 1e3, delimiter=",", header="x,y,z",
               comments="")
    with pytest.raises(InputError, match="found 0 on the bottom"):
        load_mesh(tmp_path / "c.csv", "mm", form="cylinder")
    np.savetxt(tmp_path / "d.csv", np.column_stack([np.full(10, 90.0), np.arange(10) * 36.0, np.full(10, 12.0)]),
               delimiter=",", header="theta,phi,r", comments="")
    with pytest.raises(InputError, match="read from x, y, z points"):
        load_mesh(tmp_path / "d.csv", "mm", form="cylinder")


def test_a_heated_measured_cylinder_keeps_its_fit_scaled(tmp_path):
    """At 30 degC with a stated expansion alpha, the measured body is the form as measured with every length
    times s = 1 + alpha (T - T_ref) (the similarity law of thermal expansion: dimensional analysis, lengths
    scale, shape kept): its vertices and its coarse shape's are s times the cold ones, its fit is kept (the
    `check` note says the scale), and its ideal cylinder has radius and length s times the cold ideal's."""
    from truepull.geometry.measured_form import measured_form_notes
    from truepull.geometry.scene import load_scene_text
    from truepull.integrate.balance.sensitivity import ideal_form

    pts = measured_cylinder_points(0.012, 0.015, 2e-3, 1e-3, 0.0, np.random.default_rng(1), n_phi=24, n_z=5)
    np.savetxt(tmp_path / "c.csv", pts * 1e3, delimiter=",", header="x,y,z", comments="")
    alpha = 1.65e-5
    cold_text = _scene("c.csv", f'fit_degree = [2, 1]\nexpansion = "{alpha} 1/K"').replace("at = [40, 0, 0]", "at = [0, 0, 0]")
    hot_text = '[conditions]\ntemperature = "30 degC"\n' + cold_text
    cold = load_scene_text(cold_text, "cold.toml", str(tmp_path))
    hot = load_scene_text(hot_text, "hot.toml", str(tmp_path))
    s = 1.0 + alpha * 10.0
    c, h = cold.body("cyl").shape, hot.body("cyl").shape
    assert h.form is not None and h.scale == pytest.approx(s, rel=1e-15) and c.scale == 1.0
    np.testing.assert_array_equal(h.form.fit.coefficients, c.form.fit.coefficients)
    np.testing.assert_allclose(h.vertices, s * c.vertices, rtol=1e-15)
    np.testing.assert_allclose(h.coarse.vertices, s * c.coarse.vertices, rtol=1e-15)
    assert "times the form as measured" in measured_form_notes(hot)[0] and "times the form" not in measured_form_notes(cold)[0]
    ideal_c, ideal_h = ideal_form(cold, "cyl")[0].shape, ideal_form(hot, "cyl")[0].shape
    assert ideal_h.radius == pytest.approx(s * ideal_c.radius, rel=1e-13)
    assert ideal_h.length == pytest.approx(s * ideal_c.length, rel=1e-12)


def test_field_at_points_carries_the_chord_error():
    """`field` on a tessellated part (the exact cylinder as measured: fine and coarse polyhedra): its stated
    errors bound the true error against the cylinder's on-axis closed form (discs stacked; Telford, Geldart
    and Sheriff, Applied Geophysics, 2nd ed., 1990, gravity chapter; from memory, equation number not
    checked: engine_references.cylinder_on_axis) and, off the axis, against the band field of the exact
    cylinder with its own bound; without the coarse shape's change they would not (the polyhedron's own
    rounding bounds say nothing of the chords)."""
    from engine_references import cylinder_on_axis
    from truepull.integrate.field_at_points import group_field_at_points

    R, H, rho = 0.02, 0.03, 8000.0
    fit = _fit(R, H)
    v, f = fit.polyhedron()
    vc, fc = fit.polyhedron(fine=False)
    tessellated = Body("m", "a", MeshShape(v, f, "", False, MeshShape(vc, fc)), Placement.identity(), rho)
    fine_only = Body("m", "a", MeshShape(v, f), Placement.identity(), rho)
    exact = Body("c", "a", Cylinder(R, 2 * H), Placement.identity(), rho)
    z = np.array([0.035, 0.05, 0.1])
    axis_pts = np.c_[np.zeros(3), np.zeros(3), z]
    got = group_field_at_points([tessellated], axis_pts, G)
    U_ref, gz_ref = cylinder_on_axis(R, 2 * H, rho, z, G)
    assert np.all(np.abs(got.U - U_ref) <= got.err_U)
    assert np.all(np.abs(got.g[:, 2] - gz_ref) <= got.err_g)
    side_pts = np.array([[0.025, 0.0, 0.0], [0.03, 0.01, 0.02], [0.0, 0.06, -0.04], [0.1, 0.1, 0.1]])
    got = group_field_at_points([tessellated], side_pts, G)
    ref = group_field_at_points([exact], side_pts, G)
    assert np.all(np.abs(got.U - ref.U) <= got.err_U + ref.err_U)
    assert np.all(np.linalg.norm(got.g - ref.g, axis=1) <= got.err_g + ref.err_g)
    assert np.all(np.linalg.norm(got.T - ref.T, axis=(1, 2)) <= got.err_T + ref.err_T)
    bare = group_field_at_points([fine_only], side_pts, G)
    assert np.any(np.abs(bare.U - ref.U) > bare.err_U + ref.err_U)
