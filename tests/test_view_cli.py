"""`truepull view`: the off-screen picture shows the bodies in their group colours, the VTK file holds
the engine's own field values (and Newton's for a sphere), masking, JSON summary, and clean failures."""

import json
import os
import subprocess
import sys

import matplotlib.colors as mcolors
import numpy as np
import pytest
import scipy.constants

from truepull.cli.main import main
from truepull.cli.view_picture import GROUP_COLOURS

SCENE = """
[scene]
title = "view test"
[units]
length = "mm"
[[body]]
name = "bob-east"
group = "pendulum"
shape = "sphere"
radius = 10
density = 19000
at = [50, 0, 0]
[[body]]
name = "bob-west"
group = "pendulum"
shape = "sphere"
radius = 10
density = 19000
at = [-50, 0, 0]
[[body]]
name = "beam"
group = "pendulum"
shape = "box"
size = [80, 6, 6]
density = 2700
[[body]]
name = "ball"
group = "attractor"
shape = "sphere"
radius = 30
density = 11000
at = [-60, -70, 0]
[[body]]
name = "block"
group = "attractor"
shape = "box"
size = [40, 40, 50]
density = 11000
at = [60, 70, 0]
[[position]]
name = "far"
group = "attractor"
turn = 90
"""

SPHERE_ONLY = """
[units]
length = "mm"
[[body]]
name = "bob"
group = "pendulum"
shape = "sphere"
radius = 8
density = 19000
at = [0, 0, 0]
[[body]]
name = "ball"
group = "attractor"
shape = "sphere"
radius = 25
density = 11340
at = [60, 20, 0]
"""

PROBE = """
from truepull.cli.offscreen import prepare_offscreen
prepare_offscreen()
import pyvista as pv
p = pv.Plotter(off_screen=True, window_size=(64, 64))
p.add_mesh(pv.Sphere(), color="red")
img = p.screenshot(None, return_img=True)
assert img.std() > 0, "blank picture"
"""


@pytest.fixture(scope="module")
def can_render():
    """Off-screen drawing works here (probed in a child process, since a VTK without EGL/OSMesa may crash)."""
    env = {k: v for k, v in os.environ.items() if k != "DISPLAY"}
    try:
        r = subprocess.run([sys.executable, "-c", PROBE], capture_output=True, text=True, timeout=180, env=env)
    except subprocess.TimeoutExpired:
        pytest.skip("off-screen rendering probe timed out")
    if r.returncode != 0:
        last = (r.stderr.strip().splitlines() or ["no message"])[-1]
        pytest.skip(f"VTK cannot draw off-screen on this machine: {last}")
    return True


@pytest.fixture
def headless(monkeypatch):
    """No display (so no window opens) and VTK's window choice restored after the test."""
    monkeypatch.delenv("DISPLAY", raising=False)
    monkeypatch.delenv("WAYLAND_DISPLAY", raising=False)
    monkeypatch.delenv("VTK_DEFAULT_OPENGL_WINDOW", raising=False)


def write_scene(tmp_path, text=SCENE):
    path = tmp_path / "scene.toml"
    path.write_text(text)
    return path


def run(args, capsys):
    code = main(args)
    out, err = capsys.readouterr()
    return code, out, err


def hue_pixels(image, colour, exclude=None, tol_deg=8.0):
    """Pixels whose hue is within tol of `colour`'s and which are clearly coloured (not grey, not black)."""
    hsv = mcolors.rgb_to_hsv(image[..., :3].astype(float) / 255.0)
    h = mcolors.rgb_to_hsv(np.array(mcolors.to_rgb(colour)))[0]
    d = np.abs(hsv[..., 0] - h)
    d = np.minimum(d, 1.0 - d)
    hit = (d < tol_deg / 360.0) & (hsv[..., 1] > 0.35) & (hsv[..., 2] > 0.15)
    if exclude is not None:
        hit[exclude] = False
    return int(hit.sum())


