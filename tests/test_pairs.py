"""One test body against one source body: force, torque, stiffness and energy against outside references.

The bar is the engine's: relative error <= 1e-9 on force (|F|), torque (|torque|, or its axial part
where only that has a reference) and stiffness, at gaps down to 1% of the smaller body's smallest size,
and every error estimate must bound the true error (less the reference's own error). References
(tests/engine_references.py unless said):
- Newton's law and the shell theorem (spheres, shells, points), stiffness by mpmath's numerical
  derivative of Newton's torque;
- the on-axis closed form of a cylinder and its axial derivative, with T_xx = T_yy = -T_zz / 2 on the axis
  (axial symmetry and Laplace's equation), for a sphere on a cylinder's axis (force -m_sphere g(centre)
  on the cylinder by the third law);
- two parallel cylinders or tubes: the exact 2-D reduction (disc-overlap area and the segment-pair closed
  form) integrated by scipy cubature;
- cylinder-box and cone-box: the prism closed form integrated over the cylinder's or cone's VOLUME
  (numpy Gauss-Legendre along the axis, scipy cubature across);
- ellipsoid-mesh: the ellipsoid's Carlson exterior field and its gradient integrated over the mesh's
  volume in tetrahedra (numpy Gauss-Legendre, collapsed);
- the Bouguer plate 2 pi G rho t and the on-axis field of a rectangular plate (its solid angle);
- cubic symmetry: a cube has no quadrupole, so two cubes differ from two points by O((a/d)^4);
- Newton's third law and conservation of angular momentum (torques of an isolated pair cancel).
"""

from __future__ import annotations

import mpmath as mp
import numpy as np
import pytest
import trimesh
from engine_references import (G, Z, body, box_field_on_revolution, cylinder_axis_gradient, cylinder_on_axis,
                               ellipsoid_field_on_mesh, parallel_cylinders, plate_on_axis, relative)
from scipy.spatial.transform import Rotation

from truepull.geometry.overlaps import bodies_overlap
from truepull.geometry.placement import rotation_z_to
from truepull.geometry.shapes import Box, Cone, Cylinder, Ellipsoid, MeshShape, Point, Shell, Sphere
from truepull.integrate import pairs
from truepull.integrate.pairs import pair_interaction

BAR = 1e-9


def surface_of(test, source, pivot, axis, rtol=1e-9):
    """The pair with the TEST body's surface integrated in the source's field, whichever of the two the
    engine would pick as source (its preference order put the source's kind first for this call): the
    other of the two formulations, for third-law checks."""
    order = (source.shape.kind,) + tuple(k for k in pairs.SOURCE_PREFERENCE if k != source.shape.kind)
    with pytest.MonkeyPatch.context() as mp_:
        mp_.setattr(pairs, "SOURCE_PREFERENCE", order)
        pr = pair_interaction(test, source, pivot, axis, G, rtol)
    assert f"surface quadrature of {test.shape.kind} '{test.name}'" in pr.method
    return pr


def rot(*v):
    return Rotation.from_rotvec(v).as_matrix()


def errors_of(pr):
    """The estimates as (|F| error, |torque| error, torque error (3,), K error, E error)."""
    e = pr.errors
    return np.linalg.norm(e[0:3]), np.linalg.norm(e[3:6]), e[3:6], e[6], e[7]


def assert_force_torque(pr, F, tau, ref_err=(0.0, 0.0), bar=BAR):
    eF, eT, _, _, _ = errors_of(pr)
    dF = np.linalg.norm(pr.force - F)
    dT = np.linalg.norm(pr.torque - tau)
    assert dF <= bar * np.linalg.norm(F), dF / np.linalg.norm(F)
    assert dT <= bar * np.linalg.norm(tau), dT / np.linalg.norm(tau)
    assert dF <= eF + ref_err[0], (dF, eF)
    assert dT <= eT + ref_err[1], (dT, eT)


def assert_scalar(value, ref, estimate, ref_err=0.0, bar=BAR):
    d = abs(value - ref)
    assert d <= bar * abs(ref), d / abs(ref)
    assert d <= estimate + ref_err, (d, estimate)


