"""The second-order terms of the pendulum's equation of motion at each position, from the exact torque curve.

Expanding the total torque about the equilibrium theta_e (x = theta - theta_e, G Gamma(theta) the
gravitational torque, the fiber linear): I x'' = -k x + G Gamma''(theta_e) x^2 / 2 + G Gamma'''(theta_e)
x^3 / 6 + ..., so in x'' + omega0^2 x + alpha x^2 + beta x^3 = 0 (run_fit's model)
alpha = -G Gamma'' / (2 I) (1/(rad s^2)) and beta = -G Gamma''' / (6 I) (1/(rad^2 s^2)).
Gamma is the Hermite curve through engine samples at theta_e and theta_e +- h, h = max(2 A, 1 mrad)
for the largest swing A (see torque_curve.py); G is the reduction's.
"""

from __future__ import annotations

from truepull.integrate.balance.reduction import pendulum_inertia, per_unit_g
from truepull.integrate.balance.run_fit import Anharmonic
from truepull.integrate.balance.torque_curve import sample_curve

MIN_HALF_SPAN = 1e-3     # rad: the curve's samples at least this far either side of the equilibrium


def anharmonic_terms_from_scene(scene, reduction, amplitude: float, *, test: str = "pendulum",
                                source: str = "attractor", rtol: float = 1e-9) -> dict[str, Anharmonic]:
    """position -> Anharmonic at the reduction's equilibria (rad, from the torque curve's zero)."""
    s1 = per_unit_g(scene)
    inertia, _ = pendulum_inertia(scene, test)
    h = max(2.0 * float(amplitude), MIN_HALF_SPAN)
    out = {}
    for name, te in zip(reduction.positions, reduction.equilibrium):
        curve = sample_curve(s1, name, (te - h, te, te + h), test, source, rtol)
        c = curve.about(te).coef
        c2 = float(c[2]) if c.size > 2 else 0.0
        c3 = float(c[3]) if c.size > 3 else 0.0
        out[name] = Anharmonic(alpha=-reduction.G * c2 / inertia, beta=-reduction.G * c3 / inertia)
    return out
