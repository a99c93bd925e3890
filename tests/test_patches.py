"""Surface patches of every shape: the divergence theorem against closed-form volumes, areas and
centroids, in rotated and shifted placements.

Checks, each against an outside closed form:
- volume: (1/3) surface integral of x . n dA = V (divergence theorem) with V the closed-form volume
  (from memory);
- closure: the surface integral of n dA = 0 (divergence theorem for a constant field);
- area: the surface integral of |n| dA = the closed-form surface area (from memory; ellipsoid: Carlson's R_G form as
  given in the scipy.special.elliprg documentation);
- centroid: the surface integral of x (x . n) dA = 4 V c (divergence theorem, div(x_i x) = 4 x_i), with
  c the closed-form centroid, from memory (a cone's at a quarter of its height from the base).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import trimesh
from scipy.spatial import ConvexHull
from scipy.special import elliprg

from truepull.geometry.placement import Placement
from truepull.geometry.shapes import Box, Cone, Cylinder, Ellipsoid, MeshShape, Shell, Sphere
from truepull.integrate.gauss import gauss_unit
from truepull.integrate.patches import BAND, ELLIPSOID, PARALLELOGRAM, TRIANGLE, cell_nodes, shape_patches, split_cells

PI = math.pi


def frustum_centroid_height(R, r, L):
    """Height of a frustum's centroid above its base: L (R^2 + 2 R r + 3 r^2) / (4 (R^2 + R r + r^2))
    (from memory; r = 0 gives the cone's L/4, and r = R the cylinder's L/2)."""
    return L * (R * R + 2 * R * r + 3 * r * r) / (4 * (R * R + R * r + r * r))


def _mesh(tm):
    return MeshShape(np.asarray(tm.vertices, float), np.asarray(tm.faces), "generated")


_ico = trimesh.creation.icosphere(subdivisions=2, radius=0.02)
_ico_v = np.asarray(_ico.vertices) * np.array([1.0, 0.7, 0.5])
_hull = ConvexHull(_ico_v)
_prism = trimesh.creation.cylinder(radius=0.015, height=0.04, sections=12)

# (shape, volume, area, centroid in the local frame) from closed forms (the standard mensuration
# formulas, from memory)
CASES = {
    "cylinder": (Cylinder(0.02, 0.05), PI * 0.02**2 * 0.05, 2 * PI * 0.02 * 0.05 + 2 * PI * 0.02**2, np.zeros(3)),
    "tube": (Cylinder(0.02, 0.05, 0.008), PI * (0.02**2 - 0.008**2) * 0.05,
             2 * PI * (0.02 + 0.008) * 0.05 + 2 * PI * (0.02**2 - 0.008**2), np.zeros(3)),
    "cone": (Cone(0.02, 0.05), PI * 0.02**2 * 0.05 / 3,
             PI * 0.02 * math.hypot(0.02, 0.05) + PI * 0.02**2,
             np.array([0, 0, -0.025 + frustum_centroid_height(0.02, 0.0, 0.05)])),
    "frustum": (Cone(0.02, 0.05, 0.01), PI * 0.05 * (0.02**2 + 0.02 * 0.01 + 0.01**2) / 3,
                PI * (0.02 + 0.01) * math.hypot(0.01, 0.05) + PI * (0.02**2 + 0.01**2),
                np.array([0, 0, -0.025 + frustum_centroid_height(0.02, 0.01, 0.05)])),
    "box": (Box((0.01, 0.02, 0.03)), 0.01 * 0.02 * 0.03, 2 * (0.01 * 0.02 + 0.02 * 0.03 + 0.03 * 0.01), np.zeros(3)),
    "ellipsoid": (Ellipsoid((0.01, 0.02, 0.03)), 4 / 3 * PI * 0.01 * 0.02 * 0.03,
                  4 * PI * 0.01 * 0.02 * 0.03 * elliprg(1 / 0.01**2, 1 / 0.02**2, 1 / 0.03**2), np.zeros(3)),
    "sphere": (Sphere(0.02), 4 / 3 * PI * 0.02**3, 4 * PI * 0.02**2, np.zeros(3)),
    "shell": (Shell(0.02, 0.015), 4 / 3 * PI * (0.02**3 - 0.015**3), 4 * PI * (0.02**2 + 0.015**2), np.zeros(3)),
    # trimesh box: a b c; 12-sided prism: (n/2) r^2 sin(2 pi / n) h, area n r sin(pi/n) 2 h + 2 (n/2) r^2 sin(2 pi/n)
    "mesh box": (_mesh(trimesh.creation.box(extents=(0.01, 0.02, 0.03))), 0.01 * 0.02 * 0.03,
                 2 * (0.01 * 0.02 + 0.02 * 0.03 + 0.03 * 0.01), np.zeros(3)),
    "mesh prism": (_mesh(_prism), 6 * 0.015**2 * math.sin(2 * PI / 12) * 0.04,
                   12 * 2 * 0.015 * math.sin(PI / 12) * 0.04 + 2 * 6 * 0.015**2 * math.sin(2 * PI / 12),
                   np.zeros(3)),
    # a squashed icosphere: volume and area from scipy.spatial.ConvexHull (Qhull), centroid 0 by symmetry
    "mesh icosphere": (MeshShape(_ico_v, np.asarray(_ico.faces), "ico"), _hull.volume, _hull.area, np.zeros(3)),
}

PLACEMENTS = {
    "identity": Placement.identity(),
    "turned and shifted": Placement.from_scene([0.1, -0.2, 0.3], [1, 1, 0.5], [0.3, -1, 0.2], 0.7),
    "upside down": Placement.from_scene([-0.05, 0.02, 0.0], [0, 0, -1]),
}


def _nodes(ps, n):
    return cell_nodes(ps.kinds, ps.params, ps.cell_patch, ps.cell_dom, *gauss_unit(n))


@pytest.mark.parametrize("placement", list(PLACEMENTS), ids=list(PLACEMENTS))
@pytest.mark.parametrize("case", list(CASES), ids=list(CASES))
def test_divergence_theorem_gives_the_closed_form_volume_area_and_centroid(case, placement):
    shape, volume, area, centroid = CASES[case]
    pl = PLACEMENTS[placement]
    ps = shape_patches(shape, pl.rotation, pl.translation)
    X, W = _nodes(ps, 12)
    size = volume ** (1 / 3)
    reach = np.linalg.norm(pl.translation) + size  # |x| on the surface, for the rounding allowance
    # divergence theorem: V = (1/3) surface integral of x . n dA (closed forms above)
    assert np.einsum("ij,ij->", X, W) / 3 == pytest.approx(volume, rel=1e-12 * (reach / size))
    # divergence theorem for a constant field: the surface integral of n dA vanishes
    assert np.abs(W.sum(axis=0)).max() <= 1e-13 * area
    # the closed-form surface area (from memory)
    assert np.linalg.norm(W, axis=1).sum() == pytest.approx(area, rel=1e-12)
    # surface integral of x (x . n) dA = 4 V c (div(x_i x) = 4 x_i), c the closed-form centroid
    c_world = pl.apply(centroid)
    first = np.einsum("ij,i->j", X, np.einsum("ij,ij->i", X, W)) / (4 * volume)
    assert np.linalg.norm(first - c_world) <= 1e-11 * reach**2 / size


@pytest.mark.parametrize("case", ["cylinder", "tube", "frustum", "ellipsoid", "box", "mesh prism"])
def test_splitting_cells_keeps_the_surface(case):
    # the four children of each cell tile it: the same divergence-theorem volume after two splits
    # (closed-form volume), with a lower-order rule on the finer cells
    shape, volume, _, _ = CASES[case]
    pl = PLACEMENTS["turned and shifted"]
    ps = shape_patches(shape, pl.rotation, pl.translation)
    cp, cd = split_cells(*split_cells(ps.cell_patch, ps.cell_dom))
    assert len(cp) == 16 * len(ps.cell_patch)
    X, W = cell_nodes(ps.kinds, ps.params, cp, cd, *gauss_unit(8))
    assert np.einsum("ij,ij->", X, W) / 3 == pytest.approx(volume, rel=1e-10)
    # children of cell c are rows 4c .. 4c+3 and lie inside it
    kp, kd = split_cells(ps.cell_patch, ps.cell_dom)
    parent = np.repeat(ps.cell_dom, 4, axis=0)
    assert np.all(kp == np.repeat(ps.cell_patch, 4))
    assert np.all((kd[:, 0] >= parent[:, 0]) & (kd[:, 1] <= parent[:, 1]) & (kd[:, 2] >= parent[:, 2])
                  & (kd[:, 3] <= parent[:, 3]))


def test_patch_kinds_by_shape():
    # what each shape's surface is made of (the divergence checks above fix their orientation)
    I, O = np.eye(3), np.zeros(3)
    assert set(shape_patches(Cylinder(0.02, 0.05, 0.01), I, O).kinds) == {BAND}
    assert len(shape_patches(Cylinder(0.02, 0.05, 0.01), I, O).kinds) == 4  # side, two annuli, bore
    assert len(shape_patches(Cone(0.02, 0.05), I, O).kinds) == 2            # side and base (apex closed)
    assert set(shape_patches(Sphere(0.01), I, O).kinds) == {ELLIPSOID}
    assert len(shape_patches(Shell(0.02, 0.01), I, O).kinds) == 2
    assert list(shape_patches(Box((1, 2, 3)), I, O).kinds) == [PARALLELOGRAM] * 6
    m = CASES["mesh icosphere"][0]
    assert list(shape_patches(m, I, O).kinds) == [TRIANGLE] * len(m.faces)


def test_outward_normals_of_a_convex_body():
    # for a convex body every vector area element points away from an inner point: (x - c) . N > 0
    # (outward orientation, the convention of the divergence theorem)
    pl = PLACEMENTS["turned and shifted"]
    for case in ("cylinder", "frustum", "ellipsoid", "box", "mesh icosphere"):
        shape = CASES[case][0]
        ps = shape_patches(shape, pl.rotation, pl.translation)
        X, W = _nodes(ps, 6)
        keep = np.linalg.norm(W, axis=1) > 0  # the collapsed rule's apex nodes carry no area
        assert np.all(np.einsum("ij,ij->i", X[keep] - pl.translation, W[keep]) > 0), case
