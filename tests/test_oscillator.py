"""Oscillator relations against references: a simulated damped oscillator (scipy.integrate.solve_ivp),
the exact period of the Duffing oscillator (complete elliptic integral, scipy.special.ellipk), and
an anharmonic oscillator simulated by solve_ivp."""

from __future__ import annotations

import math

import numpy as np
import pytest
from numpy.polynomial import Polynomial
from scipy.integrate import solve_ivp
from scipy.special import ellipk

from truepull.geometry.errors import InputError
from truepull.integrate.balance.oscillator import (fiber_constant_factor, lindstedt_ratio, period_ratio,
                                           undamped_omega_squared)


def _maxima(inertia, damping, stiffness, t_end):
    """Times and values of the maxima of I x'' + c x' + K x = 0 from x = 1 at rest (solve_ivp events)."""
    def top(t, y):
        return y[1]

    top.direction = -1
    sol = solve_ivp(lambda t, y: [y[1], -(damping * y[1] + stiffness * y[0]) / inertia], (0.0, t_end), [1.0, 0.0],
                    method="DOP853", rtol=1e-12, atol=1e-15, events=top)
    return sol.t_events[0], sol.y_events[0][:, 0]


def test_damping_relation_against_a_simulated_damped_oscillator():
    # Reference: solve_ivp of I x'' + c x' + K x = 0; the damped period and the logarithmic decrement
    # read off successive maxima must give back omega0^2 = K / I through the relation.
    inertia, stiffness = 1.4e-4, 6.1e-8
    omega0 = math.sqrt(stiffness / inertia)
    damping = 2 * inertia * 0.02 * omega0          # a few per cent of critical, as in a torsion balance
    times, peaks = _maxima(inertia, damping, stiffness, 8 * 2 * math.pi / omega0)
    times, peaks = times[1:], peaks[1:]            # the start is a maximum too
    period = float(np.mean(np.diff(times)))
    decrement = float(np.mean(np.log(peaks[:-1] / peaks[1:])))
    assert decrement > 0.1                         # damping large enough to matter
    assert undamped_omega_squared(period, decrement) == pytest.approx(stiffness / inertia, rel=1e-9)
    # ignoring it would be wrong by (delta / 2 pi)^2
    assert (2 * math.pi / period) ** 2 / (stiffness / inertia) - 1 == pytest.approx(
        -(decrement / (2 * math.pi)) ** 2 / (1 + (decrement / (2 * math.pi)) ** 2), rel=1e-6)


@pytest.mark.parametrize("beta_a2", [1e-4, 0.05, 0.6])
def test_energy_integral_period_of_the_duffing_oscillator(beta_a2):
    # x'' + x + beta x^3 = 0 at amplitude A: x = A cn(omega t, k), omega^2 = 1 + beta A^2,
    # k^2 = beta A^2 / (2 (1 + beta A^2)), T = 4 K(k) / omega (the Duffing oscillator's exact
    # solution by Jacobi elliptic functions, from memory; K from scipy.special.ellipk)
    a = 0.3
    beta = beta_a2 / a**2
    m = beta_a2 / (2 * (1 + beta_a2))
    exact = 4 * ellipk(m) / math.sqrt(1 + beta_a2) / (2 * math.pi)
    v = Polynomial([0, 0, 0.5, 0, beta / 4])
    pr = period_ratio(v, a)
    assert pr.ratio == pytest.approx(exact, rel=1e-13)
    assert pr.quadrature_error <= 1e-13
    # symmetric potential: turning points at -+A
    assert pr.x_plus == pytest.approx(a, rel=1e-12) and pr.x_minus == pytest.approx(-a, rel=1e-12)
    # Lindstedt-Poincare to second order: T/T0 = 1 / (1 + 3 beta A^2 / 8), off by O(A^4) only
    assert abs(lindstedt_ratio(v, a) - exact) <= 0.5 * beta_a2**2


def test_energy_integral_of_an_asymmetric_oscillator_against_solve_ivp():
    # x'' = -(w^2 x + alpha x^2 + beta x^3): from a turning point at rest, the next maximum
    w2, alpha, beta = 2.0, 0.8, 0.5
    v = Polynomial([0, 0, w2 / 2, alpha / 3, beta / 4])
    pr = period_ratio(v, 0.25)
    dv = v.deriv()

    def top(t, y):
        return y[1]

    top.direction = -1
    t0 = 2 * math.pi / math.sqrt(w2)
    sol = solve_ivp(lambda t, y: [y[1], -dv(y[0])], (0, 1.5 * t0), [pr.x_plus, 0.0], method="DOP853",
                    rtol=1e-13, atol=1e-15, events=top, dense_output=True)
    period = next(t for t in sol.t_events[0] if t > 0.5 * t0)
    assert pr.ratio == pytest.approx(period / t0, rel=1e-11)
    # the other turning point is x_+ - 2A (the amplitude is half their distance)
    lowest = min(sol.sol(np.linspace(0, period, 20001))[0])
    assert lowest == pytest.approx(pr.x_minus, abs=1e-6)
    # second-order Lindstedt-Poincare, omega = omega0 + (3 beta/(8 omega0) - 5 alpha^2/(12 omega0^3)) A^2
    # (Landau and Lifshitz, Mechanics 28; from memory): right to O(A^3) here
    w0 = math.sqrt(w2)
    expected = 1 / (1 + (3 * beta / (8 * w0) - 5 * alpha**2 / (12 * w0**3)) * 0.25**2 / w0)
    assert lindstedt_ratio(v, 0.25) == pytest.approx(expected, rel=1e-14)
    assert abs(lindstedt_ratio(v, 0.25) - pr.ratio) < 0.25**3


def test_a_potential_that_does_not_confine_the_swing_is_refused():
    # V = x^2/2 - x^3: a barrier at x = 1/3, so a swing of 0.5 escapes
    with pytest.raises(InputError) as info:
        period_ratio(Polynomial([0, 0, 0.5, -1.0]), 0.5)
    assert info.value.key == "measurement.amplitude"
    with pytest.raises(InputError):
        period_ratio(Polynomial([0, 0, -0.5]), 0.1)   # a maximum, not a minimum


def test_constant_q_fiber_factor():
    # kappa(omega) / kappa(omega_ref) = 1 + (2 / (pi Q)) ln(omega / omega_ref) (Kjartansson 1979; from memory):
    # one per equal frequencies, and a decade of frequency adds 2 ln(10) / (pi Q)
    assert fiber_constant_factor(2.0, 2.0, 500.0) == 1.0
    assert fiber_constant_factor(10.0, 1.0, 500.0) - 1 == pytest.approx(2 * math.log(10) / (math.pi * 500), rel=1e-14)
    assert fiber_constant_factor(3.0, 1.0, None) == 1.0