def test_png_shows_the_bodies_in_group_colours(tmp_path, capsys, can_render, headless):
    from PIL import Image

    png = tmp_path / "view.png"
    code, out, err = run(["view", str(write_scene(tmp_path)), "--png", str(png), "--grid", "21", "--json"], capsys)
    assert code == 0, err
    summary = json.loads(out)
    assert summary["files"]["png"] == str(png)
    image = np.asarray(Image.open(png).convert("RGB"))
    h, w, _ = image.shape
    background = np.all(image == 255, axis=2)
    # not blank: a good part of the picture is drawn (the field plane alone covers about a fifth of it,
    # framed with the axes, which end on round ticks a little past the plane)
    assert (~background).mean() > 0.15
    # the bodies show in their group colours, outside the legend box in the upper left corner
    legend = np.zeros((h, w), dtype=bool)
    legend[: int(0.3 * h), : int(0.35 * w)] = True
    assert summary["colours"] == {"pendulum": GROUP_COLOURS["pendulum"], "attractor": GROUP_COLOURS["attractor"]}
    for group, colour in summary["colours"].items():
        assert hue_pixels(image, colour, exclude=legend) > 1500, group
    # no temporary file left beside the picture
    assert sorted(p.name for p in tmp_path.iterdir()) == ["scene.toml", "view.png"]


def test_without_the_attractor_its_colour_is_absent(tmp_path, capsys, can_render, headless):
    """The colour check can fail: a scene whose attractor is far off-plane and tiny shows almost none."""
    from PIL import Image

    text = SCENE.replace('radius = 30\ndensity = 11000\nat = [-60, -70, 0]', 'radius = 0.5\ndensity = 11000\nat = [-60, -70, 0]')
    text = text.replace('size = [40, 40, 50]', 'size = [1, 1, 1]')
    png = tmp_path / "view.png"
    code, _, err = run(["view", str(write_scene(tmp_path, text)), "--png", str(png), "--grid", "15"], capsys)
    assert code == 0, err
    image = np.asarray(Image.open(png).convert("RGB"))
    h, w, _ = image.shape
    legend = np.zeros((h, w), dtype=bool)
    legend[: int(0.3 * h), : int(0.35 * w)] = True
    assert hue_pixels(image, GROUP_COLOURS["attractor"], exclude=legend) < 300
    assert hue_pixels(image, GROUP_COLOURS["pendulum"], exclude=legend) > 1500


def read_vtm(path):
    import pyvista as pv

    mb = pv.read(str(path))
    return mb["bodies"], mb["field"], mb


def test_vtk_field_is_the_engines_and_newtons(tmp_path, capsys, headless):
    from truepull.geometry.scene import load_scene
    from truepull.integrate.interaction import group_field

    scene_path = write_scene(tmp_path, SPHERE_ONLY)
    vtm = tmp_path / "out" / "view.vtm"
    code, out, err = run(["view", str(scene_path), "--vtk", str(vtm), "--grid", "17", "--json"], capsys)
    assert code == 0, err
    summary = json.loads(out)
    bodies, field, _ = read_vtm(vtm)
    assert set(bodies.keys()) == {"bob", "ball"}
    pts = np.asarray(field.points)
    g = np.asarray(field.point_data["g"])
    masked = np.asarray(field.point_data["masked"]).astype(bool)
    assert len(pts) == 17 * 17 and summary["samples"] == int((~masked).sum())
    assert np.all(np.isnan(g[masked])) and np.all(np.isfinite(g[~masked]))
    # the engine's own values at the same points
    scene = load_scene(scene_path)
    _, g_engine, _, _ = group_field(scene.group("attractor"), pts[~masked], scene.G.value, 1e-6)
    np.testing.assert_allclose(g[~masked], g_engine, rtol=1e-12, atol=0)
    # and Newton's: outside a uniform sphere its field is a point mass's (shell theorem)
    M = 11340.0 * 4.0 / 3.0 * np.pi * 0.025**3
    d = pts[~masked] - np.array([0.060, 0.020, 0.0])
    r = np.linalg.norm(d, axis=1, keepdims=True)
    newton = -scipy.constants.G * M * d / r**3
    np.testing.assert_allclose(g[~masked], newton, rtol=1e-10)
    # masking: every point inside the ball is masked; every unmasked point is outside it
    r_all = np.linalg.norm(pts - np.array([0.060, 0.020, 0.0]), axis=1)
    assert np.all(masked[r_all <= 0.025]) and np.all(r_all[~masked] > 0.025)
    # the pendulum's body is not a source: points inside it are kept
    assert not np.all(masked[np.linalg.norm(pts, axis=1) < 0.008])
    # JSON summary agrees with the file
    mag = np.linalg.norm(g[~masked], axis=1)
    assert summary["field"]["min"] == pytest.approx(mag.min(), rel=1e-12)
    assert summary["field"]["max"] == pytest.approx(mag.max(), rel=1e-12)
    assert "png" not in summary["files"]


