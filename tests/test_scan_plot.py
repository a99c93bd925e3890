"""cli/scan.py plot: no curve through the sweep values where bodies meet, and that region shaded."""

import numpy as np
import pytest

from truepull.cli import scan as scan_cli
from truepull.integrate.scans import ScanResult, ScanRow, Sweep


def test_meeting_spans_reach_halfway_to_the_clear_neighbours():
    x = [0, 5, 10, 15, 20, 25]
    assert scan_cli.meeting_spans(x, [0, 0, 1, 1, 0, 1]) == [(7.5, 17.5), (22.5, 25.0)]
    assert scan_cli.meeting_spans(x, [0] * 6) == []


def test_no_line_is_drawn_where_bodies_meet(monkeypatch):
    values = np.radians(np.arange(-10, 11, 5.0))
    met = [False, True, True, False, False]
    rows = tuple(ScanRow(float(v), float("nan") if m else 1.0, 2.0, float("nan") if m else 3.0, np.zeros(3),
                         0.0, 0.0, 0.0, True, "overlap" if m else "", 4.0) for v, m in zip(values, met))
    result = ScanResult(Sweep("turn", tuple(values), "attractor", None), "pendulum", "attractor", rows, "direct")
    figs = []
    monkeypatch.setattr(scan_cli, "save_figure_atomic", lambda fig, path, **kw: figs.append(fig))
    scan_cli.write_png("x.png", result, np.degrees(values), "deg", "t")
    ax = figs[0].axes
    for a in ax[:2]:
        for line in a.get_lines():
            y = np.asarray(line.get_ydata(), float)
            assert np.all(np.isnan(y[1:3])) and np.all(np.isfinite(y[[0, 3, 4]]))
    shaded = [p for p in ax[0].patches]
    assert len(shaded) == 1
    xs = np.asarray(shaded[0].get_xy(), float).reshape(-1, 2)[:, 0] if not hasattr(shaded[0], 'get_x') else \
        np.array([shaded[0].get_x(), shaded[0].get_x() + shaded[0].get_width()])
    assert min(xs) == -7.5 and max(xs) == 2.5  # halfway to the clear neighbours at -10 and 5 deg


def _figure(monkeypatch, marks=()):
    values = np.radians(np.arange(-60, 61, 10.0))
    rows = tuple(ScanRow(float(v), 3e-11 * np.sin(v), 2.9e-11 * np.sin(v), -4e-11, np.zeros(3),
                         0.0, 0.0, 0.0, True, "", 4.0) for v in values)
    result = ScanResult(Sweep("turn", tuple(values), "attractor", None), "pendulum", "attractor", rows, "direct")
    figs = []
    monkeypatch.setattr(scan_cli, "save_figure_atomic", lambda fig, path, **kw: figs.append(fig))
    scan_cli.write_png("x.png", result, np.degrees(values), "deg", "t", marks)
    return figs[0]


def test_positions_are_marked_where_the_sweep_reaches_them(monkeypatch):
    fig = _figure(monkeypatch, [("A", -40.0), ("B", 40.0), ("far", 170.0)])
    ax = fig.axes[0]
    vertical = [line for line in ax.get_lines() if line.get_label() == "positions" or
                (len(set(line.get_xdata())) == 1 and line.get_linestyle() == ":")]
    assert sorted(float(line.get_xdata()[0]) for line in vertical) == [-40.0, 40.0]  # 170 lies outside
    assert sorted(t.get_text() for t in ax.texts) == ["A", "B"]


def test_legends_sit_outside_the_data_and_units_carry_the_power(monkeypatch):
    fig = _figure(monkeypatch)
    for ax in fig.axes[:2]:
        legend = ax.get_legend()
        assert legend is not None
        # anchored right of the axes (axes fraction x > 1), so it covers no curve
        assert legend.get_bbox_to_anchor().transformed(ax.transAxes.inverted()).x0 >= 1.0
    # 3e-11 N m reads as 30 in units of 10^-12 N m (largest |value| 3e-11: 10^-12 is its power of
    # ten rounded down to a multiple of three, the engineering convention; common practice)
    assert fig.axes[0].get_ylabel() == "torque about the axis (10^-12 N m)"
    assert scan_cli.power_of_ten([0.0, np.nan]) == 0 and scan_cli.power_of_ten([-2.5e-7]) == -9


def test_position_marks_follow_the_scene(tmp_path):
    from truepull.geometry.scene import load_scene_text
    from truepull.integrate.scans import Sweep

    scene = load_scene_text("""
[units]
length = "mm"
angle = "deg"
[[body]]
name = "bob"
group = "pendulum"
shape = "sphere"
radius = 5
density = 1000
at = [20, 0, 0]
[[body]]
name = "ball"
group = "attractor"
shape = "sphere"
radius = 10
density = 1000
at = [60, 0, 0]
[[position]]
name = "near"
group = "attractor"
turn = 30
[[position]]
name = "far"
group = "attractor"
turn = -30
""", "marks.toml")
    sweep = Sweep("turn", (0.0,), "attractor", None)
    marks = dict(scan_cli.position_marks(scene, sweep))
    assert marks == pytest.approx({"near": 30.0, "far": -30.0})
    # a sweep starting from position 'near' sees 'far' 60 degrees back
    assert dict(scan_cli.position_marks(scene, sweep, "near")) == pytest.approx({"near": 0.0, "far": -60.0})