def torque_axis_error(pr, axis):
    return float(pr.errors[3:6] @ np.abs(axis))


# ------------------------------------------------------------------------------------------
# point-like bodies: Newton and the shell theorem
# ------------------------------------------------------------------------------------------

def newton_reference(m, c_test, M, c_src, pivot, axis):
    """Force, torque, K, E on point m at c_test from point M at c_src (Newton), K = -d(torque . e)/d theta
    by mpmath's numerical derivative (30 digits) of the torque of the turned test point."""
    mp.mp.dps = 30
    c_test, c_src, pivot = (np.asarray(v, float) for v in (c_test, c_src, pivot))
    e = np.asarray(axis, float) / np.linalg.norm(axis)

    def torque_axis(theta):
        r = [mp.mpf(float(x)) for x in c_test - pivot]
        k = [mp.mpf(float(x)) for x in e]
        ct, st = mp.cos(theta), mp.sin(theta)
        kxr = [k[1] * r[2] - k[2] * r[1], k[2] * r[0] - k[0] * r[2], k[0] * r[1] - k[1] * r[0]]
        kr = sum(a * b for a, b in zip(k, r))
        rr = [r[i] * ct + kxr[i] * st + k[i] * kr * (1 - ct) for i in range(3)]  # Rodrigues
        d = [mp.mpf(float(c_src[i] - pivot[i])) - rr[i] for i in range(3)]
        n3 = mp.sqrt(sum(x * x for x in d)) ** 3
        F = [G * m * M * x / n3 for x in d]
        tau = [rr[1] * F[2] - rr[2] * F[1], rr[2] * F[0] - rr[0] * F[2], rr[0] * F[1] - rr[1] * F[0]]
        return sum(a * b for a, b in zip(k, tau))

    d = c_src - c_test
    n = np.linalg.norm(d)
    F = G * m * M * d / n**3
    tau = np.cross(c_test - pivot, F)
    K = -float(mp.diff(torque_axis, 0))
    return F, tau, K, -G * m * M / n


@pytest.mark.parametrize("test_shape, src_shape", [(Sphere(0.01), Sphere(0.03)), (Shell(0.02, 0.015), Sphere(0.01)),
                                                   (Sphere(0.012), Shell(0.03, 0.02)), (Point(), Shell(0.02, 0.01))])
def test_point_like_pairs_are_newton(test_shape, src_shape):
    # shell theorem: outside, each is a point of its mass at its centre; Newton's law for the rest
    a = body("a", test_shape, (0.05, 0.01, -0.02), density=8000.0)
    b = body("b", src_shape, (0.01, 0.07, 0.01), density=11340.0)
    if test_shape.kind == "point":
        a = a.__class__(a.name, a.group, a.shape, a.placement, 0.0, point_mass=0.3)
    pivot, axis = np.array([0.002, -0.001, 0.003]), np.array([0.1, -0.2, 1.0])
    pr = pair_interaction(a, b, pivot, axis, G)
    F, tau, K, E = newton_reference(a.mass, a.com, b.mass, b.com, pivot, axis)
    assert_force_torque(pr, F, tau, bar=1e-13)
    assert_scalar(pr.stiffness_axis, K, pr.errors[6], 1e-20 * abs(K), bar=1e-12)
    assert_scalar(pr.energy, E, pr.errors[7], bar=1e-13)


def test_nothing_inside_a_shells_cavity_is_pulled():
    # shell theorem: the cavity of a uniform shell is field-free, and the shell feels nothing back
    shell = body("s", Shell(0.05, 0.04), density=8000.0)
    for inner in (body("b", Sphere(0.01), (0.01, 0.01, 0.0)), body("c", Cylinder(0.008, 0.02), (0.0, -0.01, 0.005))):
        for pr in (pair_interaction(shell, inner, np.zeros(3), Z, G), pair_interaction(inner, shell, np.zeros(3), Z, G)):
            assert np.abs(pr.values[:7]).max() <= 1e-12 * G * shell.mass * inner.mass / 0.04**2


