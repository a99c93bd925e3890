"""The built-in demo scene (shapes/demo.toml) loads, validates cleanly and keeps its promises."""

import itertools
import subprocess
import sys

import numpy as np

from truepull.geometry.audit import scene_warnings
from truepull.geometry.scene import load_scene
from truepull.shapes import demo_path, demo_run_path


def test_demo_files_are_installed_beside_each_other():
    assert demo_path().name == "demo.toml" and demo_path().is_file()
    assert demo_path().with_name("bracket.stl").is_file()
    assert demo_run_path().is_file()


def test_demo_has_the_promised_groups_positions_and_parts():
    scene = load_scene(demo_path())
    assert scene.groups() == ("pendulum", "attractor", "stand")
    assert [p.name for p in scene.positions] == ["A", "B", "far"]
    kinds = {b.shape.kind for b in scene.group("pendulum")}
    assert {"box", "cylinder", "mesh"} <= kinds
    assert any(b.is_hole for b in scene.group("pendulum"))
    assert all(b.shape.kind == "cylinder" for b in scene.group("attractor"))
    # stated uncertainties reach the bodies' specs
    assert scene.body("bob-east").spec.size["radius"].u is not None
    assert scene.positions[0].turn.u is not None


def test_demo_check_has_no_overlap_or_touch_warnings():
    scene = load_scene(demo_path())
    warnings = scene_warnings(scene)
    assert not [w for w in warnings if "overlap" in w or "touch" in w or "hole" in w], warnings


def test_bobs_clear_the_attractor_by_about_five_mm_at_a_and_b():
    # upright cylinders with overlapping heights: the gap is the distance between axes minus the radii
    # (plane geometry, from memory), here for bob radius 6 mm and attractor radius 25 mm
    scene = load_scene(demo_path())
    for pos in ("A", "B"):
        moved = scene.at_position(pos)
        gaps = []
        for bob, mass in itertools.product(("bob-east", "bob-west"), ("mass-north", "mass-south")):
            a, b = moved.body(bob), moved.body(mass)
            d = np.linalg.norm((a.com - b.com)[:2])
            gaps.append(d - a.shape.radius - b.shape.radius)
        assert 4.5e-3 < min(gaps) < 5.5e-3


def test_check_cli_passes_on_the_demo():
    out = subprocess.run([sys.executable, "-m", "truepull.cli.main", "check", str(demo_path())],
                         capture_output=True, text=True, timeout=300)
    assert out.returncode == 0, out.stderr
    assert "overlap" not in out.stdout and "touch" not in out.stdout
