"""Interpolation of a long direct sweep through Chebyshev points (integrate/sweep_interpolation.py).

Outside references: the geometric series' sum (a_k = q^k: the tail past M is q^(M+1) / (1 - q));
Newton's law for point masses, computed in each test, for the interleaved scenes' torque and force.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from tests.test_scans import _newton_torque, _rot, _scene
from truepull.integrate.scans import Sweep, scan
from truepull.integrate.sweep_interpolation import MAX_RATE, tail_estimate

VALUES = tuple(math.radians(v) for v in range(41))


def test_tail_of_a_geometric_series_is_its_sum():
    q = 0.5
    a = q ** np.arange(17)
    assert tail_estimate(a, 1e-300) == pytest.approx(q**17 / (1 - q), rel=1e-9)   # geometric series
    assert tail_estimate(0.95 ** np.arange(17), 1e-300) is None and 0.95 > MAX_RATE
    # a series already at the engine's noise in its upper half: the tail is that noise
    b = np.concatenate([q ** np.arange(6), np.full(11, 1e-20)])
    assert tail_estimate(b, 1e-20) == 1e-20


def test_interleaved_turn_is_interpolated_within_its_estimate_of_newton():
    # the pendulum's masses 50 mm from the axis, the attractor's 40 mm: no sphere about the pivot
    # separates them, so the multipole path refuses and the 41 values take the interpolated route
    test = [(0.02, (0.05, 0.0, 0.0)), (0.02, (-0.05, 0.0, 0.0))]
    source = [(1.0, (0.0, 0.04, 0.01)), (1.0, (0.0, -0.04, -0.01))]
    res = scan(_scene(test, source), Sweep("turn", VALUES, "attractor"), workers=1)
    assert res.method == "interpolated" and res.reached and len(res.checks) == 2
    scale = max(abs(r.exact_torque_axis) for r in res.rows)
    for row in res.rows:
        tau, F = _newton_torque(test, source, _rot(row.value))
        assert abs(row.exact_torque_axis - tau) <= row.error_torque_axis
        assert np.linalg.norm(row.force - F) <= row.error_force
        assert row.error_torque_axis <= 1e-9 * scale
    direct = scan(_scene(test, source), Sweep("turn", VALUES, "attractor"), workers=1, interpolate=False)
    assert direct.method == "direct"


def test_a_close_pass_in_the_range_is_integrated_directly():
    # at a 20 deg turn an attractor mass passes 1 mm beside a pendulum mass: the torque is sharply peaked
    # there, its Chebyshev series decays slowly, and every value is integrated directly (checked on Newton)
    r = 0.05
    test = [(0.02, (r, 0.0, 0.0))]
    a = math.radians(-20)
    source = [(1.0, (r * math.cos(a), r * math.sin(a), 0.001))]
    res = scan(_scene(test, source), Sweep("turn", VALUES, "attractor"), workers=1)
    assert res.method == "direct" and any("interpolation in the turn not used" in n for n in res.notes)
    for row in res.rows:
        tau, _ = _newton_torque(test, source, _rot(row.value))
        assert abs(row.exact_torque_axis - tau) <= 1e-12 * abs(tau) + 1e-30
