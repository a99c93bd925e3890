"""Richardson central differences: derivatives against closed-form derivatives, and the error bound
against the true error over steps from rounding-dominated to truncation-dominated."""

from __future__ import annotations

import numpy as np
import pytest

from truepull.integrate import differences


def _derivative(f, x, h, rel_noise=differences.DEFAULT_REL_NOISE):
    x = np.atleast_1d(np.asarray(x, dtype=float))
    h = np.atleast_1d(np.asarray(h, dtype=float))
    pts = differences.stencil_points(x, h)
    vals = np.array([[f(p) for p in row] for row in pts])
    return differences.derivatives(vals, h, f(x), rel_noise)


@pytest.mark.parametrize("h", [1e-9, 1e-6, 1e-3, 1e-2, 0.1, 0.3])
def test_sine_derivative_error_bound_holds_at_every_step(h):
    # closed form: d/dx sin(x) = cos(x)
    x0 = 0.7
    d, err = _derivative(lambda p: np.sin(p[0]), x0, h)
    true_error = abs(d[0] - np.cos(x0))
    assert true_error <= err[0]
    assert err[0] < 0.05 * abs(np.cos(x0))  # even the largest step gives a usable bound


def test_fourth_order_convergence():
    # closed form: d/dx exp(x) = exp(x); halving h cuts a 4th-order error by about 16
    e1 = abs(_derivative(lambda p: np.exp(p[0]), 0.3, 0.1)[0][0] - np.exp(0.3))
    e2 = abs(_derivative(lambda p: np.exp(p[0]), 0.3, 0.05)[0][0] - np.exp(0.3))
    assert 12 < e1 / e2 < 20


def test_gradient_of_several_variables():
    # closed form gradient of f = x0^2 x1 + sin(x2)
    x = np.array([1.5, -2.0, 0.4])
    f = lambda p: p[0] ** 2 * p[1] + np.sin(p[2])  # noqa: E731
    d, err = _derivative(f, x, [1e-3, 1e-3, 1e-3])
    exact = np.array([2 * x[0] * x[1], x[0] ** 2, np.cos(x[2])])
    assert np.all(np.abs(d - exact) <= err)
    assert np.all(err < 1e-6)


def test_default_steps():
    # rule stated in differences.default_steps: max(u/100, 1e-6 |x|), 1e-6 when both vanish
    h = differences.default_steps(np.array([2.0, 5.0, 0.0, 0.0]), np.array([0.1, 0.0, 0.3, 0.0]))
    assert np.allclose(h, [1e-3, 5e-6, 3e-3, 1e-6], rtol=1e-15, atol=0)


def test_noisy_model_widens_the_bound():
    # A model with relative noise 1e-9 (e.g. quadrature to that tolerance): the bound must cover it.
    rng = np.random.default_rng(3)
    f = lambda p: np.exp(p[0]) * (1 + 1e-9 * rng.uniform(-1, 1))  # noqa: E731
    d, err = _derivative(f, 1.0, 1e-4, rel_noise=1e-9)
    assert abs(d[0] - np.e) <= err[0]  # closed form: d/dx exp(x) = exp(x)


def test_second_derivatives_against_calculus_with_a_bound_that_holds():
    # d^2/dx^2 of exp(x) sin(y) / z (calculus): exp sin / z, -exp sin / z, 2 exp sin / z^3
    import math

    from truepull.integrate.differences import OFFSETS, second_derivatives

    x = np.array([0.3, 1.1, 2.5])

    def f(p):
        return math.exp(p[0]) * math.sin(p[1]) / p[2]

    exact = f(x) * np.array([1.0, -1.0, 2.0 / x[2] ** 2])
    for h in (np.array([1e-3, 1e-3, 1e-3]), np.array([0.1, 0.1, 0.1])):
        values = np.array([[f(x + k * h[i] * np.eye(3)[i]) for k in OFFSETS] for i in range(3)])
        d2, err = second_derivatives(values, h, f(x))
        assert np.all(np.abs(d2 - exact) <= err)  # the bound covers the true error
        assert np.all(err <= (1e-6 if h[0] < 0.01 else 1e-2) * np.abs(exact))
