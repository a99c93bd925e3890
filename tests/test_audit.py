"""Scene warnings for likely mistakes (geometry/audit.py, geometry/moves.py): densities no solid has,
meshes read in the wrong unit, moves between positions that drive bodies through each other."""

import math

import numpy as np
import pytest
import trimesh

from scene_fixtures import DENSITY_IN_WRONG_UNIT, MASS_IN_WRONG_UNIT, PATH_THROUGH_BOB, mesh_scene
from truepull.geometry.audit import scene_warnings
from truepull.geometry.moves import path_meetings, shorter_turn
from truepull.geometry.overlaps import bodies_overlap
from truepull.geometry.placement import Placement
from truepull.geometry.scene import load_scene

SUSPECT = ("not a solid's", "file_units look wrong", "on the way from")


def _scene(tmp_path, text):
    p = tmp_path / "scene.toml"
    p.write_text(text)
    return load_scene(p)


def test_density_written_in_kg_per_m3_in_a_g_per_cm3_scene(tmp_path):
    scene = _scene(tmp_path, DENSITY_IN_WRONG_UNIT)
    # 8960 g/cm^3 = 8.96e6 kg/m^3: beyond osmium's 22590 kg/m^3 (CRC Handbook of Chemistry
    # and Physics, table of the elements' densities; value from memory, edition not checked)
    assert scene.body("copper").density == pytest.approx(8.96e6)
    w = [x for x in scene_warnings(scene, overlaps=False) if "not a solid's" in x]
    assert len(w) == 1 and w[0].startswith("copper:")
    assert "8.96e+06 kg/m^3" in w[0] and "the number 8960 fits kg/m^3, not g/cm^3" in w[0]


def test_mass_written_in_kg_for_grams(tmp_path):
    scene = _scene(tmp_path, MASS_IN_WRONG_UNIT)
    rho = 50.0 / (math.pi * 0.010**2 * 0.020)  # closed form: m / (pi r^2 L) = 7.96e6 kg/m^3
    assert abs(scene.body("bob").density) == pytest.approx(rho, rel=1e-12)
    w = [x for x in scene_warnings(scene, overlaps=False) if "not a solid's" in x]
    assert len(w) == 1 and w[0].startswith("bob:") and "fits g, not kg" in w[0]


def test_mesh_read_in_metres_though_drawn_in_mm(tmp_path):
    trimesh.creation.box(extents=(60.0, 40.0, 30.0)).export(tmp_path / "block.stl")
    wrong = _scene(tmp_path, mesh_scene("block.stl", "m"))
    w = [x for x in scene_warnings(wrong, overlaps=False) if "file_units" in x]
    assert len(w) == 1 and w[0].startswith("block:") and "60 m across" in w[0]
    assert 'file_units = "mm"' in w[0]
    right = _scene(tmp_path, mesh_scene("block.stl", "mm"))
    assert not [x for x in scene_warnings(right, overlaps=False) if any(s in x for s in SUSPECT)]


def test_shorter_turn():
    assert shorter_turn(0.0, math.radians(350)) == pytest.approx(math.radians(-10))
    assert shorter_turn(math.radians(-120), math.radians(90)) == pytest.approx(math.radians(-150))


def _brute_force_turns(scene, a_name, b_name, t0, t1, n=4001):
    """Turns (rad) on the straight path t0 -> t1 where the two bodies overlap, by fine sampling."""
    a, b = scene.body(a_name), scene.body(b_name)
    hits = []
    for t in np.linspace(t0, t1, n):
        if bodies_overlap(a.moved(Placement.turn_about(scene.frame.pivot, scene.frame.axis, t)), b) == "overlap":
            hits.append(t)
    return hits


def test_move_between_clear_positions_through_a_pendulum_body(tmp_path):
    scene = _scene(tmp_path, PATH_THROUGH_BOB)
    warnings = scene_warnings(scene)
    assert not [w for w in warnings if " at position " in w]  # each position alone is clear
    meets = path_meetings(scene)
    assert [(m.start, m.end, m.moving, m.other, m.kind) for m in meets] == [("A", "B", "ball", "bob", "overlap")]
    # brute force: fine sampling of the overlap test along A -> B and along B -> C the shorter way
    hits = _brute_force_turns(scene, "ball", "bob", math.radians(-60), math.radians(-120))
    assert hits and not _brute_force_turns(scene, "ball", "bob", math.radians(-120), math.radians(-270), 2001)
    # closed form: the balls (radii 10 and 15 mm, both 100 mm from the axis) meet where
    # 2 * 100 * sin(|90 deg + turn| / 2) < 25, i.e. turns within 14.36 deg of -90 deg
    edge = 2 * math.degrees(math.asin(25 / 200))
    assert math.degrees(max(hits)) == pytest.approx(-90 + edge, abs=0.05)
    first = math.degrees(meets[0].turn)
    assert -90 - edge <= first <= -90 + edge
    text = [w for w in warnings if "on the way from position A to B" in w]
    assert len(text) == 1 and "ball (attractor) and bob (pendulum)" in text[0]


def test_no_false_warnings_on_the_demo():
    from truepull.shapes import demo_path

    warnings = scene_warnings(load_scene(demo_path()))
    assert not [w for w in warnings if any(s in w for s in SUSPECT)], warnings


def test_overlaps_at_a_position_are_those_of_the_moved_scene():
    # reference: the scene moved to position B (the attractor shifted into the pendulum) and every pair
    # of a moved and an unmoved body tested (brute force over all pairs, no candidate search)
    from scene_fixtures import grid_scene
    from truepull.geometry.audit import _overlaps_at
    from truepull.geometry.overlaps import bounding_spheres
    from truepull.geometry.scene import load_scene_text

    scene = load_scene_text(grid_scene(64, "shift = [-245, 0, 0]"), "grid.toml")
    pos = scene.get_position("B")
    moved = scene.at_position(pos)
    expected = []
    for i, a in enumerate(moved.bodies):
        for b in moved.bodies[i + 1:]:
            if (a.group == pos.group) != (b.group == pos.group):
                kind = bodies_overlap(a, b)
                if kind is not None:
                    expected.append((a, b, kind) if a.group == pos.group else (b, a, kind))
    found = _overlaps_at(scene, pos, bounding_spheres(scene.bodies))
    assert len(expected) > 10
    assert [(a.name, b.name, k) for a, b, k in found] == [(a.name, b.name, k) for a, b, k in expected]
    assert all(np.allclose(a.placement.translation, next(m for m in moved.bodies if m.name == a.name)
                           .placement.translation, rtol=0, atol=1e-15) for a, _, _ in found)
