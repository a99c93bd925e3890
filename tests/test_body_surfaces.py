"""Drawn surfaces: closed, outward, the true size (polygon closed forms) and the true placement."""

import math

import numpy as np
import pytest
import trimesh
from scipy.spatial.transform import Rotation

from truepull.cli.body_surfaces import body_surface, local_surface
from truepull.geometry.scene import load_scene_text
from truepull.geometry.shapes import Box, Cone, Cylinder, Ellipsoid, Shell, Sphere

N = 48
TH = 2 * math.pi / N
POLY = N / 2 * math.sin(TH)  # area of the regular N-gon of unit circumradius: (N/2) sin(2 pi/N) (elementary)


def tm_of(shape):
    v, f = local_surface(shape, N)
    return trimesh.Trimesh(v, f, process=False)


@pytest.mark.parametrize("shape, volume", [
    # n-gon prism V = (n/2) R^2 sin(2 pi/n) L; annular prism the difference of two (elementary)
    (Cylinder(0.03, 0.08), POLY * 0.03**2 * 0.08),
    (Cylinder(0.03, 0.08, 0.012), POLY * (0.03**2 - 0.012**2) * 0.08),
    # n-gon frustum: V = L/3 (A1 + sqrt(A1 A2) + A2) with similar polygons (prismatoid rule, elementary)
    (Cone(0.03, 0.05, 0.01), POLY * 0.05 / 3 * (0.03**2 + 0.03 * 0.01 + 0.01**2)),
    (Cone(0.03, 0.05), POLY * 0.05 / 3 * 0.03**2),
    (Box((0.01, 0.02, 0.03)), 0.01 * 0.02 * 0.03),
])
def test_polygonal_shapes_have_their_closed_form_volume(shape, volume):
    tm = tm_of(shape)
    assert tm.is_watertight and tm.is_winding_consistent
    assert tm.volume == pytest.approx(volume, rel=1e-12)  # positive: wound outward


@pytest.mark.parametrize("shape", [Sphere(0.02), Shell(0.02, 0.015), Ellipsoid((0.01, 0.02, 0.03))])
def test_round_shapes_converge_to_the_true_volume(shape):
    tm = tm_of(shape)
    assert tm.is_watertight and tm.is_winding_consistent
    # an inscribed polyhedron with 48 x 24 facets: within 1 % of the volume (4/3 pi a b c etc., closed
    # forms from memory)
    assert tm.volume < shape.volume() and tm.volume == pytest.approx(shape.volume(), rel=1e-2)


def test_placement_is_the_bodys():
    scene = load_scene_text("""
[units]
length = "mm"
[[body]]
name = "frustum"
group = "attractor"
shape = "cone"
radius = 30
radius_top = 10
length = 50
density = 1000
at = [10, -20, 30]
axis = [1, 2, 2]
rotate = { axis = [0, 0, 1], angle = 40 }
""")
    body = scene.body("frustum")
    surf = body_surface(body, N)
    tm = trimesh.Trimesh(np.asarray(surf.points), surf.faces.reshape(-1, 4)[:, 1:], process=False)
    # similar cross-sections: the n-gon frustum's centroid height is the round frustum's, so the drawn
    # solid's centroid is the body's centre of mass (closed form in geometry.shapes)
    np.testing.assert_allclose(tm.center_mass, body.com, atol=1e-12)
    # the axis: local z goes along (1, 2, 2)/3 then turns 40 degrees about z (scipy rotations)
    r = Rotation.from_rotvec([0, 0, math.radians(40)]).as_matrix()
    axis = r @ np.array([1.0, 2.0, 2.0]) / 3.0
    apex_side = np.asarray(surf.points) - body.placement.translation
    heights = apex_side @ axis
    assert heights.min() == pytest.approx(-0.025, abs=1e-12) and heights.max() == pytest.approx(0.025, abs=1e-12)
    assert str(surf.field_data["group"][0]) == "attractor" and int(surf.field_data["is_hole"][0]) == 0
