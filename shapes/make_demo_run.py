"""Make shapes/demo_run.csv: an invented recorded run of the demo balance (shapes/demo.toml).

The run is synthetic, made from the full equation of motion of the pendulum's turn theta (rad, about
the fiber axis, from the pose the scene draws):

    I theta'' = -kappa (theta - theta_zero(t)) - c theta' + G Gamma_p(theta)

- I (kg m^2): the pendulum's exact moment of inertia from the scene (reduction.pendulum_inertia);
- kappa (N m/rad): the fiber the demo was made for (the scene's [measurement] comments);
- c (N m s/rad): from a logarithmic decrement DECREMENT of the fiber-only oscillator (kappa / I);
- G: the scene's (CODATA 2018); Gamma_p(theta) (N m per unit G): the scene's exact axial torque of the
  attractor at position p, the Hermite curve through engine samples (torque and slope, rtol 1e-9) at
  NODES, 5 turns over +-8 mrad around the pose as drawn (torque_curve.sample_curve). The curve is a
  polynomial of degree 9 and the torque changes over tenths of a radian, so over the few mrad the
  pendulum moves (-1.7 to +4.2 mrad) it differs from the curve through 7 nodes by < 1e-14 of the torque
  and from fresh engine samples between the nodes by less than the engine's error estimate (about
  4e-13 of the torque; tests/test_make_demo_run.py checks it);
- theta_zero(t) = ZERO + DRIFT_RATE t + DRIFT_CURVE t^2: the fiber's zero drifts slowly and not
  linearly (the rate goes from 2e-9 to about 6e-9 rad/s over the run).

The attractor follows SEQUENCE, SEGMENT s at each position; the pendulum is released from rest at
ZERO + RELEASE at t = 0 with the attractor at A, and the state (theta, theta') is carried across each
switch, so the swings after the switches (about 2 mrad) arise by themselves. Each segment is solved by
scipy.integrate.solve_ivp (DOP853, rtol 1e-11, atol 1e-17 rad). The read-out is theta (its zero is the
pose as drawn) plus Gaussian noise NOISE from a fixed seed, sampled every STEP s.

Invented data for trying `truepull fit` and the reduction with the anharmonic terms of the exact
torque, not a measurement. Columns: time (s), angle (rad, right-handed about the fiber axis), position.

Run from anywhere:  python shapes/make_demo_run.py   (rewrites shapes/demo_run.csv; a few seconds,
more on the engine's first use when it compiles)
"""

from __future__ import annotations

import sys
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from scipy.integrate import solve_ivp

SEED = 20240611
KAPPA = 6.0731e-8         # N m/rad, the fiber's torsion constant (the demo scene's [measurement] comments)
DECREMENT = 0.05          # logarithmic decrement of the fiber-only oscillator (invented)
ZERO = 3.5e-4             # rad, the fiber's zero at t = 0, from the pose as drawn
DRIFT_RATE = 2.0e-9       # rad/s, the zero's drift rate at t = 0
DRIFT_CURVE = 2.0e-13     # rad/s^2: theta_zero = ZERO + DRIFT_RATE t + DRIFT_CURVE t^2
RELEASE = -2.0e-3         # rad, the pendulum's start (at rest) from the fiber's zero
NOISE = 2.0e-6            # rad, standard deviation of the read-out noise
STEP = 4.0                # s, sampling interval
SEGMENT = 1800.0          # s, time at each position
SEQUENCE = ("A", "B", "A", "B", "A", "B")
NODES = tuple(np.linspace(-8e-3, 8e-3, 5))   # rad, where the torque curve is sampled
ENGINE_RTOL = 1e-9
RTOL, ATOL = 1e-11, 1e-17                    # solve_ivp tolerances (atol in rad and rad/s)


@dataclass(frozen=True)
class Balance:
    """The constants of the equation of motion: I (kg m^2), kappa (N m/rad), c (N m s/rad), G (SI) and
    per position the torque per unit G as a polynomial in theta (rad; coefficients, lowest first)."""

    inertia: float
    kappa: float
    damping: float
    G: float
    torque: dict
    curves: dict


