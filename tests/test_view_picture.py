"""cli/view_picture.py and cli/field_plane.py's picture plane: the plane is clipped along the bodies'
true surfaces (not whole grid cells), its colours span the values drawn, the legend lists only what
is drawn, a net force within its error of zero is called so, and the axes carry round ticks."""

import numpy as np
import pytest
import scipy.constants

from truepull.cli import view_picture
from truepull.cli.field_plane import BISECTIONS, SURFACE_MARGIN, sample_field, shown_plane
from truepull.geometry.scene import load_scene_text

TWO_BALLS = """
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
[[body]]
name = "block"
group = "attractor"
shape = "box"
size = [30, 30, 30]
density = 11340
at = [-60, -40, 0]
"""
BALL = np.array([0.060, 0.020, 0.0])


@pytest.fixture(scope="module")
def plane():
    scene = load_scene_text(TWO_BALLS, "two-balls.toml")
    source = scene.group("attractor")
    fp = sample_field(source, scene.bodies, np.zeros(3), "xy", 15, scene.G.value, 1e-8)
    return scene, source, fp, shown_plane(fp, source, scene.G.value)


def test_clipped_plane_stops_at_the_bodies_true_surfaces(plane):
    _, _, fp, shown = plane
    pts = np.asarray(shown.points)
    margin = SURFACE_MARGIN * fp.spacing
    tol = fp.spacing * 2.0 ** -BISECTIONS * 4
    # ball: the exact inside test |x - c| <= R (closed form); nothing drawn inside, and the cut
    # points lie on the sphere grown by the masking margin, to the bisection's tolerance
    r = np.linalg.norm(pts - BALL, axis=1)
    assert np.all(r >= 0.025 + margin - tol)
    on_ball = np.abs(r - 0.025 - margin) <= tol
    assert on_ball.sum() >= 8  # a staircase of whole cells would put no point on this circle
    # box: inside when every |x_i - c_i| <= 15 mm (closed form), centre (-60, -40, 0) mm
    q = np.abs(pts - np.array([-0.060, -0.040, 0.0]))
    assert not np.any(np.all(q < 0.015 + margin - tol, axis=1))
    on_box = np.abs(np.max(q[:, :2], axis=1) - 0.015 - margin) <= tol
    assert on_box.sum() >= 8


def test_cut_points_carry_newtons_field(plane):
    scene, _, fp, shown = plane
    pts = np.asarray(shown.points)
    mag = np.asarray(shown.point_data["g_magnitude"])
    assert np.all(np.isfinite(mag))
    # the ball's share at its cut points: outside a uniform sphere g is a point mass's, G M / r^2
    # (Newton's shell theorem, closed form); the sampled total includes the box's pull as well
    from truepull.integrate.interaction import group_field

    r = np.linalg.norm(pts - BALL, axis=1)
    near = np.abs(r - 0.025 - SURFACE_MARGIN * fp.spacing) < 1e-9
    assert near.sum() >= 8
    ball = [b for b in scene.bodies if b.name == "ball"]
    _, g, _, err = group_field(ball, pts[near], scene.G.value, 1e-10)
    M = 11340.0 * 4.0 / 3.0 * np.pi * 0.025**3
    newton = scipy.constants.G * M / r[near] ** 2
    np.testing.assert_allclose(np.linalg.norm(g, axis=1), newton, rtol=1e-9)


def test_colour_scale_spans_the_values_drawn(plane):
    import pyvista as pv

    _, _, fp, shown = plane
    plotter = pv.Plotter(off_screen=True)
    try:
        info = view_picture.add_field(plotter, shown, fp, 1e-3)
    finally:
        plotter.close()
    mag = np.asarray(shown.point_data["g_magnitude"])
    assert info["min"] == mag.min() and info["max"] == mag.max()
    # the cut points at the surfaces pull harder than any grid point left whole
    assert info["max"] > np.nanmax(fp.g_magnitude)


class _Body:
    def __init__(self, group, is_hole=False):
        self.group, self.is_hole = group, is_hole


def test_legend_lists_only_what_is_drawn():
    colours = view_picture.group_colours(["pendulum", "attractor", "stand"])
    bodies = [_Body("pendulum"), _Body("attractor"), _Body("stand", is_hole=True)]
    entries = view_picture.legend_entries(colours, bodies, [["torque about pivot", "#6A3D9A"]])
    assert [e[0] for e in entries] == ["pendulum (group)", "attractor (group)", "hole / void",
                                       "torque about pivot"]


def test_a_force_within_its_error_of_zero_is_zero():
    assert view_picture.zero_within_error([1e-25, 0, 0], [1e-21, 1e-21, 0])
    assert not view_picture.zero_within_error([3e-12, 0, 0], [1e-18, 0, 0])


@pytest.mark.parametrize("lo, hi", [(-143.3, 143.2), (-50.0, 48.6), (0.0013, 0.0191)])
def test_axis_ticks_are_round_and_hug_the_range(lo, hi):
    t0, t1, count = view_picture.nice_ticks(lo, hi)
    slack = view_picture.TICK_OVERSHOOT * (hi - lo)
    assert lo - slack <= t0 < t1 <= hi + slack and 3 <= count <= 8
    assert (t1 - t0) > 0.5 * (hi - lo)  # the axes still span most of what is drawn
    step = (t1 - t0) / (count - 1)
    mantissa = step / 10.0 ** np.floor(np.log10(step))
    # round steps: 1, 2, 2.5 or 5 times a power of ten (common practice for axis labels)
    assert min(abs(mantissa - m) for m in (1.0, 2.0, 2.5, 5.0, 10.0)) < 1e-9
    assert abs(t0 / step - round(t0 / step)) < 1e-9
