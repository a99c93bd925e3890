"""Support functions and the separating-plane certificate (geometry/support.py).

References: trimesh's own tessellations of each primitive (a fine polygon approximation: its vertex
projections approach h(n) from below, with the chord error of the tessellation as the bound);
the distance of two balls |c_a - c_b| - r_a - r_b (elementary); and, for soundness, random placements
where a sampled point lies inside both bodies (then no plane can separate them).
"""

from __future__ import annotations

import numpy as np
import pytest
import trimesh
from scipy.spatial.transform import Rotation

from truepull.geometry.bodies import Body
from truepull.geometry.placement import Placement
from truepull.geometry.shapes import Box, Cone, Cylinder, Ellipsoid, MeshShape, Sphere
from truepull.geometry.support import separation_gap, support


def placed(shape, at=(0.0, 0.0, 0.0), rotvec=(0.0, 0.0, 0.0), name="b"):
    return Body(name, "g", shape, Placement(Rotation.from_rotvec(rotvec).as_matrix(), np.asarray(at, float)), 1000.0)


SECTIONS = 512  # trimesh circle resolution: chord error r (1 - cos(pi / 512)) < 2e-5 r
SHAPES = {
    "box": (Box((0.03, 0.02, 0.01)), lambda: trimesh.creation.box(extents=(0.03, 0.02, 0.01)), 1e-15),
    "sphere": (Sphere(0.02), lambda: trimesh.creation.icosphere(6, 0.02), 0.02 * 2e-4),
    "cylinder": (Cylinder(0.015, 0.04), lambda: trimesh.creation.cylinder(0.015, 0.04, sections=SECTIONS), 0.015 * 2e-5),
    "tube": (Cylinder(0.015, 0.04, 0.01), lambda: trimesh.creation.annulus(0.01, 0.015, 0.04, sections=SECTIONS), 0.015 * 2e-5),
    "cone": (Cone(0.02, 0.03), lambda: trimesh.creation.cone(0.02, 0.03, sections=SECTIONS).apply_translation((0, 0, -0.015)), 0.02 * 2e-5),
    "ellipsoid": (Ellipsoid((0.03, 0.02, 0.01)),
                  lambda: trimesh.creation.icosphere(6, 1.0).apply_scale((0.03, 0.02, 0.01)), 0.03 * 2e-4),
}


@pytest.mark.parametrize("kind", list(SHAPES))
def test_support_matches_a_fine_tessellation(kind):
    shape, make, chord = SHAPES[kind]
    mesh = make()
    body = placed(shape, at=(0.1, -0.05, 0.02), rotvec=(0.3, -0.7, 1.1))
    verts = body.placement.apply(np.asarray(mesh.vertices))
    n = np.random.default_rng(1).standard_normal((200, 3))
    n /= np.linalg.norm(n, axis=1)[:, None]
    h = support(body, n)
    h_mesh = (n @ verts.T).max(axis=1)
    # the tessellation lies inside the solid (its vertices are on the surface): h >= h_mesh, and
    # within the chord error of it
    assert np.all(h >= h_mesh - 1e-15)
    assert np.all(h - h_mesh <= chord + 1e-15)


def test_support_of_a_mesh_is_its_largest_vertex_projection():
    # reference: the definition of the support function of a polytope, max over vertices of n . v,
    # computed here with numpy
    ico = trimesh.creation.icosphere(2, 0.01)
    body = placed(MeshShape(np.asarray(ico.vertices), np.asarray(ico.faces)), at=(0.0, 0.2, 0.0), rotvec=(0.1, 0.2, 0.3))
    n = np.array([[0.0, 1.0, 0.0], [0.6, 0.0, 0.8]])
    verts = body.placement.apply(np.asarray(ico.vertices))
    assert np.allclose(support(body, n), (n @ verts.T).max(axis=1), rtol=0, atol=1e-15)


def test_two_balls_are_apart_by_their_distance():
    # reference: the gap of two balls, |c_a - c_b| - r_a - r_b (elementary geometry; 3-4-5 triangles)
    a = placed(Sphere(0.02), at=(0.0, 0.0, 0.0))
    b = placed(Sphere(0.03), at=(0.03, 0.04, 0.0))  # centres 0.05 apart: gap 0
    c = placed(Sphere(0.03), at=(0.06, 0.08, 0.0))  # centres 0.10 apart: gap 0.05
    assert separation_gap(a, c) == pytest.approx(0.05, rel=1e-12)
    assert separation_gap(a, b) <= 1e-15


def test_parallel_cylinders_side_by_side():
    # two upright cylinders 1 mm apart sideways: the gap is the distance of their axes less their radii
    # (elementary geometry: axes 32 mm apart along a 3-4-5 direction, radii 6 + 25 mm)
    a = placed(Cylinder(0.006, 0.012), at=(0.052, 0.0, 0.0))
    b = placed(Cylinder(0.025, 0.05), at=(0.052 + 0.6 * 0.032, 0.8 * 0.032, 0.003))
    assert separation_gap(a, b) == pytest.approx(0.001, rel=1e-9)


def test_no_plane_is_found_between_bodies_that_share_a_point():
    # soundness: wherever a sampled point lies inside both bodies, the certificate must not claim a gap;
    # elsewhere the gap it claims is at most the distance between any point of one and any of the other
    rng = np.random.default_rng(7)
    kinds = [SHAPES[k][0] for k in ("box", "cylinder", "cone", "ellipsoid", "tube")]
    shared = apart = 0
    for trial in range(150):
        sa, sb = kinds[trial % 5], kinds[(trial * 3 + 1) % 5]
        a = placed(sa, at=rng.uniform(-0.01, 0.01, 3), rotvec=rng.uniform(-2, 2, 3))
        b = placed(sb, at=rng.uniform(-0.04, 0.04, 3), rotvec=rng.uniform(-2, 2, 3))
        p = rng.uniform(-0.05, 0.05, (4000, 3))
        in_a, in_b = a.contains_world(p), b.contains_world(p)
        gap = separation_gap(a, b)
        if (in_a & in_b).any():
            shared += 1
            assert gap < 0
        elif gap > 0:
            apart += 1
            pa, pb = p[in_a], p[in_b]
            assert gap <= np.min(np.linalg.norm(pa[:, None, :] - pb[None, :, :], axis=2))
    assert shared > 20 and apart > 20