# ------------------------------------------------------------------------------------------
# a sphere on a cylinder's axis: the on-axis closed form
# ------------------------------------------------------------------------------------------

@pytest.mark.parametrize("gap_fraction", [0.01, 0.1])
@pytest.mark.parametrize("sphere_is_test", [False, True])
def test_sphere_on_a_cylinders_axis(gap_fraction, sphere_is_test):
    # the sphere feels m g(centre) with g the cylinder's on-axis closed form (the disc closed form
    # stacked, Telford, Geldart and Sheriff, Applied Geophysics, 2nd ed., 1990, gravity chapter; from memory, equation number not checked); its stiffness about an off-axis pivot needs the field's gradient there: T_zz from the
    # closed form's derivative, T_xx = T_yy = -T_zz/2 (axial symmetry, Laplace); the cylinder feels the
    # opposite force and torque (third law) and the same stiffness and energy
    R, L, a = 0.02, 0.05, 0.006
    z = L / 2 + a + gap_fraction * 2 * a  # gap: a fraction of the sphere's diameter (the smaller body)
    Rc = rot(0.3, -0.4, 0.2)
    tc = np.array([0.04, -0.02, 0.01])
    cyl = body("cyl", Cylinder(R, L), tc, Rc, density=7800.0)
    ball = body("ball", Sphere(a), tc + z * Rc[:, 2], density=19300.0)
    pivot, axis = np.array([0.01, 0.03, -0.02]), np.array([0.2, 0.1, 1.0]) / np.linalg.norm([0.2, 0.1, 1.0])
    U, gz = cylinder_on_axis(R, L, cyl.density, z)
    Tzz = cylinder_axis_gradient(R, L, cyl.density, z)
    g = gz * Rc[:, 2]
    T = Rc @ np.diag([-Tzz / 2, -Tzz / 2, Tzz]) @ Rc.T
    m = ball.mass
    r = ball.com - pivot
    Fs = m * g
    taus = np.cross(r, Fs)
    exr = np.cross(axis, r)
    Ks = -m * (axis @ np.cross(exr, g) + axis @ np.cross(r, T @ exr))
    Es = m * U
    if sphere_is_test:
        pr = pair_interaction(ball, cyl, pivot, axis, G)
        F, tau = Fs, taus
    else:
        pr = pair_interaction(cyl, ball, pivot, axis, G)
        F, tau = -Fs, -taus
    ref_err = 1e-15 * np.linalg.norm(F) * (z / R) ** 2  # the closed form's rounding
    assert_force_torque(pr, F, tau, (ref_err, ref_err * np.linalg.norm(r)))
    assert_scalar(pr.stiffness_axis, Ks, pr.errors[6], 1e-14 * abs(Ks))
    assert_scalar(pr.energy, Es, pr.errors[7], 1e-15 * abs(Es))
    assert pr.reached


# ------------------------------------------------------------------------------------------
# two cylinders or tubes side by side: exact 2-D reduction
# ------------------------------------------------------------------------------------------

PARALLEL = {
    # (test radius, bore, length), (source radius, bore, length), gap as a fraction of the smaller
    # body's smallest size, height offset of the source
    "cylinders, 1% gap, level": ((0.02, 0.0, 0.05), (0.025, 0.0, 0.06), 0.01, 0.0),
    "cylinders, 1% gap, offset": ((0.012, 0.0, 0.02), (0.02, 0.0, 0.05), 0.01, 0.013),
    "cylinders, 0.1% gap, offset": ((0.02, 0.0, 0.05), (0.02, 0.0, 0.05), 0.001, 0.02),
    "tube and cylinder, 1% gap": ((0.02, 0.012, 0.05), (0.02, 0.0, 0.05), 0.01, 0.007),
    "tubes, 1% gap": ((0.02, 0.012, 0.04), (0.03, 0.015, 0.05), 0.01, -0.01),
}


