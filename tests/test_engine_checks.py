"""Checks of the exact engine (patches, band field, pairs, group comparison) against outside references.

Each check names its reference. Relative tolerances are the engine's bar (1e-9) unless the reference
itself is less accurate.
"""

from __future__ import annotations

import numpy as np
import pytest
import trimesh
from scipy import integrate, special

from truepull.cli.main import main
from truepull.geometry.bodies import Body
from truepull.geometry.errors import InputError
from truepull.geometry.placement import Placement
from truepull.geometry.scene import load_scene_text
from truepull.geometry.shapes import Box, Cone, Cylinder, Ellipsoid, MeshShape, Sphere
from truepull.integrate.field_band import band_field
from truepull.integrate.gauss import gauss_unit
from truepull.integrate.interaction import compare_groups
from truepull.integrate.pairs import pair_interaction
from truepull.integrate.patches import cell_nodes, shape_patches

G = 6.674e-11
Z = np.array([0.0, 0.0, 1.0])
O = np.zeros(3)


def body(name, group, shape, at=(0, 0, 0), density=1e4, axis=None):
    return Body(name, group, shape, Placement.from_scene(list(at), axis), density)


@pytest.mark.parametrize("shape, volume", [
    (Cylinder(0.02, 0.05), np.pi * 0.02**2 * 0.05),                      # pi R^2 L
    (Cylinder(0.02, 0.05, 0.008), np.pi * (0.02**2 - 0.008**2) * 0.05),  # tube
    (Cone(0.02, 0.05, 0.0), np.pi * 0.02**2 * 0.05 / 3),                 # pi R^2 h / 3
    (Cone(0.02, 0.05, 0.01), np.pi * 0.05 * (0.02**2 + 0.02 * 0.01 + 0.01**2) / 3),  # frustum
    (Box((0.01, 0.02, 0.03)), 0.01 * 0.02 * 0.03),
    (Ellipsoid((0.01, 0.02, 0.03)), 4 / 3 * np.pi * 0.01 * 0.02 * 0.03),
])
def test_patches_enclose_the_closed_form_volume(shape, volume):
    # divergence theorem: V = (1/3) surface integral of x . n dA, and the surface integral of n dA = 0
    # (the solids' closed-form volumes, from memory)
    R = Placement.from_scene([0.1, -0.2, 0.3], [1, 1, 0.5], [0, 0, 1], 0.4)
    ps = shape_patches(shape, R.rotation, R.translation)
    X, W = cell_nodes(ps.kinds, ps.params, ps.cell_patch, ps.cell_dom, *gauss_unit(12))
    assert (X * W).sum() / 3 == pytest.approx(volume, rel=1e-12)
    assert np.abs(W.sum(axis=0)).max() < 1e-14 * volume ** (2 / 3)


def test_band_field_on_axis_of_a_cylinder():
    # on-axis field of a uniform cylinder (the disc closed form stacked;
    # Telford, Geldart and Sheriff, Applied Geophysics, 2nd ed., 1990, gravity chapter; from memory, equation number not checked):
    # g_z = -2 pi G rho [L - sqrt(R^2 + (z + L/2)^2) + sqrt(R^2 + (z - L/2)^2)] above the top face
    R, L, rho = 0.02, 0.05, 1e4
    ps = shape_patches(Cylinder(R, L), np.eye(3), O)
    z = np.array([0.0252, 0.03, 0.1])  # (farther out the closed form itself cancels)
    U, g, dU, dg, rU, rg = band_field(np.stack([0 * z, 0 * z, z], axis=1), ps, rho, G)
    ref = -2 * np.pi * G * rho * (L - np.sqrt(R**2 + (z + L / 2) ** 2) + np.sqrt(R**2 + (z - L / 2) ** 2))
    err = np.abs(g[:, 2] - ref)
    assert np.all(err <= 1e-12 * np.abs(ref))
    assert np.all(err <= np.linalg.norm(dg, axis=1) + rg + 4e-16 * np.abs(ref))  # estimate bounds error


