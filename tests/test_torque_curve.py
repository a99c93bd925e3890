"""Torque curves of a turned pendulum: engine samples against Newton's law for spheres, and the
Hermite interpolant against its remainder bound (the Hermite interpolation error theorem, e.g. Burden
and Faires, Numerical Analysis, 9th ed., sec. 3.4; from memory)."""

from __future__ import annotations

import math

import numpy as np
import pytest

import synthetic_balance as sb
from truepull.geometry.quantities import Measured
from truepull.geometry.scene import load_scene_text
from truepull.integrate.balance.torque_curve import PoseSample, TorqueCurve, plan_nodes, sample_curve, sample_pose


@pytest.fixture(autouse=True, scope="module")
def one_numba_thread():
    """Single-point kernels only: one thread spares OpenMP start-up on a busy machine (same results)."""
    import numba

    before = numba.get_num_threads()
    numba.set_num_threads(1)
    yield
    numba.set_num_threads(before)


def _scene_per_unit_g():
    from dataclasses import replace

    text = sb.scene_text({"A": sb.PSI_A, "B": sb.PSI_B}, 'method = "deflection"\nangle = { A = 0, B = 1 }\nperiod = 300\n')
    return replace(load_scene_text(text), G=Measured(1.0))


@pytest.mark.parametrize("position, psi, theta", [("A", sb.PSI_A, 0.0), ("A", sb.PSI_A, 0.004),
                                                   ("B", sb.PSI_B, -0.02)])
def test_turned_pendulum_of_spheres_is_newton(position, psi, theta):
    # Reference: Newton's law for the four sphere pairs (shell theorem), written out in synthetic_balance,
    # its stiffness by mpmath.diff
    s = sample_pose(_scene_per_unit_g(), position, theta)
    assert s.torque == pytest.approx(sb.torque(theta, psi, G=1.0), rel=1e-13)
    assert s.stiffness == pytest.approx(sb.stiffness(theta, psi, G=1.0), rel=1e-12)
    assert s.energy == pytest.approx(sb.energy(theta, psi, G=1.0), rel=1e-13)
    assert s.reached and s.torque_error <= 1e-12 * abs(s.torque)


def test_curve_through_engine_samples_matches_newton_between_them():
    # a cubic through two samples 6 mrad apart: exact at them, within the Hermite remainder
    # f^(4) / 4! theta^2 (theta - h)^2 (a few 1e-11 here) between them
    curve = sample_curve(_scene_per_unit_g(), "A", (0.0, 0.006))
    for theta in (0.0, 0.006):
        assert float(curve.torque(theta)) == pytest.approx(sb.torque(theta, sb.PSI_A, G=1.0), rel=1e-13)
        assert float(curve.stiffness(theta)) == pytest.approx(sb.stiffness(theta, sb.PSI_A, G=1.0), rel=1e-12)
    for theta in (0.001, 0.003, 0.0065):
        assert float(curve.torque(theta)) == pytest.approx(sb.torque(theta, sb.PSI_A, G=1.0), rel=1e-10)
        assert float(curve.stiffness(theta)) == pytest.approx(sb.stiffness(theta, sb.PSI_A, G=1.0), rel=1e-7)


def test_hermite_interpolant_obeys_its_remainder_bound():
    # f = sin: samples of value and slope; the Hermite remainder is f^(2m)(xi) / (2m)! prod (x - x_k)^2
    # with |f^(2m)| <= 1 (Hermite interpolation error theorem, Burden and Faires, Numerical Analysis, 9th
    # ed., sec. 3.4; from memory)
    nodes = (-0.3, 0.1, 0.4)
    samples = tuple(PoseSample(t, math.sin(t), -math.cos(t), 0.0, 0.0, 0.0, True) for t in nodes)
    curve = TorqueCurve("x", samples)
    x = np.linspace(-0.4, 0.5, 41)
    bound = np.prod([(x - t) ** 2 for t in nodes], axis=0) / math.factorial(2 * len(nodes))
    assert np.all(np.abs(curve.torque(x) - np.sin(x)) <= bound + 1e-15)
    # exact at the samples, value and slope (stiffness = -slope)
    for t in nodes:
        assert float(curve.torque(t)) == pytest.approx(math.sin(t), abs=1e-15)
        assert float(curve.stiffness(t)) == pytest.approx(-math.cos(t), abs=1e-14)
    # the same polynomial about another origin
    shifted = curve.about(0.2)
    assert shifted(0.05) == pytest.approx(float(curve.torque(0.25)), abs=1e-15)


def test_plan_drops_samples_that_are_too_close():
    assert plan_nodes([0.003, 0.0, 0.0030000000001], 1e-9) == (0.0, 0.003)
    assert plan_nodes([0.0, -0.01, 0.01, 0.0005], 1e-3) == (-0.01, 0.0, 0.01)