def _parallel_pair(case):
    (a, ia, la), (b, ib, lb), gap_fraction, dz = PARALLEL[case]
    size = min(2 * a, la, 2 * b, lb)
    c1 = np.array([0.05, 0.01, 0.0])
    direction = np.array([0.6, 0.8, 0.0])
    c2 = c1 + direction * (a + b + gap_fraction * size) + np.array([0.0, 0.0, dz])
    A = body("A", Cylinder(a, la, ia), c1, rot(0, 0, 0.4), density=8000.0)
    B = body("B", Cylinder(b, lb, ib), c2, rot(0, 0, -1.1), density=11340.0)
    return A, B


@pytest.mark.parametrize("case", list(PARALLEL), ids=list(PARALLEL))
def test_parallel_cylinders_against_the_exact_two_dimensional_reduction(case):
    # reference: the exact reduction of two parallel cylinders to a 2-D integral (disc-overlap area,
    # MathWorld's circle-circle intersection, times the segment-pair closed form), by scipy cubature
    A, B = _parallel_pair(case)
    pivot = np.array([0.004, -0.003, 0.01])  # on a vertical axis: the reference's torque and stiffness
    for test, source in ((A, B), (B, A)):
        ref = parallel_cylinders(test, source, pivot)
        rel_ref = 1e-12  # the cubature's estimates (ref['relerr']) are below 1e-13
        assert np.all(ref["relerr"] < 1e-12)
        pr = pair_interaction(test, source, pivot, Z, G)
        eF = np.linalg.norm(pr.errors[0:3])
        dF = np.linalg.norm(pr.force - ref["F"])
        assert dF <= BAR * np.linalg.norm(ref["F"]) and dF <= eF + rel_ref * np.linalg.norm(ref["F"])
        assert_scalar(pr.torque[2], ref["torque_z"], pr.errors[5], rel_ref * abs(ref["torque_z"]))
        assert_scalar(pr.stiffness_axis, ref["K"], pr.errors[6], rel_ref * abs(ref["K"]))
        assert_scalar(pr.energy, ref["E"], pr.errors[7], rel_ref * abs(ref["E"]))
        assert pr.reached


@pytest.mark.parametrize("rtol", [1e-6, 1e-7])
def test_error_estimates_bound_the_error_at_looser_tolerances(rtol):
    # asked for less, the engine stops earlier, and what it says it reached must still hold
    # (reference: the 2-D reduction by scipy cubature, as above)
    for case in ("cylinders, 1% gap, offset", "tubes, 1% gap"):
        A, B = _parallel_pair(case)
        pivot = np.array([0.004, -0.003, 0.01])
        ref = parallel_cylinders(A, B, pivot)
        pr = pair_interaction(A, B, pivot, Z, G, rtol=rtol)
        assert np.linalg.norm(pr.force - ref["F"]) <= np.linalg.norm(pr.errors[0:3])
        assert abs(pr.torque[2] - ref["torque_z"]) <= pr.errors[5]
        assert abs(pr.stiffness_axis - ref["K"]) <= pr.errors[6]
        assert abs(pr.energy - ref["E"]) <= pr.errors[7]


def test_error_estimate_bounds_the_stiffness_error_at_1e_4_next_to_a_tiny_gap():
    # at a loose tolerance cells next to a 0.1% gap are kept early, before their rules converge; the
    # estimate must still bound the error there (cells reaching toward the source take the wider of
    # the two rule differences)
    A = body("A", Cylinder(0.02, 0.05, 0.012), (0.05, 0.01, 0.0), density=8000.0)
    B = body("B", Cylinder(0.02, 0.05, 0.015), (0.05 + 0.6 * 0.04004, 0.01 + 0.8 * 0.04004, 0.02), density=11340.0)
    ref = parallel_cylinders(A, B, np.zeros(3))
    for rtol in (1e-3, 1e-4, 1e-5):
        pr = pair_interaction(A, B, np.zeros(3), Z, G, rtol=rtol)
        assert abs(pr.stiffness_axis - ref["K"]) <= min(pr.errors[6], rtol * abs(ref["K"]))
        assert abs(pr.torque[2] - ref["torque_z"]) <= pr.errors[5]
        assert abs(pr.energy - ref["E"]) <= pr.errors[7]


# ------------------------------------------------------------------------------------------
# cylinder and cone beside a box: prism closed form integrated over their volume
# ------------------------------------------------------------------------------------------

