"""The demo's mirror bracket (shapes/make_bracket.py -> shapes/bracket.stl)."""

import numpy as np
import trimesh

from truepull.geometry.meshes import load_mesh
from truepull.shapes import make_bracket as mb
from truepull.shapes import demo_path


def _legs():
    """The L as two boxes (mm): (centre, size) of the horizontal leg and of the vertical leg below it."""
    y0, y1 = mb.LEG_Y
    t, w, h = mb.THICK, mb.WIDTH_X, mb.DROP
    top = (np.array([0.0, (y0 + y1) / 2, -t / 2]), np.array([w, y1 - y0, t]))
    leg = (np.array([0.0, y0 + t / 2, -t - (h - t) / 2]), np.array([w, t, h - t]))
    return top, leg


def test_bracket_is_closed_outward_and_has_the_l_volume_and_centroid():
    mesh = mb.make_bracket()
    assert mesh.is_watertight and mesh.is_winding_consistent
    assert mesh.volume > 0  # outward winding: positive signed volume
    # composite of two rectangular boxes (elementary statics, from memory: volume-weighted centroid)
    parts = _legs()
    vols = [np.prod(size) for _, size in parts]
    centroid = sum(v * c for v, (c, _) in zip(vols, parts)) / sum(vols)
    assert np.isclose(mesh.volume, sum(vols), rtol=1e-12)
    assert np.allclose(mesh.center_mass, centroid, rtol=0, atol=1e-12)


def test_bracket_inertia_equals_two_boxes_by_parallel_axes():
    mesh = mb.make_bracket()
    parts = _legs()
    vols = [np.prod(size) for _, size in parts]
    com = sum(v * c for v, (c, _) in zip(vols, parts)) / sum(vols)
    total = np.zeros((3, 3))
    for v, (c, (a, b, cc)) in zip(vols, parts):
        # box about its centre, density 1: m/12 diag(b^2+c^2, a^2+c^2, a^2+b^2) (handbook, from memory)
        box = v / 12.0 * np.diag([b * b + cc * cc, a * a + cc * cc, a * a + b * b])
        d = c - com
        total += box + v * (d @ d * np.eye(3) - np.outer(d, d))  # parallel-axis theorem (handbook, from memory)
    assert np.allclose(mesh.moment_inertia, total, rtol=1e-12, atol=1e-9 * np.abs(total).max())


def test_shipped_stl_is_what_the_script_makes():
    shipped = demo_path().with_name("bracket.stl").read_bytes()
    assert shipped == trimesh.exchange.stl.export_stl(mb.make_bracket())


def test_shipped_stl_loads_as_a_body_mesh_in_millimetres():
    shape = load_mesh(demo_path().with_name("bracket.stl"), "mm")
    assert not shape.inverted
    assert np.isclose(shape.volume(), mb.make_bracket().volume * 1e-9, rtol=1e-12)  # 1 mm^3 = 1e-9 m^3