def fiber_damping(inertia: float, kappa: float, decrement: float) -> float:
    """c (N m s/rad) giving the oscillator I x'' + c x' + kappa x = 0 the logarithmic decrement
    `decrement` = gamma T_d, gamma = c / (2 I), T_d = 2 pi / sqrt(kappa / I - gamma^2)."""
    omega0 = np.sqrt(kappa / inertia)
    gamma = decrement * omega0 / np.sqrt(4.0 * np.pi**2 + decrement**2)
    return 2.0 * inertia * gamma


def drift(time):
    """The fiber's zero theta_zero(t) (rad) at times t (s)."""
    t = np.asarray(time, dtype=float)
    return ZERO + DRIFT_RATE * t + DRIFT_CURVE * t * t


def demo_balance(scene=None) -> Balance:
    """The demo scene's constants and torque curves (engine samples at NODES for each position)."""
    from truepull.geometry.scene import load_scene
    from truepull.integrate.balance.reduction import pendulum_inertia, per_unit_g
    from truepull.integrate.balance.torque_curve import sample_curve
    from truepull.shapes import demo_path

    scene = load_scene(demo_path()) if scene is None else scene
    inertia, _ = pendulum_inertia(scene)
    per_g = per_unit_g(scene)
    curves = {p: sample_curve(per_g, p, NODES, rtol=ENGINE_RTOL) for p in dict.fromkeys(SEQUENCE)}
    torque = {p: tuple(float(c) for c in curve.about(0.0).coef) for p, curve in curves.items()}
    return Balance(inertia, KAPPA, fiber_damping(inertia, KAPPA, DECREMENT), float(scene.G.value),
                   torque, curves)


def _horner(coef, x: float) -> float:
    out = 0.0
    for c in reversed(coef):
        out = out * x + c
    return out


def simulate(rng: np.random.Generator, noise: float = NOISE, balance: Balance | None = None):
    """Times (s), angles (rad) and position labels of the whole run; `noise` is the read-out noise's
    standard deviation (rad)."""
    b = demo_balance() if balance is None else balance
    inv_i = 1.0 / b.inertia
    state = np.array([ZERO + RELEASE, 0.0])
    times, angles, labels = [], [], []
    for k, name in enumerate(SEQUENCE):
        coef = b.torque[name]
        g = b.G

        def rhs(t, y, coef=coef):
            zero = ZERO + DRIFT_RATE * t + DRIFT_CURVE * t * t
            return (y[1], (-b.kappa * (y[0] - zero) - b.damping * y[1] + g * _horner(coef, y[0])) * inv_i)

        t0 = k * SEGMENT
        t = t0 + np.arange(0.0, SEGMENT, STEP)
        sol = solve_ivp(rhs, (t0, t0 + SEGMENT), state, method="DOP853", rtol=RTOL, atol=ATOL,
                        t_eval=np.append(t, t0 + SEGMENT))
        if sol.status != 0:
            raise RuntimeError(f"solve_ivp failed in segment {k}: {sol.message}")
        times.append(t)
        angles.append(sol.y[0, :-1])
        labels += [name] * len(t)
        state = sol.y[:, -1]
    time = np.concatenate(times)
    angle = np.concatenate(angles) + rng.normal(0.0, noise, len(time))
    return time, angle, labels


def csv_text(time, angle, labels) -> str:
    lines = [
        "# invented run of the truepull demo balance (shapes/demo.toml); made by shapes/make_demo_run.py",
        f"# seed {SEED}; full equation of motion with the scene's exact torque, fiber {KAPPA:g} N m/rad, "
        f"decrement {DECREMENT:g}, quadratic drift of the zero, noise {NOISE:g} rad; not a measurement",
        "time,angle,position",
    ]
    lines += [f"{t:.1f},{a:.9e},{p}" for t, a, p in zip(time, angle, labels)]
    return "\n".join(lines) + "\n"


def main(argv=None) -> int:
    out = Path(__file__).with_name("demo_run.csv")
    time, angle, labels = simulate(np.random.default_rng(SEED))
    tmp = out.with_suffix(".csv.tmp")
    tmp.write_text(csv_text(time, angle, labels))
    tmp.replace(out)
    print(f"wrote {out}: {len(time)} rows over {time[-1]:g} s")
    return 0


if __name__ == "__main__":
    sys.exit(main())