HALF = np.array([0.03, 0.02, 0.015])
R_BOX, T_BOX = rot(0.1, 0.2, 0.3), np.array([0.01, -0.02, 0.005])


def _box():
    return body("box", Box(tuple(2 * HALF)), T_BOX, R_BOX, density=7800.0)


def _revolution_beside_box(kind):
    """A cylinder with a side generator, or a cone tilted so that one generator is, parallel to the box's
    +x face at 1% of the test body's smallest size; returns (test body, azimuth of that generator)."""
    if kind == "cylinder":
        a, L = 0.012, 0.02
        gap = 0.01 * min(2 * a, L)
        local = np.array([HALF[0] + a + gap, 0.003, 0.002])
        return body("cyl", Cylinder(a, L), R_BOX @ local + T_BOX, R_BOX, density=19000.0), 0.0
    R, Rt, L = 0.012, 0.004, 0.024
    gap = 0.01 * min(2 * Rt, L)
    Ry = rot(0, -np.arctan((R - Rt) / L), 0)  # the generator at azimuth pi turns parallel to the box's z
    p0 = Ry @ np.array([-R, 0, -L / 2])
    local = np.array([HALF[0] + gap - p0[0], 0.003, 0.0016])
    return body("cone", Cone(R, L, Rt), R_BOX @ local + T_BOX, R_BOX @ Ry, density=19000.0), np.pi


@pytest.mark.parametrize("kind", ["cylinder", "cone"])
def test_beside_a_box_against_the_prism_field_integrated_over_the_volume(kind):
    # reference: the prism closed form (Nagy, Papp and Benedek) and its gradient integrated over the
    # cylinder's or cone's volume by numpy Gauss-Legendre along the axis and scipy cubature across
    box = _box()
    test, phi_near = _revolution_beside_box(kind)
    assert bodies_overlap(test, box) is None
    pivot, axis = np.array([0.003, -0.004, 0.01]), np.array([0.0, 0.3, 1.0]) / np.linalg.norm([0.0, 0.3, 1.0])
    d = np.linalg.norm(test.com - box.com)
    sF = G * test.mass * box.mass / d**2
    scales = np.array([sF] * 3 + [sF * 0.1] * 4 + [sF * d])
    ref, err = box_field_on_revolution(test, box, pivot, axis, phi_near, 24, scales=scales)
    ref2, _ = box_field_on_revolution(test, box, pivot, axis, phi_near, 32, scales=scales)
    rule = np.abs(ref2 - ref)  # the axial Gauss rule's convergence
    ref_err = err + rule
    for pr in (pair_interaction(test, box, pivot, axis, G), ):
        assert_force_torque(pr, ref[0:3], ref[3:6], (np.linalg.norm(ref_err[0:3]), np.linalg.norm(ref_err[3:6])))
        assert_scalar(pr.stiffness_axis, ref[6], pr.errors[6], ref_err[6])
        assert_scalar(pr.energy, ref[7], pr.errors[7], ref_err[7])
    # the box's side of it by Newton's third law, from the other formulation: the box's surface in the
    # band field of the cylinder or cone
    back = surface_of(box, test, pivot, axis)
    assert_force_torque(back, -ref[0:3], -ref[3:6], (np.linalg.norm(ref_err[0:3]), np.linalg.norm(ref_err[3:6])))
    assert_scalar(back.stiffness_axis, ref[6], back.errors[6], ref_err[6])
    assert_scalar(back.energy, ref[7], back.errors[7], ref_err[7])


# ------------------------------------------------------------------------------------------
# an ellipsoid and a mesh: the Carlson field over the mesh's volume
# ------------------------------------------------------------------------------------------

