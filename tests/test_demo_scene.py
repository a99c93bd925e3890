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
    assert all(b.shape.kind == "sphere" for b in scene.group("attractor"))
    # stated uncertainties reach the bodies' specs
    assert scene.body("bob-east").spec.size["radius"].u is not None
    assert scene.positions[0].turn.u is not None


def test_demo_check_has_no_overlap_or_touch_warnings():
    scene = load_scene(demo_path())
    warnings = scene_warnings(scene)
    assert not [w for w in warnings if "overlap" in w or "touch" in w or "hole" in w], warnings


def test_the_attractor_clears_the_bobs_by_about_seven_mm_at_every_turn():
    # an upright cylinder and a sphere whose centre lies within the cylinder's height: the gap is the
    # distance from the sphere's centre to the cylinder's axis minus the two radii (plane geometry,
    # from memory); here 95 - 52 - 6 - 30 = 7 mm at the closest turn
    scene = load_scene(demo_path())
    gaps = []
    for turn in np.radians(np.arange(0.0, 360.0, 0.5)):
        moved = scene.at_position("far")
        rot = moved.frame.turn(turn)
        for bob, mass in itertools.product(("bob-east", "bob-west"), ("mass-north", "mass-south")):
            a, b = moved.body(bob), moved.body(mass)
            c = rot.apply(b.com[None, :])[0]
            assert abs(c[2] - a.com[2]) < a.shape.length / 2
            gaps.append(np.linalg.norm((a.com - c)[:2]) - a.shape.radius - b.shape.radius)
    assert 6.9e-3 < min(gaps) < 7.1e-3


def test_a_turn_scan_of_the_demo_may_use_the_multipole_series():
    # the pendulum's reach is its bobs' outer edge, hypot(52 + 6, 6) mm, and the spheres come within
    # 95 - 30 mm of the pivot (plane geometry); for the series' convergence a sphere's outer moments
    # are a point's at its centre (mean-value property), 95 mm from the pivot
    from truepull.integrate.multipoles import outer_clearance, regions

    scene = load_scene(demo_path())
    sep = regions(scene.group("pendulum"), scene.group("attractor"), scene.frame.pivot)
    assert sep.ok
    assert abs(sep.inner_radius - np.hypot(58e-3, 6e-3)) < 1e-9
    assert abs(sep.outer_radius - 65e-3) < 1e-9
    for mass in scene.group("attractor"):
        assert abs(outer_clearance(mass, scene.frame.pivot) - 95e-3) < 1e-12


def test_check_cli_passes_on_the_demo():
    out = subprocess.run([sys.executable, "-m", "truepull.cli.main", "check", str(demo_path())],
                         capture_output=True, text=True, timeout=300)
    assert out.returncode == 0, out.stderr
    assert "overlap" not in out.stdout and "touch" not in out.stdout


def test_a_full_turn_of_the_demo_by_multipoles_matches_direct_integration():
    # reference: the engine's direct integration of every pair (itself checked against outside
    # references in test_pairs.py), at 12 turns; agreement within the two error estimates and 1e-9
    from truepull.integrate.scans import Sweep, scan

    scene = load_scene(demo_path())
    values = tuple(np.radians(np.arange(0.0, 360.0, 30.0) + 7.0))
    fast = scan(scene, Sweep("turn", values, "attractor"), workers=1)
    slow = scan(scene, Sweep("turn", values, "attractor"), workers=1, multipoles=False)
    assert fast.method == "multipole" and slow.method == "direct"
    big = max(abs(r.exact_torque_axis) for r in slow.rows)
    for f, s in zip(fast.rows, slow.rows):
        diff = abs(f.exact_torque_axis - s.exact_torque_axis)
        assert diff <= f.error_torque_axis + s.error_torque_axis
        assert diff <= 1e-9 * big
        assert abs(f.exact_stiffness_axis - s.exact_stiffness_axis) <= f.error_stiffness_axis + s.error_stiffness_axis
