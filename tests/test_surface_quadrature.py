"""Adaptive surface quadrature (integrate/surface_quadrature.py) where the source's field carries a
rounding bound larger than the tolerance asked for: refinement must stop at that bound (splitting cells
cannot reduce it) and the stated error must still bound the true error.

Reference: the on-axis closed form of a uniform cylinder (tests/engine_references.cylinder_on_axis:
the stacked-disc formula), used through Newton's third law: the force of a point mass m on the
cylinder's axis on the cylinder is -m times the cylinder's field at the point.
"""

from __future__ import annotations

import numpy as np
from engine_references import G, body, cylinder_on_axis

from truepull.geometry.shapes import Cylinder
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