def test_mesh_beside_an_ellipsoid_against_the_carlson_field_over_its_volume():
    # reference: the ellipsoid's exterior field (Carlson's symmetric integrals; the project's kernel,
    # itself checked against scipy volume quadrature in test_field_ellipsoid.py) and its gradient
    # (scipy.special.elliprd), integrated over the mesh's VOLUME in tetrahedra by collapsed
    # Gauss-Legendre: an independent check of the surface formulation, not of the field
    radii = np.array([0.03, 0.02, 0.015])
    Re, te = rot(0.2, -0.1, 0.4), np.array([0.005, 0.002, -0.003])
    ell = body("ell", Ellipsoid(tuple(radii)), te, Re, density=8900.0)
    part = trimesh.creation.cylinder(radius=0.01, height=0.012, sections=20)
    verts = np.asarray(part.vertices) + np.array([0.0, 0.0, 0.006])  # bottom cap centre at the origin
    mesh = MeshShape(verts, np.asarray(part.faces), "part")
    # the flat cap parallel to the ellipsoid's tangent plane at q, 1% of the mesh's smallest size off it:
    # both convex, so that is their distance
    th, ph = 1.1, 0.7
    q = radii * np.array([np.sin(th) * np.cos(ph), np.sin(th) * np.sin(ph), np.cos(th)])
    n = q / radii**2
    n /= np.linalg.norm(n)
    gap = 0.01 * 0.012
    m = body("mesh", mesh, te + Re @ (q + gap * n), Re @ rotation_z_to(n) @ rot(0, 0, 0.3), density=2700.0)
    assert bodies_overlap(m, ell) is None
    pivot, axis = np.array([0.01, 0.02, 0.0]), np.array([0.3, 0.0, 1.0]) / np.linalg.norm([0.3, 0.0, 1.0])
    ref = ellipsoid_field_on_mesh(m, ell, pivot, axis, 10)
    ref_err = np.abs(ellipsoid_field_on_mesh(m, ell, pivot, axis, 13) - ref) + 1e-14 * np.abs(ref)
    # the mesh's surface in the ellipsoid's field (the engine's choice), and the ellipsoid's surface in the
    # mesh's polyhedron field (the other formulation; third law)
    for pr, sign in ((pair_interaction(m, ell, pivot, axis, G), 1.0), (surface_of(ell, m, pivot, axis), -1.0)):
        assert_force_torque(pr, sign * ref[0:3], sign * ref[3:6],
                            (np.linalg.norm(ref_err[0:3]), np.linalg.norm(ref_err[3:6])))
        assert_scalar(pr.stiffness_axis, ref[6], pr.errors[6], ref_err[6])
        assert_scalar(pr.energy, ref[7], pr.errors[7], ref_err[7])


# ------------------------------------------------------------------------------------------
# slabs and cubes
# ------------------------------------------------------------------------------------------

def test_a_wide_thin_box_approaches_the_infinite_slab():
    # Bouguer plate: g = 2 pi G rho t above an infinite slab (Telford, Geldart and Sheriff, Applied Geophysics, 2nd ed., 1990, gravity chapter; from memory, equation number not checked); a finite square plate pulls
    # with 4 G sigma atan(w^2 / (d sqrt(2 w^2 + d^2))) on its axis (solid angle of a rectangle), here
    # integrated over the thickness by scipy quad. For w >> d, atan(x) = pi/2 - 1/x + O(x^-3) with
    # 1/x = sqrt(2) d / w, so the deficit from the slab is (2 sqrt 2 / pi) d / w to first order (d the
    # mean height over the plate, here z)
    t, rho, z = 0.002, 11340.0, 0.004
    ball = body("ball", Sphere(0.002), (0.0, 0.0, z), density=19300.0)
    deficits = []
    for w in (0.25, 0.5, 1.0):  # half-widths in m
        slab = body("slab", Box((2 * w, 2 * w, t)), density=rho)
        pr = pair_interaction(ball, slab, np.zeros(3), Z, G)
        gz, e = plate_on_axis(w, w, t, rho, z)
        assert_scalar(pr.force[2], ball.mass * gz, pr.errors[2], ball.mass * e, bar=1e-11)
        deficits.append(1 - (-pr.force[2] / ball.mass) / (2 * np.pi * G * rho * t))
    deficits = np.array(deficits)
    first_order = 2 * np.sqrt(2) / np.pi * z / np.array([0.25, 0.5, 1.0])
    assert np.allclose(deficits, first_order, rtol=0.03)
    assert np.allclose(deficits[:-1] / deficits[1:], 2.0, rtol=0.01)  # falls like d / w
    # an extended test body above the slab feels the same uniform field: F = 2 pi G rho t m, less the
    # same O(d / w) deficit (a cylinder, integrated over its surface in the prism field)
    cyl = body("cyl", Cylinder(0.003, 0.004), (0.0, 0.0, z), density=19300.0)
    pr = pair_interaction(cyl, body("slab", Box((2.0, 2.0, t)), density=rho), np.zeros(3), Z, G)
    assert -pr.force[2] / cyl.mass == pytest.approx(2 * np.pi * G * rho * t, rel=2 * deficits[-1])