def test_vtk_holds_bodies_and_the_pull(tmp_path, capsys, headless):
    import trimesh

    from truepull.integrate.interaction import compare_groups
    from truepull.geometry.scene import load_scene

    scene_path = write_scene(tmp_path)
    vtm = tmp_path / "v.vtm"
    code, out, err = run(["view", str(scene_path), "--vtk", str(vtm), "--grid", "9", "--position", "far",
                          "--json"], capsys)
    assert code == 0, err
    bodies, field, mb = read_vtm(vtm)
    # each body's surface is closed; a box is drawn exactly: volume a b c (elementary)
    block = bodies["block"]
    tm = trimesh.Trimesh(np.asarray(block.points), block.faces.reshape(-1, 4)[:, 1:], process=False)
    assert tm.is_watertight and tm.volume == pytest.approx(0.040 * 0.040 * 0.050, rel=1e-12)
    # at position "far" the attractor is turned 90 degrees about z: (60, 70) mm -> (-70, 60) mm
    np.testing.assert_allclose(tm.center_mass, [-0.070, 0.060, 0.0], atol=1e-12)
    assert str(bodies["block"].field_data["group"][0]) == "attractor"
    scene = load_scene(scene_path)
    c = compare_groups(scene, "pendulum", "attractor", "far", 1e-6)
    np.testing.assert_allclose(np.asarray(mb["force"].point_data["force"])[0], c.exact.force, rtol=1e-12)
    np.testing.assert_allclose(np.asarray(mb["torque"].point_data["torque"])[0], c.exact.torque, rtol=1e-12,
                               atol=1e-30)


def test_vtm_rewritten_whole(tmp_path, capsys, headless):
    scene_path = write_scene(tmp_path, SPHERE_ONLY)
    vtm = tmp_path / "v.vtm"
    for grid in ("9", "7"):
        code, _, err = run(["view", str(scene_path), "--vtk", str(vtm), "--grid", grid], capsys)
        assert code == 0, err
    _, field, _ = read_vtm(vtm)
    assert field.n_points == 49
    assert sorted(p.name for p in tmp_path.iterdir()) == ["scene.toml", "v", "v.vtm"]


def one_line(err):
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    return lines[0]


def test_no_display_and_no_file_is_refused(tmp_path, capsys, headless):
    code, out, err = run(["view", str(write_scene(tmp_path))], capsys)
    assert code == 2 and out == ""
    assert "--png" in one_line(err)


@pytest.mark.parametrize("extra, key", [
    (["--position", "nowhere"], "position"),
    (["--grid", "2", "--vtk", "x.vtm"], "--grid"),
    (["--png", "x.jpg"], "--png"),
    (["--vtk", "x.vtp"], "--vtk"),
    (["--source", "table", "--vtk", "x.vtm"], "group"),
])
def test_bad_options_exit_2_with_one_line(tmp_path, capsys, headless, extra, key):
    code, out, err = run(["view", str(write_scene(tmp_path)), *extra], capsys)
    assert code == 2 and out == ""
    assert key in one_line(err)


def test_vtm_folder_holding_other_files_is_not_clobbered(tmp_path, capsys, headless):
    (tmp_path / "v").mkdir()
    (tmp_path / "v" / "notes.txt").write_text("mine")
    code, _, err = run(["view", str(write_scene(tmp_path, SPHERE_ONLY)), "--vtk", str(tmp_path / "v.vtm")], capsys)
    assert code == 2 and "notes.txt" in one_line(err)
    assert (tmp_path / "v" / "notes.txt").read_text() == "mine"


def test_no_renderer_fails_with_one_line(tmp_path, capsys, headless, monkeypatch):
    import ctypes.util

    monkeypatch.setattr(ctypes.util, "find_library", lambda name: None)
    png = tmp_path / "x.png"
    code, out, err = run(["view", str(write_scene(tmp_path, SPHERE_ONLY)), "--png", str(png), "--grid", "5"], capsys)
    assert code == 1 and not png.exists()
    assert "cannot draw off-screen" in one_line(err)