def test_band_field_of_a_thin_tube_approaches_the_ring():
    # ring of mass M, radius a: U = -2 G M K(m) / (pi sqrt((rho + a)^2 + z^2)), m = 4 a rho / ((rho+a)^2+z^2)
    # (complete elliptic integral, scipy.special.ellipk; the ring
    # potential from memory)
    a, t, h, rho = 0.05, 1e-4, 1e-4, 1e4
    tube = Cylinder(a + t / 2, h, a - t / 2)
    M = rho * tube.volume()
    ps = shape_patches(tube, np.eye(3), O)
    p = np.array([[0.03, 0.0, 0.04]])
    U, *_ = band_field(p, ps, rho, G)
    r, z = 0.03, 0.04
    m = 4 * a * r / ((r + a) ** 2 + z**2)
    ref = -2 * G * M * special.ellipk(m) / (np.pi * np.sqrt((r + a) ** 2 + z**2))
    # the tube's finite cross-section shifts the value by about (t/d)^2 with d ~ 0.045 m
    assert U[0] == pytest.approx(ref, rel=2e-5)


def test_band_field_off_axis_against_scipy_volume_quadrature():
    # reference: scipy.integrate.tplquad of the Newton integrand over the cone's volume
    R, L, Rt, rho = 0.02, 0.04, 0.008, 1e4
    ps = shape_patches(Cone(R, L, Rt), np.eye(3), O)
    p = np.array([0.025, 0.004, 0.012])
    U, g, dU, dg, rU, rg = band_field(p[None, :], ps, rho, G)

    def integrand(r, phi, z):
        d = np.array([r * np.cos(phi), r * np.sin(phi), z]) - p
        return G * rho * r * d[0] / np.linalg.norm(d) ** 3

    gx, _ = integrate.tplquad(integrand, -L / 2, L / 2, 0, 2 * np.pi, 0,
                              lambda z, phi: R + (Rt - R) * (z + L / 2) / L, epsabs=0, epsrel=1e-11)
    assert g[0, 0] == pytest.approx(gx, rel=1e-9)


def test_sphere_pair_is_newton():
    # Newton's law and the shell theorem: F = G m M / d^2 along the line of centres
    a = body("a", "pendulum", Sphere(0.01), (0.05, 0, 0))
    b = body("b", "attractor", Sphere(0.02), (0.05, 0.04, 0))
    r = pair_interaction(a, b, O, Z, G)
    F = G * a.mass * b.mass / 0.04**2
    assert r.force[1] == pytest.approx(F, rel=1e-13)
    assert r.torque[2] == pytest.approx(0.05 * F, rel=1e-13)


def test_cylinder_feels_minus_the_sphere_pull_on_axis_at_a_1_percent_gap():
    # third law + on-axis closed form: the force on the cylinder is -m_sphere g_cyl(centre of sphere)
    R, L, rho = 0.02, 0.05, 1e4
    cyl = body("cyl", "pendulum", Cylinder(R, L), density=rho)
    z = L / 2 + 0.005 + 0.0004  # sphere radius 5 mm, gap 0.4 mm (1% of the cylinder's diameter)
    ball = body("ball", "attractor", Sphere(0.005), (0, 0, z), density=rho)
    r = pair_interaction(cyl, ball, O, Z, G, rtol=1e-10)
    gz = -2 * np.pi * G * rho * (L - np.sqrt(R**2 + (z + L / 2) ** 2) + np.sqrt(R**2 + (z - L / 2) ** 2))
    ref = -ball.mass * gz
    assert abs(r.force[2] - ref) <= 1e-9 * abs(ref)
    assert abs(r.force[2] - ref) <= r.errors[2] + 1e-15 * abs(ref)


def test_mesh_cube_equals_the_prism_box():
    # the polyhedron of a cube is the prism (closed forms of Werner-Scheeres and Nagy et al. agree)
    box = Box((0.02, 0.02, 0.02))
    m = trimesh.creation.box(extents=(0.02, 0.02, 0.02))
    cube = MeshShape(np.asarray(m.vertices), np.asarray(m.faces), "cube")
    cyl = body("cyl", "attractor", Cylinder(0.01, 0.03), (0.0, 0.0221, 0.004), axis=[1, 0, 0])
    a = pair_interaction(body("b", "pendulum", box, (0.0, 0.0, 0.0)), cyl, O, Z, G)
    b = pair_interaction(body("m", "pendulum", cube, (0.0, 0.0, 0.0)), cyl, O, Z, G)
    assert np.allclose(a.values, b.values, rtol=1e-9, atol=1e-9 * np.abs(a.values).max())


