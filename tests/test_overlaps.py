"""Overlap, touch and stray-hole detection on arrangements whose answer is known by construction
(elementary geometry: distances between centres, faces and edges)."""

import math

import numpy as np
import pytest
import trimesh
from scipy.spatial.transform import Rotation

from truepull.geometry.bodies import Body
from truepull.geometry.distance import signed_distance
from truepull.geometry.overlaps import bodies_overlap, find_overlaps, stray_holes
from truepull.geometry.placement import Placement
from truepull.geometry.shapes import Box, Cone, Cylinder, Ellipsoid, MeshShape, Shell, Sphere

ROT = Rotation.from_euler("xyz", [20, 30, 40], degrees=True).as_matrix()
TILT = Rotation.from_rotvec([0, math.pi / 2, 0]).as_matrix()  # local z -> world x


def body(shape, at=(0, 0, 0), R=None, name="x", group="g", density=1000.0):
    return Body(name, group, shape, Placement(np.eye(3) if R is None else R, np.array(at, float)), density)


def plate_mesh():
    tm = trimesh.creation.box(extents=(4, 4, 1))
    return MeshShape(tm.vertices, tm.faces, "plate")


CASES = {
    # sphere resting on the top face (z = 0.5) of a 4 x 4 x 1 plate: centre at 0.5 + 1
    "sphere on plate": (body(Sphere(1), (0.3, 0.2, 1.5)), body(Box((4, 4, 1))), "touch"),
    "sphere on rotated plate": (body(Sphere(1), ROT @ [0.3, 0.2, 1.5]), body(Box((4, 4, 1)), R=ROT), "touch"),
    "sphere 1 um above plate": (body(Sphere(1), (0.3, 0.2, 1.5 + 1e-6)), body(Box((4, 4, 1))), None),
    "sphere 1 um into plate": (body(Sphere(1), (0.3, 0.2, 1.5 - 1e-6)), body(Box((4, 4, 1))), "overlap"),
    "two spheres touching": (body(Sphere(1), (0, 0, 0)), body(Sphere(2), 3 * np.array([0.6, 0.0, 0.8])), "touch"),
    "cylinders stacked face to face": (body(Cylinder(1, 2), (0, 0, 1)), body(Cylinder(0.5, 2), (0.2, 0, -1)),
                                       "touch"),
    "cylinders side by side": (body(Cylinder(1, 2)), body(Cylinder(1, 2), (2, 0, 0.5)), "touch"),
    "cylinders 0.1 um apart": (body(Cylinder(1, 2)), body(Cylinder(1, 2), (2 + 1e-7, 0, 0.5)), None),
    "crossed cylinders overlapping": (body(Cylinder(1, 4)), body(Cylinder(1, 4), (0, 0, 0), R=TILT), "overlap"),
    "cone tip on plate": (body(Cone(1, 2), (0, 0, 1.5)), body(Box((4, 4, 1))), "touch"),
    "cone tip 10 um into plate": (body(Cone(1, 2), (0, 0, 1.5 - 1e-5)), body(Box((4, 4, 1))), "overlap"),
    "tube on its rod": (body(Cylinder(2, 2, 1)), body(Cylinder(1, 4)), "touch"),
    "tube around a thinner rod": (body(Cylinder(2, 2, 1)), body(Cylinder(0.999, 4)), None),
    "tube around a fatter rod": (body(Cylinder(2, 2, 1)), body(Cylinder(1.0001, 4)), "overlap"),
    "boxes sharing an edge": (body(Box((1, 1, 1))), body(Box((1, 1, 1)), (1, 1, 0)), "touch"),
    "ellipsoid on plate": (body(Ellipsoid((1, 2, 0.5)), (0, 0, 1)), body(Box((4, 4, 1))), "touch"),
    "ellipsoid on a cylinder's side": (body(Ellipsoid((1, 2, 0.5)), (0, 0, 1.5)),
                                       body(Cylinder(1, 4), R=TILT), "touch"),
    "ball in a shell's cavity": (body(Sphere(1)), body(Shell(3, 2)), None),
    "ball touching a shell's inside": (body(Sphere(1), (1, 0, 0)), body(Shell(3, 2)), "touch"),
    "ball through a shell wall": (body(Sphere(1), (1.1, 0, 0)), body(Shell(3, 2)), "overlap"),
    "shell on a plate": (body(Shell(1, 0.5), (0, 0, 1.5)), body(Box((4, 4, 1))), "touch"),
    "box on a mesh plate": (body(Box((1, 1, 1)), (0.5, 0.5, 1.0)), body(plate_mesh()), "touch"),
    "box into a mesh plate": (body(Box((1, 1, 1)), (0.5, 0.5, 0.99)), body(plate_mesh()), "overlap"),
    "far apart": (body(Box((1, 1, 1))), body(Cylinder(1, 1), (10, 0, 0)), None),
}


