"""Bodies: world mass properties, parallel-axis theorem, rotated tensors, holes, parameters."""

import math

import numpy as np
import pytest
import trimesh
from scipy.spatial.transform import Rotation

from truepull.geometry.bodies import Body, BodySpec, body_parameters, build_body, spec_with
from truepull.geometry.placement import Placement
from truepull.geometry.quantities import Measured
from truepull.geometry.shapes import Box, Cylinder, MeshShape

PI = math.pi


def M(v, u=None):
    return Measured(v, u)


def spec(kind="cylinder", size=None, at=(0, 0, 0), **kw):
    size = size or {"radius": M(0.02), "length": M(0.1)}
    return BodySpec(name=kw.pop("name", "b"), group=kw.pop("group", "pendulum"), shape_kind=kind,
                    size=size, at=tuple(M(a) for a in at), **kw)


def test_box_about_an_edge_parallel_axis():
    # the standard moment-of-inertia formula of a block about an edge (from memory), along z:
    # I = m (a^2 + b^2) / 3
    a, b, c, rho = 0.1, 0.2, 0.3, 7850.0
    body = build_body(spec("box", {"size.x": M(a), "size.y": M(b), "size.z": M(c)}, at=(0.3, -0.1, 0.2),
                           density=M(rho)))
    m = rho * a * b * c
    edge_point = np.array([0.3 - a / 2, -0.1 - b / 2, 0.0])
    assert body.mass == pytest.approx(m)
    assert body.inertia_about(edge_point, [0, 0, 1]) == pytest.approx(m * (a * a + b * b) / 3, rel=1e-13)
    np.testing.assert_allclose(body.com, [0.3, -0.1, 0.2])


def test_rotated_body_tensor_matches_rotated_trimesh():
    # reference: trimesh's own mass properties of the same box mesh after a rigid transform
    rot = Rotation.from_euler("xyz", [20, -35, 70], degrees=True)
    t = np.array([0.05, 0.1, -0.2])
    ext = (0.1, 0.04, 0.06)
    body = Body("b", "g", Box(ext), Placement(rot.as_matrix(), t), 2700.0)
    tm = trimesh.creation.box(extents=ext)
    mat = np.eye(4)
    mat[:3, :3] = rot.as_matrix()
    mat[:3, 3] = t
    tm.apply_transform(mat)
    tm.density = 2700.0
    np.testing.assert_allclose(body.com, tm.center_mass, atol=1e-14)
    np.testing.assert_allclose(body.inertia_com, tm.moment_inertia, rtol=1e-10, atol=1e-16)
    # and R I R^T by hand
    np.testing.assert_allclose(body.inertia_com, rot.as_matrix() @ (2700 * Box(ext).inertia_unit_density())
                               @ rot.as_matrix().T, rtol=1e-12, atol=1e-18)


def test_parallel_axis_theorem_general_point():
    # Steiner's parallel-axis theorem, tensor form (from memory): I_P = I_com + m (|d|^2 E - d d^T); compare with trimesh mesh about a point
    body = build_body(spec("cylinder", {"radius": M(0.02), "length": M(0.05)}, at=(0.1, 0.0, 0.03),
                           axis=(1.0, 1.0, 0.0), density=M(8000.0)))
    p = np.array([0.0, 0.0, 0.0])
    d = body.com - p
    expected = body.inertia_com + body.mass * (d @ d * np.eye(3) - np.outer(d, d))
    np.testing.assert_allclose(body.inertia_tensor_about(p), expected, rtol=1e-14)
    # about the frame axis through the origin: m d_perp^2 + own moment about a parallel line
    n = np.array([0, 0, 1.0])
    own = n @ body.inertia_com @ n
    assert body.inertia_about(p, [0, 0, 3]) == pytest.approx(own + body.mass * (0.1**2), rel=1e-13)


def test_hole_subtracts_mass_and_inertia():
    # tube = cylinder minus a coaxial cylindrical hole: the sum of signed bodies equals the tube's
    # inertia by the standard formulas, from memory (m (R^2 + r^2)/2 about its axis, m (3(R^2+r^2)+L^2)/12
    # across)
    R, r, L, rho = 0.03, 0.01, 0.08, 8500.0
    solid = build_body(spec(size={"radius": M(R), "length": M(L)}, density=M(rho)))
    hole = build_body(spec(size={"radius": M(r), "length": M(L)}, density=M(rho), subtract=True, name="h"))
    assert hole.is_hole and hole.mass < 0 and hole.density == -rho
    m = solid.mass + hole.mass
    assert m == pytest.approx(rho * PI * (R * R - r * r) * L)
    total = solid.inertia_com + hole.inertia_com
    assert total[2, 2] == pytest.approx(m * (R * R + r * r) / 2, rel=1e-13)
    assert total[0, 0] == pytest.approx(m * (3 * (R * R + r * r) + L * L) / 12, rel=1e-13)
    # a negative stated density is a hole too
    neg = build_body(spec(size={"radius": M(r), "length": M(L)}, density=M(-rho)))
    assert neg.is_hole and neg.mass == pytest.approx(hole.mass)


