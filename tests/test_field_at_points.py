"""integrate/field_at_points.py: U, g and the gradient tensor of a group at points, with error bounds.

Outside references (each check names its own): Newton's law and the shell theorem (sphere, point),
the prism by scipy.integrate.tplquad of the defining volume integral, the cylinder's on-axis closed
form (tests/engine_references.py), the ellipsoid's exterior gradient (engine_references), Poisson's
equation (trace of the gradient: 0 outside, -4 pi G rho inside), and the ring's on-axis field.
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.integrate import tplquad

from engine_references import G, body, cylinder_axis_gradient, cylinder_on_axis, ellipsoid_gradient
from truepull.geometry.errors import InputError
from truepull.geometry.placement import Placement
from truepull.geometry.shapes import Box, Cone, Cylinder, Ellipsoid, MeshShape, Point, Sphere
from truepull.integrate.field_at_points import group_field_at_points

RHO = 8000.0


def _point_body(name, at, mass):
    from truepull.geometry.bodies import Body

    return Body(name, "g", Point(), Placement(np.eye(3), np.asarray(at, float)), 0.0, point_mass=mass)


def test_sphere_inside_and_outside_newton():
    # Newton / shell theorem: outside g = -G M r/r^3, U = -G M / r; inside g = -G M r / R^3,
    # U = -G M (3 R^2 - r^2) / (2 R^3) (the uniform ball's potential by
    # Gauss's law, from memory)
    R = 0.02
    b = body("s", Sphere(R), density=RHO)
    M = b.mass
    pts = np.array([[0.005, 0.002, -0.003], [0.0, 0.0, 0.05], [0.03, -0.04, 0.01]])
    pf = group_field_at_points([b], pts, G)
    r = np.linalg.norm(pts, axis=1)
    inside = r < R
    U_ref = np.where(inside, -G * M * (3 * R * R - r * r) / (2 * R ** 3), -G * M / r)
    g_ref = np.where(inside[:, None], -G * M * pts / R ** 3, -G * M * pts / r[:, None] ** 3)
    assert np.all(np.abs(pf.U - U_ref) <= pf.err_U)
    assert np.all(np.linalg.norm(pf.g - g_ref, axis=1) <= pf.err_g)
    # gradient: inside -4/3 pi G rho I; outside the point tensor G M (3 r r^T - r^2 I) / r^5
    T_in = -4.0 / 3.0 * np.pi * G * RHO * np.eye(3)
    p = pts[2]
    T_out = G * M * (3 * np.outer(p, p) - p @ p * np.eye(3)) / np.linalg.norm(p) ** 5
    assert np.linalg.norm(pf.T[0] - T_in) <= pf.err_T[0]
    assert np.linalg.norm(pf.T[2] - T_out) <= pf.err_T[2]


def test_prism_against_tplquad():
    # Nagy et al. 2000 closed form against scipy.integrate.tplquad of U = -G rho int dV/|x - x'| and of
    # g = -G rho int (x - x')/|x - x'|^3 dV, at a point outside near the prism
    h = np.array([0.01, 0.015, 0.02])
    b = body("b", Box(tuple(2 * h)), density=RHO)
    p = np.array([0.018, 0.007, 0.026])
    pf = group_field_at_points([b], p, G)

    def integral(f):
        v, e = tplquad(lambda z, y, x: f(x, y, z), -h[0], h[0], -h[1], h[1], -h[2], h[2],
                       epsabs=0.0, epsrel=1e-11)
        return v, e

    def inv_r(x, y, z):
        return 1.0 / np.sqrt((p[0] - x) ** 2 + (p[1] - y) ** 2 + (p[2] - z) ** 2)

    U, eU = integral(inv_r)
    U_ref = -G * RHO * U
    gz, egz = integral(lambda x, y, z: (p[2] - z) * inv_r(x, y, z) ** 3)
    gz_ref = -G * RHO * gz
    assert abs(pf.U[0] - U_ref) <= pf.err_U[0] + G * RHO * eU
    assert abs(pf.g[0, 2] - gz_ref) <= pf.err_g[0] + G * RHO * egz
    assert abs(pf.g[0, 2] - gz_ref) < 1e-9 * abs(gz_ref)


def test_cylinder_on_axis_closed_form_and_error_bound():
    # on-axis field of a uniform cylinder: discs stacked (Telford, Geldart and Sheriff, Applied Geophysics, 2nd ed., 1990, gravity chapter; from memory, equation number not checked;
    # engine_references.cylinder_on_axis), and its z-derivative for T_zz;
    # Laplace with axial symmetry gives T_xx = T_yy = -T_zz / 2
    R, L = 0.02, 0.05
    b = body("c", Cylinder(R, L), density=RHO)
    z = np.array([0.026, 0.03, 0.05, 0.2])
    pf = group_field_at_points([b], np.c_[np.zeros(4), np.zeros(4), z], G)
    U_ref, gz_ref = cylinder_on_axis(R, L, RHO, z)
    Tzz = cylinder_axis_gradient(R, L, RHO, z)
    T_ref = np.zeros((4, 3, 3))
    T_ref[:, 2, 2] = Tzz
    T_ref[:, 0, 0] = T_ref[:, 1, 1] = -Tzz / 2
    assert np.all(np.abs(pf.U - U_ref) <= pf.err_U)
    assert np.all(np.abs(pf.g[:, 2] - gz_ref) <= pf.err_g)
    assert np.all(np.linalg.norm(pf.T - T_ref, axis=(1, 2)) <= pf.err_T)
    # and the estimates are useful: well below the value
    assert np.all(pf.err_T < 1e-6 * np.abs(Tzz))


def test_cylinder_inside_on_axis():
    # inside, the stacked-disc form is g_z = -2 pi G rho (|z+h| - |z-h| - sqrt(R^2+(z+h)^2)
    # + sqrt(R^2+(z-h)^2)) (the same disc integral, from memory), and Poisson: trace = -4 pi G rho
    R, L = 0.02, 0.05
    h = L / 2
    b = body("c", Cylinder(R, L), density=RHO)
    z = np.array([-0.01, 0.004, 0.02])
    pf = group_field_at_points([b], np.c_[np.zeros(3), np.zeros(3), z], G)
    gz = -2 * np.pi * G * RHO * (np.abs(z + h) - np.abs(z - h) - np.sqrt(R * R + (z + h) ** 2)
                                 + np.sqrt(R * R + (z - h) ** 2))
    assert np.all(np.abs(pf.g[:, 2] - gz) <= pf.err_g)
    trace = np.trace(pf.T, axis1=1, axis2=2)
    assert np.all(np.abs(trace + 4 * np.pi * G * RHO) <= np.sqrt(3) * pf.err_T)


def _cube_mesh(half):
    import trimesh

    m = trimesh.creation.box(extents=[2 * half] * 3)
    return MeshShape(np.asarray(m.vertices, float), np.asarray(m.faces))


@pytest.mark.parametrize("shape", [Box((0.02, 0.03, 0.01)), Cylinder(0.015, 0.03, 0.005), Cone(0.02, 0.03, 0.008),
                                   Ellipsoid((0.02, 0.012, 0.01)), Sphere(0.015), "mesh"],
                         ids=["box", "tube", "frustum", "ellipsoid", "sphere", "mesh"])
def test_poisson_trace(shape):
    # Poisson's equation: div g = -4 pi G rho inside, 0 outside (potential theory)
    if shape == "mesh":
        shape = _cube_mesh(0.012)
    Rz = Placement.from_scene([0, 0, 0], [0.3, -0.2, 1.0], None, 0.0).rotation
    b = body("x", shape, at=(0.01, -0.02, 0.005), rotation=Rz, density=RHO)
    rng = np.random.default_rng(3)
    pts = b.placement.apply(rng.uniform(-0.025, 0.025, (150, 3)))
    from truepull.geometry.distance import signed_distance

    sd = signed_distance(b.shape, b.to_local(pts))
    pts = pts[np.abs(sd) > 1e-3]
    inside = b.contains_world(pts)
    assert inside.any() and (~inside).any()
    pf = group_field_at_points([b], pts, G)
    trace = np.trace(pf.T, axis1=1, axis2=2)
    expected = np.where(inside, -4 * np.pi * G * RHO, 0.0)
    assert np.all(np.abs(trace - expected) <= np.sqrt(3) * pf.err_T)
    assert np.all(pf.err_T < 1e-6 * 4 * np.pi * G * RHO)


def test_ellipsoid_gradient_against_closed_form():
    # exterior gradient of a homogeneous ellipsoid differentiated from the classical form
    # (engine_references.ellipsoid_gradient, Carlson integrals); bounds the differenced estimate
    radii = (0.02, 0.012, 0.01)
    b = body("e", Ellipsoid(radii), density=RHO)
    pts = np.array([[0.03, 0.0, 0.0], [0.01, 0.02, 0.01], [0.0, 0.0, 0.08]])
    pf = group_field_at_points([b], pts, G)
    T_ref = ellipsoid_gradient(pts, radii, RHO)
    err = np.linalg.norm(pf.T - T_ref, axis=(1, 2))
    assert np.all(err <= pf.err_T)


def test_closed_gradient_against_central_differences():
    # the closed-form tensors of box and mesh against a 4th-order central difference of their field
    # (an independent check of T = dg/dx; the difference's own error ~ h^4 is far below the tolerance)
    for shape in (Box((0.02, 0.03, 0.01)), _cube_mesh(0.01)):
        b = body("x", shape, density=RHO)
        p = np.array([0.025, 0.01, -0.012])
        h = 1e-4
        T = np.zeros((3, 3))
        for j in range(3):
            e = np.zeros(3)
            e[j] = h
            gs = [group_field_at_points([b], p + k * e, G, gradient=False).g[0] for k in (-2, -1, 1, 2)]
            T[:, j] = (gs[0] - 8 * gs[1] + 8 * gs[2] - gs[3]) / (12 * h)
        pf = group_field_at_points([b], p, G)
        assert np.linalg.norm(pf.T[0] - T) < 1e-7 * np.linalg.norm(T)


def test_gradient_zero_of_a_ring_on_its_axis():
    # on the axis of a ring (mass M, radius a) g_z = -G M z / (z^2 + a^2)^(3/2) (the ring's on-axis field,
    # from memory); d g_z / dz = -G M (a^2 - 2 z^2) / (z^2 + a^2)^(5/2) vanishes at z = a / sqrt(2),
    # where d^2 g_z / dz^2 = 4 G M z / (z^2 + a^2)^(5/2). Four equal point masses on the circle give
    # exactly the ring's on-axis field (each contributes the same axial component).
    from truepull.integrate.field_at_points import gradient_zeros

    a, M = 0.03, 2.0
    bodies = [_point_body(f"p{k}", [a * np.cos(k * np.pi / 2), a * np.sin(k * np.pi / 2), 0.0], M / 4)
              for k in range(4)]
    start, end = np.array([0.0, 0.0, 0.001]), np.array([0.0, 0.0, 0.06])
    s = np.linspace(0.0, np.linalg.norm(end - start), 30)
    pf = group_field_at_points(bodies, start + s[:, None] * np.array([0, 0, 1.0]), G)
    zeros = gradient_zeros(bodies, start, end, s, pf.T[:, 2, 2], G)
    assert len(zeros) == 1
    z0 = a / np.sqrt(2)
    assert abs(zeros[0].at[2] - z0) <= max(zeros[0].err_s, 1e-15) * 10 and abs(zeros[0].at[2] - z0) < 1e-12
    curv = 4 * G * M * z0 / (z0 * z0 + a * a) ** 2.5
    assert abs(zeros[0].curvature - curv) <= zeros[0].err_curvature
    assert zeros[0].err_curvature < 1e-6 * curv


def test_refusals_name_the_body():
    b = _point_body("lead", [0.0, 0.0, 0.1], 1.0)
    with pytest.raises(InputError, match="lead"):
        group_field_at_points([b], [[0.0, 0.0, 0.1]], G)
    c = body("bob", Cylinder(0.01, 0.02), density=RHO)
    with pytest.raises(InputError, match="bob"):
        group_field_at_points([c], [[0.0, 0.0, 0.01]], G)   # on the top face: T jumps there
    with pytest.raises(InputError):
        group_field_at_points([c], [[0.0, np.nan, 0.0]], G)