def _cube_mesh(edge):
    m = trimesh.creation.box(extents=(edge, edge, edge))
    return MeshShape(np.asarray(m.vertices), np.asarray(m.faces), "cube")


def test_a_mesh_cube_is_the_prism():
    # the homogeneous polyhedron of a cube is the rectangular prism (the Werner-Scheeres and the
    # Nagy-Papp-Benedek closed forms are independent): as test body in a cylinder's and an ellipsoid's
    # field, and as source for a cylinder, 1% of the cube's edge from the other body
    e = 0.02
    placement = (np.array([0.01, 0.002, -0.003]), rot(0.2, 0.4, -0.3))
    box = body("box", Box((e, e, e)), *placement, density=2700.0)
    cube = body("cube", _cube_mesh(e), *placement, density=2700.0)
    corner = box.placement.apply(np.array([e / 2, e / 2, e / 2]))
    cyl = body("cyl", Cylinder(0.01, 0.03), corner + np.array([0.0103, 0.0, 0.0]) + np.array([0, 0, 0.0]),
               density=11340.0)
    assert bodies_overlap(cyl, box) is None
    ell = body("ell", Ellipsoid((0.02, 0.015, 0.01)), box.com + np.array([0.0, 0.0, -(e * 0.87 + 0.01 + 0.0002)]),
               density=8900.0)
    assert bodies_overlap(ell, box) is None
    pivot, axis = np.array([0.0, 0.05, 0.0]), Z
    # as source: the cylinder's surface in the polyhedron field and in the prism field
    a = pair_interaction(cyl, box, pivot, axis, G)
    b = pair_interaction(cyl, cube, pivot, axis, G)
    assert "polyhedron" in b.method and "prism" in a.method
    # as test body: twelve triangles against six parallelograms in the cylinder's and the ellipsoid's field
    pairs_ = [(a, b), (surface_of(box, cyl, pivot, axis), surface_of(cube, cyl, pivot, axis)),
              (pair_interaction(box, ell, pivot, axis, G), pair_interaction(cube, ell, pivot, axis, G))]
    for a, b in pairs_:
        assert relative(b.force, a.force) <= BAR and relative(b.torque, a.torque) <= BAR
        assert b.stiffness_axis == pytest.approx(a.stiffness_axis, rel=BAR)
        assert b.energy == pytest.approx(a.energy, rel=BAR)


@pytest.mark.parametrize("direction, turn", [((1.0, 0.0, 0.0), (0.0, 0.0, 0.0)), ((1.0, 1.0, 1.0), (0.3, -0.2, 0.5))])
def test_two_cubes_far_apart_have_no_quadrupole_correction(direction, turn):
    # cubic symmetry: a uniform cube's quadrupole moment vanishes, so its field is a point's up to the
    # hexadecapole, and two cubes pull like two points up to O((a/d)^4): doubling d divides the
    # difference by 16 (a quadrupole would show as 4)
    e = 0.02
    u = np.asarray(direction, float) / np.linalg.norm(direction)
    diffs = []
    for d in (4 * e, 8 * e, 16 * e):
        a = body("a", Box((e, e, e)), (0.0, 0.0, 0.0), rot(*turn), density=8000.0)
        b = body("b", Box((e, e, e)), d * u, rot(0.1, 0.0, 0.2), density=8000.0)
        pr = pair_interaction(a, b, np.zeros(3), Z, G, rtol=1e-12)
        F = G * a.mass * b.mass / d**2 * u
        diffs.append(relative(pr.force, F))
        assert np.linalg.norm(pr.errors[0:3]) < 1e-3 * diffs[-1] * np.linalg.norm(F)
    diffs = np.array(diffs)
    assert diffs[0] < 1e-2
    ratios = diffs[:-1] / diffs[1:]
    assert np.all((ratios > 13.0) & (ratios < 19.0)), ratios


