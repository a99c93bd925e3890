"""geometry/mesh_distance.py: point-to-mesh distances on both kernels (serial below 64 points,
parallel from 64), against the distance to an axis-aligned box by elementary geometry."""

import numpy as np
import trimesh

from truepull.geometry.mesh_distance import mesh_unsigned_distance


def _box_distance(p, half):
    # elementary geometry: outside an axis-aligned box the distance is the norm of the per-axis
    # excess over the half sizes; inside, the least distance to a face
    d = np.abs(p) - half
    outside = np.linalg.norm(np.maximum(d, 0.0), axis=1)
    return np.where(np.all(d <= 0, axis=1), -np.max(d, axis=1), outside)


def test_distance_to_a_box_mesh_on_both_kernels():
    half = np.array([0.5, 1.0, 1.5])
    tris = trimesh.creation.box(extents=2 * half).triangles
    rng = np.random.default_rng(3)
    for n in (10, 200):  # the serial and the parallel kernel
        p = rng.uniform(-3, 3, (n, 3))
        np.testing.assert_allclose(mesh_unsigned_distance(p, tris), _box_distance(p, half), rtol=0, atol=1e-14)