def test_infinite_slab_limit():
    # Bouguer slab: g = 2 pi G rho t above an infinite plate
    # (Telford, Geldart and Sheriff, Applied Geophysics, 2nd ed., 1990, gravity chapter; from memory, equation number not checked); a wide thin box approaches it
    t, W, rho = 0.001, 20.0, 1e4
    slab = body("slab", "attractor", Box((W, W, t)), density=rho)
    ball = body("ball", "pendulum", Sphere(0.001), (0, 0, 0.01), density=1.0)
    r = pair_interaction(ball, slab, O, Z, G)
    assert -r.force[2] / ball.mass == pytest.approx(2 * np.pi * G * rho * t, rel=3e-3)  # deficit ~ 0.9 z/W


SCENE = """
[units]
length = "mm"
angle = "deg"
[[body]]
name = "bob"
group = "pendulum"
shape = "cylinder"
radius = 6
length = 12
density = 18000
at = [50, 0, 0]
[[body]]
name = "mass"
group = "attractor"
shape = "box"
size = [30, 30, 40]
density = 11340
at = [60, 25, 5]
[[position]]
name = "plus"
group = "pendulum"
turn = 0.01
[[position]]
name = "minus"
group = "pendulum"
turn = -0.01
"""


def test_stiffness_is_minus_the_derivative_of_torque():
    # central difference of torque_axis in the pendulum's turn (definition of the stiffness);
    # the difference's own truncation error is ~ h^2 tau''' / 6 with h = 1.7e-4 rad
    sc = load_scene_text(SCENE)
    c0 = compare_groups(sc)
    cp = compare_groups(sc, position="plus")
    cm = compare_groups(sc, position="minus")
    h = np.radians(0.01)
    k_fd = -(cp.exact.torque_axis - cm.exact.torque_axis) / (2 * h)
    assert c0.exact.stiffness_axis == pytest.approx(k_fd, rel=1e-6)


def test_four_sphere_balance_far_mass_correction():
    # massless-beam balance: the far attractor reduces the torque by the factor (1 - beta),
    # beta = b^3 / (b^2 + 4 d^2)^(3/2) (common practice in teaching-lab manuals; from memory),
    # for spheres at +-d along x and attractors at distance b beside each, on opposite sides
    d, b = 0.05, 0.045
    text = f"""
[[body]]
name = "e"
group = "pendulum"
shape = "sphere"
radius = 0.005
density = 11340
at = [{d}, 0, 0]
[[body]]
name = "w"
group = "pendulum"
shape = "sphere"
radius = 0.005
density = 11340
at = [{-d}, 0, 0]
[[body]]
name = "E"
group = "attractor"
shape = "sphere"
radius = 0.03
density = 11340
at = [{d}, {b}, 0]
[[body]]
name = "W"
group = "attractor"
shape = "sphere"
radius = 0.03
density = 11340
at = [{-d}, {-b}, 0]
"""
    sc = load_scene_text(text)
    c = compare_groups(sc)
    m, M = sc.body("e").mass, sc.body("E").mass
    near = 2 * d * G * m * M / b**2  # two near pairs, lever d each
    beta = b**3 / (b**2 + 4 * d**2) ** 1.5
    assert c.exact.torque_axis == pytest.approx(near * (1 - beta), rel=1e-12)


