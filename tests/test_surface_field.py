"""The general adaptive surface-integral field against closed forms of every shape.

References, each a closed form tested on its own elsewhere or a published result:
- box: the prism closed form (Nagy, Papp and Benedek 2000; integrate/field_prism.py, itself checked
  against scipy cubature and the Bouguer slab in tests/test_field_prism.py);
- ellipsoid: the Carlson-form exterior field (integrate/field_ellipsoid.py, checked against scipy
  cubature in tests/test_field_ellipsoid.py);
- sphere and shell: Newton's law and the shell theorem (a uniform shell's cavity is field-free);
- mesh: the homogeneous polyhedron closed form (Werner and Scheeres 1997; field_polyhedron.py);
- cylinder: the on-axis closed form (Telford, Geldart and Sheriff, Applied Geophysics, 2nd ed., 1990, gravity chapter; from memory, equation number not checked) and ring fields integrated by
  scipy cubature off the axis (tests/engine_references.py).
Each point is asked for a relative tolerance; the answer must meet it, and the returned error estimate
must bound the difference from the reference.
"""

from __future__ import annotations

import numpy as np
import pytest
import trimesh
from engine_references import G, cylinder_on_axis, revolution_field

from truepull.geometry.shapes import Box, Cylinder, Ellipsoid, MeshShape, Shell, Sphere
from truepull.integrate.field_ellipsoid import ellipsoid_field
from truepull.integrate.field_point import point_field, shell_field
from truepull.integrate.field_polyhedron import PolyhedronData, polyhedron_field
from truepull.integrate.field_prism import prism_field
from truepull.integrate.patches import shape_patches
from truepull.integrate.surface_field import surface_field

RHO = 7800.0
H = np.array([0.03, 0.02, 0.01])
ICO = trimesh.creation.icosphere(subdivisions=1, radius=0.01)


def _box(p):
    return prism_field(p, H, RHO, G)


def _ellipsoid(p):
    return ellipsoid_field(p, H, RHO, G)


def _sphere(p):
    return point_field(p, np.zeros((1, 3)), np.array([RHO * Sphere(0.01).volume()]), G)


def _shell(p):
    return shell_field(p, np.zeros(3), 0.01, 0.008, RHO * Shell(0.01, 0.008).volume(), G)


def _mesh(p):
    return polyhedron_field(p, PolyhedronData(np.asarray(ICO.vertices), np.asarray(ICO.faces)), RHO, G)


CASES = {
    "box": (Box(tuple(2 * H)), _box, [[0.0303, 0.005, 0.002], [0.0303, 0.0203, 0.0101], [0.0, 0.0, 0.0101],
                                      [0.033, -0.005, 0.002], [0.1, 0.2, -0.1]]),
    "ellipsoid": (Ellipsoid(tuple(H)), _ellipsoid, [[0.0303, 0.0, 0.0], [0.02, 0.016, 0.003], [0.0, 0.0, 0.0102],
                                                    [0.2, -0.1, 0.05]]),
    "sphere": (Sphere(0.01), _sphere, [[0.0101, 0.0, 0.0], [0.004, 0.007, -0.0075], [0.3, 0.1, 0.0]]),
    # the shell: outside, and inside its cavity (zero field, constant potential: shell theorem)
    "shell": (Shell(0.01, 0.008), _shell, [[0.0101, 0.0, 0.0], [0.0, 0.003, 0.001], [0.0079, 0.0, 0.0]]),
    "mesh": (MeshShape(np.asarray(ICO.vertices), np.asarray(ICO.faces)), _mesh,
             [[0.0101, 0.0, 0.0], [0.0, 0.0, 0.0105], [0.05, 0.05, 0.05]]),
}


def _one(shape, point, tol_u, tol_g, max_depth=40):
    ps = shape_patches(shape, np.eye(3), np.zeros(3))
    U, g, eU, eg, ok = surface_field(np.array([point], float), ps, RHO, G, tol_u, tol_g, max_depth=max_depth)
    return U[0], g[0], eU[0], eg[0], bool(ok[0])


@pytest.mark.parametrize("rtol", [1e-6, 1e-10])
@pytest.mark.parametrize("case", list(CASES), ids=list(CASES))
def test_adaptive_surface_field_meets_its_tolerance_and_bounds_its_error(case, rtol):
    shape, reference, points = CASES[case]
    for p in points:
        Ur, gr = reference(np.array([p], float))
        Ur, gr = Ur[0], gr[0]
        size_g = max(np.linalg.norm(gr), G * RHO * 1e-3)  # the cavity's field is zero: judge it by G rho x 1 mm
        U, g, eU, eg, ok = _one(shape, p, rtol * abs(Ur), rtol * size_g)
        assert ok
        rounding_ref = 1e-14  # closed forms' own rounding (about 1e-15; see their modules)
        assert abs(U - Ur) <= rtol * abs(Ur)
        assert np.linalg.norm(g - gr) <= rtol * size_g
        assert abs(U - Ur) <= eU + rounding_ref * abs(Ur)
        assert np.linalg.norm(g - gr) <= eg + rounding_ref * size_g


@pytest.mark.parametrize("point, near", [((0.0, 0.0, 0.0252), None), ((0.0, 0.0, -0.04), None),
                                         ((0.0204, 0.0, 0.003), (1.0, 0.003)), ((0.012, 0.0, 0.0254), (0.6, 0.025))])
def test_a_cylinder_by_the_surface_field(point, near):
    # on the axis: the standard closed form; off the axis: ring fields (scipy.special) integrated over
    # the cross-section by scipy cubature
    R, L = 0.02, 0.05
    if near is None and point[0] == 0.0:
        Ur, gz = cylinder_on_axis(R, L, RHO, point[2])
        gr, ref_err = np.array([0.0, 0.0, gz]), 1e-15 * abs(gz)
    else:
        ref, err = revolution_field((point[0], point[2]), lambda z: (0 * z, 0 * z + R), (-L / 2, L / 2), RHO, near=near)
        Ur, gr, ref_err = ref[0], np.array([ref[1], 0.0, ref[2]]), np.hypot(err[1], err[2])
    U, g, eU, eg, ok = _one(Cylinder(R, L), point, 1e-10 * abs(Ur), 1e-10 * np.linalg.norm(gr))
    assert ok
    assert np.linalg.norm(g - gr) <= 1e-10 * np.linalg.norm(gr)
    assert np.linalg.norm(g - gr) <= eg + ref_err


def test_depth_limit_is_reported():
    # a tolerance no rule can meet within the allowed subdivisions is flagged, not hidden
    p = [0.03 + 1e-7, 0.005, 0.002]  # 0.1 micrometre off the box's face
    Ur, gr = _box(np.array([p]))
    U, g, eU, eg, ok = _one(Box(tuple(2 * H)), p, 1e-15 * abs(Ur[0]), 1e-15 * np.linalg.norm(gr[0]), max_depth=2)
    assert not ok
    assert abs(U - Ur[0]) <= eU + 1e-14 * abs(Ur[0])  # the estimate still tells the truth


def test_tolerances_must_be_numbers():
    # one tolerance for all the points: an array is refused rather than misread
    ps = shape_patches(Box(tuple(2 * H)), np.eye(3), np.zeros(3))
    with pytest.raises(TypeError):
        surface_field(np.array([[0.1, 0.0, 0.0], [0.2, 0.0, 0.0]]), ps, RHO, G, np.array([1e-20, 1e-20]), 1e-20)