def test_mass_given_sets_density_and_point_body():
    b = build_body(spec(size={"radius": M(0.02), "length": M(0.1)}, mass=M(1.0)))
    assert b.mass == pytest.approx(1.0)
    assert b.density == pytest.approx(1.0 / (PI * 0.02**2 * 0.1))
    p = build_body(spec("point", {}, at=(1, 2, 3), mass=M(0.5)))
    assert p.mass == 0.5 and p.volume == 0 and p.is_pointlike
    assert not np.any(p.inertia_com)
    assert p.inertia_about([0, 0, 0], [0, 0, 1]) == pytest.approx(0.5 * 5)


def test_material_density():
    b = build_body(spec(material="lead"))
    assert b.density == 11340.0  # lead, from memory (11.34 g/cm^3, the usual tabulated value)


def test_moved_and_contains_world():
    b = build_body(spec(size={"radius": M(0.02), "length": M(0.1)}, at=(1, 0, 0), density=M(1000.0)))
    turn = Placement.turn_about([0, 0, 0], [0, 0, 1], PI / 2)
    moved = b.moved(turn)
    np.testing.assert_allclose(moved.com, [0, 1, 0], atol=1e-15)
    assert moved.contains_world([[0, 1, 0.049], [0, 1, 0.051], [0.019, 1, 0]]).tolist() == [True, False, True]
    c, r = moved.bounding_sphere()
    np.testing.assert_allclose(c, [0, 1, 0], atol=1e-15)
    assert r == pytest.approx(math.hypot(0.02, 0.05))
    assert b.com[0] == 1.0  # the original is unchanged


def test_body_parameters_and_spec_with():
    s = spec(size={"radius": M(0.02, 1e-5), "length": M(0.1)}, at=(0.1, 0.2, 0.3), material="brass")
    params = body_parameters(s)
    assert list(params) == ["at.x", "at.y", "at.z", "radius", "length", "density"]
    assert params["radius"].u == 1e-5 and params["density"].value == 8500.0
    s2 = spec_with(s, "radius", 0.021)
    assert s2.size["radius"] == M(0.021, 1e-5) and s.size["radius"].value == 0.02
    assert build_body(s2).volume == pytest.approx(PI * 0.021**2 * 0.1)
    s3 = spec_with(s, "at.y", 0.25)
    np.testing.assert_allclose(build_body(s3).com, [0.1, 0.25, 0.3])
    s4 = spec_with(s, "density", 8400.0)
    assert s4.material is None and build_body(s4).density == 8400.0
    with pytest.raises(KeyError):
        spec_with(s, "mass", 1.0)
    sm = spec(mass=M(2.0, 1e-4))
    assert list(body_parameters(sm))[-1] == "mass"
    assert build_body(spec_with(sm, "mass", 2.5)).mass == pytest.approx(2.5)
    box = spec("box", {"size.x": M(0.1), "size.y": M(0.2), "size.z": M(0.3)}, density=M(1.0))
    assert build_body(spec_with(box, "size.y", 0.4)).volume == pytest.approx(0.1 * 0.4 * 0.3)


def test_mesh_body_mass_properties_from_trimesh():
    tm = trimesh.creation.box(extents=(0.1, 0.2, 0.3))
    mesh = MeshShape(tm.vertices, tm.faces, "box.stl")
    s = spec("mesh", {}, at=(0.0, 0.0, 0.5), density=M(1000.0), mesh=mesh)
    b = build_body(s)
    assert b.mass == pytest.approx(1000 * 0.006)
    assert list(body_parameters(s)) == ["at.x", "at.y", "at.z", "density"]
    assert not b.is_pointlike
    assert isinstance(b.shape, MeshShape) and Cylinder  # mesh kept as loaded


def test_dataclass_replace_does_not_reuse_cached_inertia():
    from dataclasses import replace

    b = Body("b", "g", Box((0.3, 0.1, 0.1)), Placement.identity(), 1000.0)
    before = b.inertia_com
    quarter = Placement.turn_about([0, 0, 0], [0, 0, 1], PI / 2)
    turned = replace(b, placement=quarter)
    # a quarter turn about z swaps the x and y moments (R I R^T)
    assert turned.inertia_com[0, 0] == pytest.approx(before[1, 1])
    assert turned.inertia_com[1, 1] == pytest.approx(before[0, 0])