def test_overlapping_groups_are_refused(tmp_path, capsys):
    text = SCENE.replace("at = [60, 25, 5]", "at = [60, 10, 5]")
    with pytest.raises(InputError, match="overlap"):
        compare_groups(load_scene_text(text))
    f = tmp_path / "overlap.toml"
    f.write_text(text)
    assert main(["compare", str(f)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "bob" in err[0] and "mass" in err[0]


def test_compare_json_has_the_contract_shape(tmp_path, capsys):
    import json

    f = tmp_path / "s.toml"
    f.write_text(SCENE)
    assert main(["compare", str(f), "--json", "--rtol", "1e-8"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert [r["position"] for r in out["results"]] == ["plus", "minus"]
    r = out["results"][0]
    for key in ("position", "test", "source", "G", "exact", "point", "correction", "error", "pairs"):
        assert key in r
    for key in ("force", "torque", "torque_axis", "stiffness_axis", "energy"):
        assert key in r["exact"] and key in r["point"]
    assert set(r["error"]) >= {"force", "torque_axis", "stiffness_axis"}
    assert r["pairs"][0]["test"] == "bob" and r["pairs"][0]["source"] == "mass" and r["pairs"][0]["method"]


@pytest.mark.parametrize("bore_length", [0.02, 0.012])  # through the block, and a blind bore from its top
def test_a_bored_block_pulls_like_the_block_less_its_bore(bore_length):
    # holes: a box with a cylindrical bore along its z axis (a `subtract` body), and a ball on that
    # axis 1% of the bore's diameter above the top face. References outside the engine: the box's
    # on-axis field (rectangular-plate solid angle integrated over the thickness by scipy quad,
    # engine_references.plate_on_axis) less the bore's (the cylinder's on-axis closed form); the ball
    # feels m g there (shell theorem), and the block minus that by Newton's third law.
    from engine_references import cylinder_on_axis, plate_on_axis

    hx, hy, t, rb = 0.015, 0.01, 0.02, 0.004
    rho = 7800.0
    zb = 0.5 * t - 0.5 * bore_length  # bore centre: its top flush with the block's top face
    zball = 0.5 * t + 0.01 * 2 * rb + 0.003
    text = f"""
[[body]]
name = "block"
group = "pendulum"
shape = "box"
size = [{2 * hx}, {2 * hy}, {t}]
density = {rho}
at = [0.03, 0, 0]
[[body]]
name = "bore"
group = "pendulum"
shape = "cylinder"
radius = {rb}
length = {bore_length}
density = {rho}
subtract = true
at = [0.03, 0, {zb}]
[[body]]
name = "ball"
group = "attractor"
shape = "sphere"
radius = 0.003
density = 11340
at = [0.03, 0, {zball}]
"""
    sc = load_scene_text(text)
    c = compare_groups(sc, rtol=1e-10)
    m = sc.body("ball").mass
    gz_box, e_box = plate_on_axis(hx, hy, t, rho, zball)
    _, gz_bore = cylinder_on_axis(rb, bore_length, rho, zball - zb)
    F_ref = -m * (gz_box - gz_bore)  # on the block, upward toward the ball
    Fz = c.exact.force[2]
    assert Fz == pytest.approx(F_ref, rel=1e-9)
    assert abs(Fz - F_ref) <= np.linalg.norm(c.error.force) + m * e_box
    # the bore matters far above 1e-9: without it the pull is larger by m g_bore
    assert abs(m * gz_bore) > 1e-3 * abs(F_ref)
    assert np.allclose(c.exact.force[:2], 0.0, atol=1e-9 * abs(F_ref))


def test_a_torque_that_vanishes_by_symmetry_is_judged_against_the_point_scale():
    # a box and a cylinder on the x axis, both symmetric under y -> -y: the torque about z vanishes
    # exactly (mirror symmetry). Its relative error means nothing; the comparison must reach its
    # tolerance with the torque's absolute error held to rtol * 1e-3 of |F| times the lever (the
    # floor the pair tolerances use), and the computed torque must be zero within its estimate.
    text = """
[units]
length = "mm"
[[body]]
name = "block"
group = "pendulum"
shape = "box"
size = [10, 10, 10]
density = 8000
at = [20, 0, 0]
[[body]]
name = "slug"
group = "attractor"
shape = "cylinder"
radius = 5
length = 10
density = 11340
at = [31, 0, 0]
"""
    sc = load_scene_text(text)
    rtol = 1e-9
    c = compare_groups(sc, rtol=rtol)
    assert c.reached
    F = np.linalg.norm(c.exact.force)
    lever = 0.031 + 0.005 * np.sqrt(2)  # farthest reach of either body from the axis (bounding spheres)
    assert abs(c.exact.torque_axis) <= c.error.torque_axis
    assert c.error.torque_axis <= rtol * 1e-3 * 2 * F * lever
