"""Make shapes/measured_ball.csv: an invented measured form of the demo_measured.toml pendulum's east bob.

How it was made: a ball of nominal radius 10 mm "measured" on 30 rings of constant polar angle theta
(from 3 to 177 deg, 6 deg apart), each ring at equal steps of the azimuth phi, 80 points on the
rings near the equator and fewer toward the poles, at least 8 (1538 points in all), as a coordinate-
measuring machine might scan it. The radius along each direction is the invented form
    r = R (1 + 4e-4 Y20 + 1.5e-4 Y31 - 1e-4 Y4-2)    (real orthonormal spherical harmonics)
plus a measurement noise of 0.3 um (numpy's default_rng, seed 15), written in mm to 0.01 um.
Columns: theta, phi (degrees), r (mm). Nothing here is a real part or a real measurement.

Run from anywhere:  python shapes/make_measured_ball.py   (rewrites shapes/measured_ball.csv)
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

RADIUS_MM = 10.0
FORM = {(2, 0): 4e-4, (3, 1): 1.5e-4, (4, -2): -1e-4}
"""Relative amplitudes eps_lm of the real orthonormal Y_lm in r = R (1 + sum eps_lm Y_lm)."""
NOISE_MM = 3e-4
RINGS = np.arange(3.0, 180.0, 6.0)
SEED = 15
OUT = Path(__file__).with_name("measured_ball.csv")


def directions() -> np.ndarray:
    """(N, 2) theta, phi in degrees: rings of constant theta with round(80 sin theta) points, at least 8,
    every other ring turned by half a step."""
    rows = []
    for k, t in enumerate(RINGS):
        n = max(8, int(round(80 * np.sin(np.radians(t)))))
        phi = (np.arange(n) + 0.5 * (k % 2)) * 360.0 / n - 180.0
        rows.append(np.column_stack([np.full(n, t), phi]))
    return np.vstack(rows)


def measured_radii(tp: np.ndarray, rng) -> np.ndarray:
    """Radii (mm) of the invented form along (theta, phi) degrees, with the measurement noise."""
    from truepull.geometry.measured_form import real_harmonics

    t, p = np.radians(tp[:, 0]), np.radians(tp[:, 1])
    u = np.column_stack([np.sin(t) * np.cos(p), np.sin(t) * np.sin(p), np.cos(t)])
    Y = real_harmonics(4, u)
    rel = sum(e * Y[:, l * l + l + m] for (l, m), e in FORM.items())
    return RADIUS_MM * (1.0 + rel) + rng.normal(0.0, NOISE_MM, len(u))


def main() -> int:
    tp = directions()
    r = measured_radii(tp, np.random.default_rng(SEED))
    text = "theta,phi,r\n" + "".join(f"{a:.4f},{b:.4f},{c:.8f}\n" for a, b, c in zip(tp[:, 0], tp[:, 1], r))
    tmp = OUT.with_suffix(".csv.tmp")
    tmp.write_text(text)
    tmp.replace(OUT)
    print(f"wrote {OUT} ({len(r)} points)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
