"""Tessellated curved parts: mesh formats, STEP through the optional CAD extra, and the tessellation
error (integrate/tessellation.py, geometry/meshes.py STEP reading, shapes/make_cylinder_step.py).

Outside references: the chord (sagitta) law of a circle cut into N chords of angle theta = 2 pi / N,
sagitta R theta^2 / 8, and the inscribed polygon's area (N/2) R^2 sin(theta), short of pi R^2 by the
fraction theta^2 / 6 (elementary geometry); the cylinder's volume pi R^2 H; the point field of the
same mass (Newton) for the far field.
"""

from __future__ import annotations

import importlib.util
import math
import sys

import numpy as np
import pytest
import trimesh

from truepull.geometry.bodies import Body
from truepull.geometry.errors import InputError
from truepull.geometry.meshes import load_mesh
from truepull.geometry.placement import Placement
from truepull.geometry.shapes import Cylinder, MeshShape, Point
from truepull.integrate.pairs import pair_interaction
from truepull.integrate.sources import SourceField

G = 6.6743e-11
HAVE_CAD = importlib.util.find_spec("cascadio") is not None


def test_tessellated_cylinders_converge_at_the_chord_rate():
    """Field of an N-sided prism (trimesh cylinder, vertices on the circle) beside the band field of
    the true cylinder: the relative error is the polygon's area deficit theta^2 / 6 (far away the
    field is the mass's), so doubling N divides it by 4: chord error R theta^2 / 8 falls the same way."""
    R, H, rho = 0.03, 0.06, 8000.0
    x = np.array([[0.5, 0.2, 0.1]])
    band = SourceField(Body("c", "g", Cylinder(R, H), Placement.identity(), rho), G)
    g_exact = band.field(x)[1][0]
    errs = []
    for n in (32, 64, 128):
        m = trimesh.creation.cylinder(radius=R, height=H, sections=n)
        mesh = Body("m", "g", MeshShape(m.vertices, m.faces), Placement.identity(), rho)
        g = SourceField(mesh, G).field(x)[1][0]
        theta = 2 * math.pi / n
        rel = np.linalg.norm(g - g_exact) / np.linalg.norm(g_exact)
        assert rel == pytest.approx(theta**2 / 6, rel=0.02)  # area deficit of the inscribed polygon
        errs.append(rel)
    assert errs[0] / errs[1] == pytest.approx(4.0, rel=0.02)
    assert errs[1] / errs[2] == pytest.approx(4.0, rel=0.02)


@pytest.mark.parametrize("suffix", ["obj", "ply", "off", "glb"])
def test_mesh_formats_read_through_trimesh(tmp_path, suffix):
    """A 20 x 30 x 40 mm box written by trimesh in each format reads back with volume 24000 mm^3."""
    box = trimesh.creation.box(extents=(20.0, 30.0, 40.0))
    path = tmp_path / f"box.{suffix}"
    box.export(path)
    shape = load_mesh(path, "mm")
    assert shape.volume() == pytest.approx(24e-6, rel=1e-6)  # float32 in GLB: about 1e-7


def test_step_without_the_extra_says_how_to_get_it(monkeypatch):
    from pathlib import Path

    step = Path(__file__).parent.parent / "shapes" / "cylinder.step"
    monkeypatch.setitem(sys.modules, "cascadio", None)  # import fails as when it is not installed
    with pytest.raises(InputError, match=r"pip install truepull\[cad\]"):
        load_mesh(step)


def test_step_file_is_what_the_script_writes():
    from pathlib import Path

    from truepull.shapes.make_cylinder_step import step_text

    assert (Path(__file__).parent.parent / "shapes" / "cylinder.step").read_text() == step_text()


@pytest.mark.skipif(not HAVE_CAD, reason="the CAD extra (cascadio) is not installed")
def test_step_cylinder_pair_within_its_tessellation_error():
    """The STEP cylinder (R 30 mm, H 60 mm, base at the origin) pulling a point mass: the pair on the
    tessellation against the band field of the true cylinder, within the estimate that includes
    the tessellation change; its volume within that change of pi R^2 H."""
    from pathlib import Path

    shape = load_mesh(Path(__file__).parent.parent / "shapes" / "cylinder.step")
    R, H, rho = 0.03, 0.06, 8000.0
    V = math.pi * R**2 * H
    change = abs(shape.volume() - shape.coarse.volume())
    assert abs(shape.volume() - V) <= change + 1e-7 * V  # float32 vertices: about 1e-7
    part = Body("step", "a", shape, Placement.identity(), rho)
    true = Body("true", "a", Cylinder(R, H), Placement.shift([0, 0, H / 2]), rho)
    pt = Body("pt", "p", Point(), Placement.shift([0.1, 0.02, 0.05]), 0.0, point_mass=0.5)
    piv, ax = np.zeros(3), np.array([0.0, 0.0, 1.0])
    got = pair_interaction(pt, part, piv, ax, G, rtol=1e-10)
    ref = pair_interaction(pt, true, piv, ax, G, rtol=1e-11)
    assert "tessellation" in got.method
    assert np.all(np.abs(got.force - ref.force) <= got.errors[0:3] + ref.errors[0:3] + 1e-7 * np.linalg.norm(ref.force))
    assert np.linalg.norm(got.force - ref.force) > 1e-9 * np.linalg.norm(ref.force)  # the error is real
