"""Make shapes/demo_run.csv: an invented recorded run of the demo balance (shapes/demo.toml).

The run is synthetic: the pendulum is a linear damped oscillator, I theta'' + c theta' + kappa theta
= tau(position), solved exactly segment by segment (state carried across each switch of the
attractor), plus a small linear drift of the fiber's zero, plus Gaussian read-out noise from a fixed
seed. The attractor switches A -> B -> A -> B every 1800 s; it is at A from t = 0 with the pendulum at
rest before.

It is consistent with the demo's physics only roughly: the torques are rounded from a point-mass-ish
estimate (about 5.85e-11 N m at A and minus that at B), the moment of inertia from `truepull check`
(about 1.385e-4 kg m^2), and the period (300 s) and decrement (0.05) are simply chosen. It is
invented data for trying `truepull fit` and the report, not a measurement.

Columns: time (s), angle (rad, right-handed about the fiber axis, arbitrary zero), position (A | B).

Run from anywhere:  python shapes/make_demo_run.py   (rewrites shapes/demo_run.csv)
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

SEED = 20240611
PERIOD = 300.0            # s, damped period (invented)
DECREMENT = 0.05          # logarithmic decrement per period (invented)
INERTIA = 1.385e-4        # kg m^2, roughly the demo pendulum's moment of inertia about the fiber
TORQUE = {"A": 5.85e-11, "B": -5.85e-11}   # N m, rough torque of the attractor on the pendulum
ZERO = 3.5e-4             # rad, arbitrary zero of the angle read-out
DRIFT = 2.0e-9            # rad/s, slow drift of the fiber's zero
NOISE = 2.0e-6            # rad, standard deviation of the read-out noise
STEP = 4.0                # s, sampling interval
SEGMENT = 1800.0          # s, time at each position
SEQUENCE = ("A", "B", "A", "B")


def oscillator_constants():
    """(kappa N m/rad, gamma 1/s, omega_d rad/s) from the chosen damped period and decrement."""
    omega_d = 2.0 * np.pi / PERIOD
    gamma = DECREMENT / PERIOD                          # amplitude decays as exp(-gamma t)
    omega0_sq = omega_d**2 + gamma**2                   # omega0^2 = omega_d^2 (1 + (delta / 2 pi)^2)
    return INERTIA * omega0_sq, gamma, omega_d


def simulate(rng: np.random.Generator, noise: float = NOISE):
    """Times (s), angles (rad) and position labels of the whole run; `noise` is the read-out noise's
    standard deviation (rad)."""
    kappa, gamma, omega_d = oscillator_constants()
    x, v = 0.0, 0.0          # angle from the fiber's rest angle (rad) and its rate (rad/s)
    times, angles, labels = [], [], []
    t0 = 0.0
    for name in SEQUENCE:
        eq = TORQUE[name] / kappa
        t = np.arange(0.0, SEGMENT, STEP)
        a0, b0 = x - eq, (v + gamma * (x - eq)) / omega_d   # exact solution about the new equilibrium
        decay = np.exp(-gamma * t)
        cos, sin = np.cos(omega_d * t), np.sin(omega_d * t)
        xs = eq + decay * (a0 * cos + b0 * sin)
        times.append(t0 + t)
        angles.append(xs)
        labels += [name] * len(t)
        # state at the end of the segment (t = SEGMENT), carried into the next
        d, c, s = np.exp(-gamma * SEGMENT), np.cos(omega_d * SEGMENT), np.sin(omega_d * SEGMENT)
        x = eq + d * (a0 * c + b0 * s)
        v = d * (-gamma * (a0 * c + b0 * s) + omega_d * (-a0 * s + b0 * c))
        t0 += SEGMENT
    time = np.concatenate(times)
    angle = np.concatenate(angles) + ZERO + DRIFT * time + rng.normal(0.0, noise, len(time))
    return time, angle, labels


def csv_text(time, angle, labels) -> str:
    lines = [
        "# invented run of the truepull demo balance (shapes/demo.toml); made by shapes/make_demo_run.py",
        f"# seed {SEED}; damped period {PERIOD:g} s, decrement {DECREMENT:g}, noise {NOISE:g} rad; not a measurement",
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
