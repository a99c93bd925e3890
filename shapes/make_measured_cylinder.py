"""Make shapes/measured_cylinder.csv: an invented measured form of a lathe-made cylinder (demo_measured_cylinder.toml).

How it was made: a cylinder of nominal radius 12 mm and length 30 mm "measured" as a coordinate-measuring
machine might scan it, keeping 0.5 mm off the edges: on the side, 15 circles of 48 points at heights
from -14.5 to +14.5 mm; on each end face, 5 circles (radii 2 to 11.5 mm) of 12 to 40 points and the
centre point. The invented form, all in mm about the file's origin (axis along z):
    side radius   r = 12 + 0.004 z / 15 + 0.003 cos 2(phi - 20 deg)   (a 4 um taper over the half length
                  and 3 um ovality)
    top face      z = +15 + 0.002 x / 12 - 0.001 y / 12                (a tilt of about 1.9e-4 rad)
    bottom face   z = -15 + 0.001 y / 12
plus a measurement noise of 0.3 um normal to each surface (numpy's default_rng, seed 4), written to
0.01 um. Columns x, y, z (mm). Nothing here is a real part or a real measurement.

Run from anywhere:  python shapes/make_measured_cylinder.py   (rewrites shapes/measured_cylinder.csv)
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np

RADIUS_MM, HALF_MM = 12.0, 15.0
TAPER_MM, OVALITY_MM, OVAL_ANGLE = 0.004, 0.003, np.radians(20.0)
TOP_TILT_MM = (0.002, -0.001)       # dz at x = R and at y = R
BOTTOM_TILT_MM = (0.0, 0.001)
NOISE_MM = 3e-4
SEED = 4
OUT = Path(__file__).with_name("measured_cylinder.csv")


def side_radius(phi, z):
    return RADIUS_MM + TAPER_MM * z / HALF_MM + OVALITY_MM * np.cos(2 * (phi - OVAL_ANGLE))


def face_height(top: bool, x, y):
    tx, ty = TOP_TILT_MM if top else BOTTOM_TILT_MM
    return (HALF_MM if top else -HALF_MM) + (tx * x + ty * y) / RADIUS_MM


def points(rng) -> np.ndarray:
    """(N, 3) x, y, z (mm) on the side and both faces, with noise along each surface's normal."""
    rows = []
    for k, z in enumerate(np.linspace(-HALF_MM + 0.5, HALF_MM - 0.5, 15)):
        phi = (np.arange(48) + 0.5 * (k % 2)) * 2 * np.pi / 48
        r = side_radius(phi, z) + rng.normal(0.0, NOISE_MM, len(phi))
        rows.append(np.column_stack([r * np.cos(phi), r * np.sin(phi), np.full(len(phi), z)]))
    for top in (True, False):
        xy = [np.zeros((1, 2))]
        for rho in np.linspace(2.0, RADIUS_MM - 0.5, 5):
            n = max(12, int(round(40 * rho / RADIUS_MM)))
            a = np.arange(n) * 2 * np.pi / n
            xy.append(np.column_stack([rho * np.cos(a), rho * np.sin(a)]))
        xy = np.vstack(xy)
        z = face_height(top, xy[:, 0], xy[:, 1]) + rng.normal(0.0, NOISE_MM, len(xy))
        rows.append(np.column_stack([xy, z]))
    return np.vstack(rows)


def main() -> int:
    p = points(np.random.default_rng(SEED))
    text = "x,y,z\n" + "".join(f"{a:.5f},{b:.5f},{c:.5f}\n" for a, b, c in p)
    tmp = OUT.with_suffix(".csv.tmp")
    tmp.write_text(text)
    tmp.replace(OUT)
    print(f"wrote {OUT} ({len(p)} points)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
