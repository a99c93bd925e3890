"""The torsion pendulum as an oscillator: damping, finite amplitude and the fiber's anelasticity.

SI units: rad, s, rad/s; potentials in J (or J per kg m^2 where the moment of inertia is divided out).

- Damping: for a linear oscillator with viscous damping, x'' + 2 gamma x' + omega0^2 x = 0, the damped
  angular frequency is omega_d^2 = omega0^2 - gamma^2 and the logarithmic decrement per period is
  delta = gamma T_d, so omega0^2 = omega_d^2 (1 + (delta / 2 pi)^2) exactly.
- Finite amplitude: the period of a conservative one-degree-of-freedom oscillator from the energy
  integral T = 2 * integral from x_- to x_+ of dx / sqrt(2 (E - V(x)) / I) (Landau and Lifshitz,
  Mechanics, section 11; from memory), evaluated by Gauss-Chebyshev quadrature once the turning points
  are factored out; beside it the second-order Lindstedt-Poincare frequency shift of
  x'' + omega0^2 x = -alpha x^2 - beta x^3, omega = omega0 + (3 beta / (8 omega0)
  - 5 alpha^2 / (12 omega0^3)) a^2 (Landau and Lifshitz, Mechanics, section 28; from memory).
- Anelasticity: a fiber with a frequency-independent loss angle phi = 1/Q has, by the Kramers-Kronig
  relations, a spring constant that grows with frequency as kappa(omega) = kappa_ref (1 + (2 / (pi Q))
  ln(omega / omega_ref)) (the constant-Q model, Kjartansson 1979, J. Geophys. Res. 84:4737; from
  memory). In time-of-swing this biases G by about 1/(pi Q) (Kuroda 1995, Phys. Rev. Lett.
  75:2796; from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from numpy.polynomial import Polynomial

from truepull.geometry.errors import InputError

TWO_PI = 2.0 * math.pi


def damped_omega_squared(period: float) -> float:
    """omega_d^2 = (2 pi / T)^2 (rad^2/s^2) of an oscillation of period T (s)."""
    if not period > 0:
        raise ValueError("the period must be greater than zero")
    return (TWO_PI / period) ** 2


def undamped_omega_squared(period: float, decrement: float = 0.0) -> float:
    """omega0^2 (rad^2/s^2) from the damped period T (s) and the logarithmic decrement per period:
    omega0^2 = omega_d^2 (1 + (delta / 2 pi)^2) (exact for linear viscous damping)."""
    return damped_omega_squared(period) * (1.0 + (decrement / TWO_PI) ** 2)


def fiber_constant_factor(omega: float, omega_ref: float, fiber_q: float | None) -> float:
    """kappa(omega) / kappa(omega_ref) of a constant-loss-angle fiber: 1 + (2 / (pi Q)) ln(omega /
    omega_ref); 1 when no Q is given."""
    if fiber_q is None:
        return 1.0
    if not fiber_q > 0:
        raise ValueError("the fiber quality factor must be greater than zero")
    return 1.0 + 2.0 / (math.pi * fiber_q) * math.log(omega / omega_ref)


@dataclass(frozen=True)
class PeriodRatio:
    """T(A) / T(0) of a nonlinear oscillator at amplitude A: `ratio` from the energy integral,
    `lindstedt` the second-order Lindstedt-Poincare value, `quadrature_error` an estimate of the
    quadrature's own error (difference of two rules), and the turning points (x_minus, x_plus),
    measured from the equilibrium."""

    ratio: float
    lindstedt: float
    quadrature_error: float
    x_minus: float
    x_plus: float


def _chebyshev_mean(q_of_x, centre: float, half: float, n: int) -> float:
    """(1/pi) * integral of f(x) / sqrt((b - x)(x - a)) over (a, b) for f = 1/sqrt(Q): the mean of f
    at the n Gauss-Chebyshev (first kind) nodes."""
    k = np.arange(1, n + 1)
    x = centre + half * np.cos((2 * k - 1) * math.pi / (2 * n))
    q = q_of_x(x)
    if np.any(~np.isfinite(q)) or np.any(q <= 0):
        return math.nan
    return float(np.mean(1.0 / np.sqrt(q)))


def period_ratio(potential: Polynomial, amplitude: float, nodes: int = 48) -> PeriodRatio:
    """T(A) / T(0) for I x'' = -dV/dx with V a polynomial in x (any consistent units: V per unit
    moment of inertia is fine, the ratio does not depend on I) with its equilibrium at x = 0
    (V'(0) = 0; the constant V(0) is removed here). The amplitude A is half the distance between the turning points,
    x_+ - x_- = 2 A, which equals the first-harmonic amplitude of the swing to second order.

    E - V(x) = (x_+ - x)(x - x_-) Q(x) with Q > 0 smooth, so T = sqrt(2 I) * pi * mean of
    Q^(-1/2) over Gauss-Chebyshev nodes; T(0) = 2 pi sqrt(I / V''(0))."""
    a = float(amplitude)
    if not (a > 0 and math.isfinite(a)):
        raise ValueError("the amplitude must be a positive number")
    v = potential - potential(0.0)
    curvature = float(v.deriv(2)(0.0))
    if not curvature > 0:
        raise InputError(None, "measurement.amplitude",
                         "the torque curve does not hold the pendulum at its equilibrium (no restoring stiffness)")
    # turning points: V(s + A) = V(s - A), the midpoint s in (-A, A)
    g = lambda s: float(v(s + a) - v(s - a))  # noqa: E731 - a one-line root function
    lo, hi = -a * (1 - 1e-12), a * (1 - 1e-12)
    if not (g(lo) < 0 < g(hi)):
        raise InputError(None, "measurement.amplitude",
                         f"an amplitude of {a:.6g} rad swings beyond where the torque curve confines the pendulum")
    from scipy.optimize import brentq  # here, not at import: scipy.optimize is slow to load

    s = brentq(g, lo, hi, xtol=1e-15 * a, rtol=4 * np.finfo(float).eps, maxiter=200)
    x_minus, x_plus = s - a, s + a
    energy = float(v(x_plus))

    def q_of_x(x):
        return (energy - v(x)) / ((x_plus - x) * (x - x_minus))

    mean_n = _chebyshev_mean(q_of_x, s, a, nodes)
    mean_2n = _chebyshev_mean(q_of_x, s, a, 2 * nodes)
    if not (math.isfinite(mean_n) and math.isfinite(mean_2n)):
        raise InputError(None, "measurement.amplitude",
                         f"an amplitude of {a:.6g} rad swings beyond where the torque curve confines the pendulum")
    # T / T0 with I divided out: T = sqrt(2) * pi * mean, T0 = 2 pi / sqrt(V''(0))
    factor = math.sqrt(2.0) * math.pi / (TWO_PI / math.sqrt(curvature))
    ratio = factor * mean_2n
    return PeriodRatio(ratio=ratio, lindstedt=lindstedt_ratio(v, a),
                       quadrature_error=abs(factor * (mean_2n - mean_n)), x_minus=x_minus, x_plus=x_plus)


def lindstedt_ratio(potential: Polynomial, amplitude: float) -> float:
    """T(A) / T(0) to second order in A for the potential's Taylor terms at 0 (per unit inertia):
    V = omega0^2 x^2 / 2 + alpha x^3 / 3 + beta x^4 / 4 + ..., omega = omega0 + (3 beta / (8 omega0)
    - 5 alpha^2 / (12 omega0^3)) A^2."""
    c = np.zeros(5)
    coef = potential.convert().coef
    c[: min(5, coef.size)] = coef[:5]
    w2 = 2.0 * c[2]
    alpha = 3.0 * c[3]
    beta = 4.0 * c[4]
    shift = (3.0 * beta / (8.0 * w2) - 5.0 * alpha**2 / (12.0 * w2**2)) * amplitude**2  # (omega - omega0) / omega0
    return 1.0 / (1.0 + shift)
