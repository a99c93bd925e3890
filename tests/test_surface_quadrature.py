"""Adaptive surface quadrature (integrate/surface_quadrature.py): where the source's field carries a
rounding bound larger than the tolerance asked for, refinement must stop at that bound (splitting cells
cannot reduce it) and the stated error must still bound the true error; where cells are kept by the
kept rule's own error estimate, the stated error must bound the true error and not exceed it by more
than about 1e3 (no needless over-accuracy).

References (tests/engine_references.py):
- the on-axis closed form of a uniform cylinder (cylinder_on_axis: the stacked-disc formula), used
  through Newton's third law: the force of a point mass m on the cylinder's axis on the cylinder is
  -m times the cylinder's field at the point;
- two parallel cylinders: the exact 2-D reduction (disc-overlap area times the segment-pair closed
  form) integrated by scipy cubature (parallel_cylinders).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
import pytest
from engine_references import G, Z, body, cylinder_on_axis, parallel_cylinders
from scipy.spatial.transform import Rotation

from truepull.geometry.shapes import Cylinder, Sphere
from truepull.integrate.pairs import pair_interaction
from truepull.integrate.patches import body_patches
from truepull.integrate.surface_quadrature import integrate_surface

R, L, RHO = 0.01, 0.02, 1.0e4  # m, m, kg/m^3 (invented test sizes)
M, Z0 = 2.0, 0.05  # point mass (kg) on the axis at z = Z0 (m)
DECLARED = 1e-7  # relative rounding bound declared for the field (far above its true rounding)


def point_field(X):
    """Field of the point mass at (0, 0, Z0) with a declared rounding bound DECLARED * |U|, |g|."""
    d = X - np.array([0.0, 0.0, Z0])
    r = np.linalg.norm(d, axis=1)
    U = -G * M / r
    g = -G * M * d / r[:, None] ** 3
    zero_u, zero_g = np.zeros_like(U), np.zeros_like(g)
    return U, g, zero_u, zero_g, DECLARED * np.abs(U), DECLARED * np.linalg.norm(g, axis=1)


def test_refinement_stops_at_the_fields_rounding_bound_and_the_estimate_still_bounds():
    cyl = body("c", Cylinder(R, L), density=RHO)
    _, gz = cylinder_on_axis(R, L, RHO, Z0)
    exact_fz = -M * float(gz)  # third law: force on the cylinder (N)
    scale = G * M * RHO * np.pi * R * R * L / Z0**2
    tol = np.full(8, 1e-22 * scale)  # far below what the declared rounding allows
    res = integrate_surface(body_patches(cyl), RHO, point_field, np.zeros(3), np.array([0.0, 0.0, 1.0]),
                            cyl.com, tol)
    # before: ~30 levels of splitting up to the cell cap; now the cells stop where their rule difference
    # falls within the field's rounding bound
    assert res.evaluations < 50_000
    assert res.levels < 10
    true_error = abs(res.values[2] - exact_fz)
    assert true_error <= res.errors[2]
    # the declared bound is carried into the estimate (it dominates it), not dropped
    assert res.errors[2] >= 0.5 * DECLARED * abs(exact_fz)


OVER_ACCURACY = 1e3  # the most the stated error may exceed the true error (or the reference's own error)


@lru_cache(maxsize=1)
def _parallel_cylinders():
    """Two parallel cylinders at a gap of 1% of the smaller one's length, the source 13 mm higher
    (invented test sizes), and their exact interaction (scipy cubature to 1e-13)."""
    a, la, b, lb = 0.012, 0.02, 0.02, 0.05
    c1 = np.array([0.05, 0.01, 0.0])
    c2 = c1 + np.array([0.6, 0.8, 0.0]) * (a + b + 0.01 * la) + np.array([0.0, 0.0, 0.013])
    A = body("A", Cylinder(a, la), c1, Rotation.from_rotvec([0, 0, 0.4]).as_matrix(), density=8000.0)
    B = body("B", Cylinder(b, lb), c2, Rotation.from_rotvec([0, 0, -1.1]).as_matrix(), density=11340.0)
    pivot = np.array([0.004, -0.003, 0.01])
    return A, B, pivot, parallel_cylinders(A, B, pivot)


@pytest.mark.parametrize("rtol", [1e-6, 1e-9])
def test_stated_error_bounds_the_true_error_and_is_within_1e3_of_it_for_parallel_cylinders(rtol):
    # reference: the exact 2-D reduction of two parallel cylinders by scipy cubature; its own error
    # (cubature's estimate, below 1e-13 relative) is the floor under which a true error cannot be seen
    A, B, pivot, ref = _parallel_cylinders()
    assert np.all(ref["relerr"] < 1e-12)
    pr = pair_interaction(A, B, pivot, Z, G, rtol=rtol)
    checks = [("force", np.linalg.norm(pr.force - ref["F"]), np.linalg.norm(pr.errors[0:3]), np.linalg.norm(ref["F"])),
              ("torque_z", abs(pr.torque[2] - ref["torque_z"]), pr.errors[5], abs(ref["torque_z"])),
              ("stiffness", abs(pr.stiffness_axis - ref["K"]), pr.errors[6], abs(ref["K"])),
              ("energy", abs(pr.energy - ref["E"]), pr.errors[7], abs(ref["E"]))]
    for name, true_error, stated, size in checks:
        ref_error = 1e-13 * size
        assert true_error <= stated + ref_error, name
        assert stated <= rtol * size, name
        assert stated <= OVER_ACCURACY * max(true_error, ref_error), (name, stated / max(true_error, ref_error))


@pytest.mark.parametrize("rtol", [1e-6, 1e-9])
def test_stated_error_bounds_the_true_error_of_a_cylinder_beside_a_sphere_on_its_axis(rtol):
    # reference: the cylinder's on-axis closed form (cylinder_on_axis) through the third law (a sphere
    # pulls like a point at its centre, by the shell theorem); the cylinder's surface is integrated in
    # the sphere's field, its cap cells reaching toward the sphere 40 um away
    R, L, rho = 0.01, 0.02, 1.0e4
    z = L / 2 + 0.002 + 0.00004
    cyl = body("c", Cylinder(R, L), density=rho)
    ball = body("b", Sphere(0.002), (0.0, 0.0, z), density=19300.0)
    _, gz = cylinder_on_axis(R, L, rho, z)
    exact_fz = -ball.mass * float(gz)
    pr = pair_interaction(cyl, ball, np.zeros(3), Z, G, rtol=rtol)
    assert "surface quadrature of cylinder" in pr.method
    true_error = abs(pr.force[2] - exact_fz)
    assert true_error <= pr.errors[2] + 1e-15 * abs(exact_fz)  # the closed form's rounding
    assert pr.errors[2] <= rtol * abs(exact_fz)
