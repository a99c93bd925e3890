"""cli/scan.py plot: no curve through the sweep values where bodies meet, and that region shaded."""

import numpy as np

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