# ------------------------------------------------------------------------------------------
# Newton's third law and the balance of torques
# ------------------------------------------------------------------------------------------

def _third_law_pairs():
    rng_rot = [rot(0.3, -0.2, 0.5), rot(-0.4, 0.1, 0.2), rot(0.2, 0.6, -0.1)]
    cone = body("cone", Cone(0.015, 0.03, 0.005), (0.0, 0.0, 0.0), rng_rot[0], 8000.0)
    cyl = body("cyl", Cylinder(0.01, 0.04), (0.04, 0.0, 0.01), rng_rot[1], 11340.0)
    tube = body("tube", Cylinder(0.02, 0.03, 0.01), (0.0, 0.0, 0.0), rng_rot[2], 8000.0)
    ell = body("ell", Ellipsoid((0.015, 0.01, 0.008)), (0.0, 0.045, 0.0), rng_rot[0], 2700.0)
    box = body("box", Box((0.02, 0.03, 0.01)), (0.0, 0.0, 0.03), rng_rot[1], 7800.0)
    box2 = body("box2", Box((0.01, 0.01, 0.04)), (0.028, 0.01, 0.0), rng_rot[2], 7800.0)
    ico = trimesh.creation.icosphere(2, 0.012)
    mesh = body("mesh", MeshShape(np.asarray(ico.vertices), np.asarray(ico.faces)), (-0.04, 0.01, 0.0), None, 2700.0)
    return {"cone-cylinder": (cone, cyl), "tube-ellipsoid": (tube, ell), "cone-box": (cone, box),
            "box-box": (box2, box), "mesh-cone": (mesh, cone), "mesh-ellipsoid": (mesh, ell)}


THIRD = _third_law_pairs()


@pytest.mark.parametrize("case", list(THIRD), ids=list(THIRD))
def test_newtons_third_law_and_torque_balance(case):
    # an isolated pair: F_AB = -F_BA and torques about any one point cancel (angular momentum); the
    # energy is shared, and turning A by theta is turning B by -theta, so their stiffnesses agree. Each
    # side is computed with its own surface in the other's field, two independent formulations.
    A, B = THIRD[case]
    assert bodies_overlap(A, B) is None
    pivot, axis = np.array([0.01, -0.02, 0.005]), np.array([0.3, 0.2, 1.0]) / np.linalg.norm([0.3, 0.2, 1.0])
    ab = surface_of(A, B, pivot, axis)
    ba = surface_of(B, A, pivot, axis)
    eF = np.linalg.norm(ab.errors[0:3]) + np.linalg.norm(ba.errors[0:3])
    eT = np.linalg.norm(ab.errors[3:6]) + np.linalg.norm(ba.errors[3:6])
    assert np.linalg.norm(ab.force + ba.force) <= min(eF, BAR * np.linalg.norm(ab.force))
    assert np.linalg.norm(ab.torque + ba.torque) <= min(eT, BAR * np.linalg.norm(ab.torque))
    assert abs(ab.stiffness_axis - ba.stiffness_axis) <= min(ab.errors[6] + ba.errors[6], BAR * abs(ab.stiffness_axis))
    assert abs(ab.energy - ba.energy) <= min(ab.errors[7] + ba.errors[7], BAR * abs(ab.energy))
    assert ab.reached and ba.reached
    # the engine's own choice is one of the two, with the signs of the test body
    eng = pair_interaction(A, B, pivot, axis, G)
    assert np.allclose(eng.values, ab.values, rtol=0, atol=0) or np.allclose(
        eng.values, np.concatenate([ba.values[0:6] * -1, ba.values[6:]]), rtol=0, atol=0)