@pytest.mark.parametrize("case", list(CASES), ids=list(CASES))
def test_known_arrangements(case):
    a, b, expected = CASES[case]
    assert bodies_overlap(a, b) == expected
    assert bodies_overlap(b, a) == expected


def test_find_overlaps_lists_pairs_in_order():
    bodies = [body(Sphere(1), (0, 0, 0), name="a"), body(Sphere(1), (2, 0, 0), name="b"),
              body(Sphere(1), (2.5, 0, 0), name="c"), body(Sphere(1), (9, 0, 0), name="d")]
    assert find_overlaps(bodies) == [("a", "b", "touch"), ("b", "c", "overlap")]


def test_signed_distance_of_primitives():
    # closed forms: distance to a box face, a cylinder rim and side, a cone's slant face
    assert signed_distance(Box((2, 2, 2)), [[3, 0, 0]])[0] == pytest.approx(2.0)
    assert signed_distance(Box((2, 2, 2)), [[2, 2, 0]])[0] == pytest.approx(math.sqrt(2))
    assert signed_distance(Cylinder(1, 2), [[0.5, 0, 0]])[0] == pytest.approx(-0.5)
    assert signed_distance(Cylinder(1, 2, 0.5), [[0.0, 0, 0]])[0] == pytest.approx(0.5)
    assert signed_distance(Cylinder(1, 2), [[2, 0, 2]])[0] == pytest.approx(math.sqrt(2))
    # cone R = 1, length 2: slant line from (1, -1) to (0, 1) in (rho, z); distance from the origin
    # to it is |2*0 + 0 - 1| / sqrt(5) (point-line distance), and the origin is inside
    assert signed_distance(Cone(1, 2), [[0, 0, 0]])[0] == pytest.approx(-1 / math.sqrt(5))
    tm = trimesh.creation.box(extents=(2, 2, 2))
    mesh = MeshShape(tm.vertices, tm.faces)
    pts = np.array([[3, 0, 0], [2, 2, 0], [0.5, 0, 0]], float)
    np.testing.assert_allclose(signed_distance(mesh, pts), signed_distance(Box((2, 2, 2)), pts), atol=1e-12)


def test_stray_holes():
    plate = body(Box((4, 4, 1)), name="plate", group="attractor")
    inside = body(Cylinder(0.5, 1.0), (1, 1, 0), name="bore", group="attractor", density=-1000.0)
    poking = body(Cylinder(0.5, 1.0), (1.8, 0, 0), name="edge-bore", group="attractor", density=-1000.0)
    other_group = body(Box((4, 4, 1)), (0, 0, 0), name="other", group="pendulum")
    assert stray_holes([plate, inside, other_group]) == []
    stray = dict(stray_holes([plate, inside, poking, other_group]))
    assert set(stray) == {"edge-bore"}
    # the bore centred 1.8 from the plate's centre line, radius 0.5, sticks out past x = 2 by 0.3:
    # area of the circular segment of height 0.3 in a circle of radius 0.5 (elementary geometry)
    r, h = 0.5, 0.3
    segment = r * r * math.acos((r - h) / r) - (r - h) * math.sqrt(2 * r * h - h * h)
    assert stray["edge-bore"] == pytest.approx(segment / (math.pi * r * r), abs=0.02)


def test_ellipsoid_distance_sign_and_zero_set():
    # points on the surface a (cos t cos p, ...) (parametric form) give zero; scaled in/out change sign
    e = Ellipsoid((0.3, 0.5, 0.2))
    rng = np.random.default_rng(5)
    t, p = rng.uniform(0, 2 * math.pi, 200), rng.uniform(-math.pi / 2, math.pi / 2, 200)
    surf = np.c_[0.3 * np.cos(t) * np.cos(p), 0.5 * np.sin(t) * np.cos(p), 0.2 * np.sin(p)]
    np.testing.assert_allclose(signed_distance(e, surf), 0, atol=1e-15)
    assert np.all(signed_distance(e, 0.99 * surf) < 0) and np.all(signed_distance(e, 1.01 * surf) > 0)
    # along a principal axis the estimate is the exact distance
    assert signed_distance(e, [[0, 0.7, 0]])[0] == pytest.approx(0.2, rel=1e-12)


def test_sphere_pairs_are_the_meeting_spheres_of_a_brute_force_search():
    # reference: every pair's centre distance from scipy.spatial.distance.cdist against the sum of the
    # radii (plus the touch tolerance); spheres of mixed sizes, a few large, some placed exactly touching
    from scipy.spatial.distance import cdist

    from truepull.geometry.overlaps import TOUCH_RTOL, sphere_pairs

    rng = np.random.default_rng(7)
    n = 400
    c = rng.uniform(0, 1, (n, 3))
    r = rng.uniform(0.005, 0.03, n)
    r[:5] = 0.3  # large: compared with all the small ones directly
    c[10] = c[11] + np.array([r[10] + r[11], 0, 0])  # touching along x, to the rounding of the sum
    d = cdist(c, c)
    i, j = np.triu_indices(n, 1)
    meet = d[i, j] <= r[i] + r[j] + TOUCH_RTOL * np.maximum(r[i], r[j])
    expected = [(int(a), int(b)) for a, b in zip(i[meet], j[meet])]
    assert sphere_pairs(c, r) == expected
    assert (10, 11) in expected
    mask = rng.uniform(size=n) < 0.3
    assert sphere_pairs(c, r, between=mask) == [p for p in expected if mask[p[0]] != mask[p[1]]]


def test_sphere_pairs_without_the_tree_are_the_same_pairs(monkeypatch):
    # a few spheres are tested pair by pair (no k-d tree); reference as above: scipy's cdist; and the
    # tree on the same spheres (DIRECT_PAIRS lowered) gives the same list
    from scipy.spatial.distance import cdist

    from truepull.geometry import overlaps

    rng = np.random.default_rng(11)
    n = 120
    c = rng.uniform(0, 1, (n, 3))
    r = rng.uniform(0.01, 0.08, n)
    r[:3] = 0.4
    c[20] = c[21] + np.array([0, r[20] + r[21], 0])  # touching along y
    assert n <= overlaps.DIRECT_PAIRS
    d = cdist(c, c)
    i, j = np.triu_indices(n, 1)
    meet = d[i, j] <= r[i] + r[j] + overlaps.TOUCH_RTOL * np.maximum(r[i], r[j])
    expected = [(int(a), int(b)) for a, b in zip(i[meet], j[meet])]
    direct = overlaps.sphere_pairs(c, r)
    assert direct == expected and (20, 21) in direct
    mask = rng.uniform(size=n) < 0.4
    direct_between = overlaps.sphere_pairs(c, r, between=mask)
    assert direct_between == [p for p in expected if mask[p[0]] != mask[p[1]]]
    monkeypatch.setattr(overlaps, "DIRECT_PAIRS", 1)
    assert overlaps.sphere_pairs(c, r) == direct
    assert overlaps.sphere_pairs(c, r, between=mask) == direct_between
    assert overlaps.sphere_pairs(c[:2] + [[0, 0, 0], [5, 0, 0]], r[:2]) == []  # far apart: no pair at all
