"""Measured form: a CSV of surface points (x, y, z) read as the closed convex polyhedron through them
(geometry/meshes.py `_measured_hull`).

Outside reference: potential theory. A ball of density rho whose surface is r = R (1 + eps P2(cos t))
differs, to first order in eps, from the ball by a surface layer of density rho R eps P2, whose
exterior potential is -G 4 pi rho R^5 eps P2(cos t) / (5 r^3) (the l = 2 term of a surface layer,
4 pi R^2 sigma_l R^l / ((2 l + 1) r^(l + 1))). Differencing the measured and the ideal point sets
(the same directions) removes the polyhedra's common chord error; what is left is the chord error of
the deviation itself and the eps^2 terms: a few per cent at 4000 points (tolerance 6 %).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from truepull.geometry.bodies import Body
from truepull.geometry.errors import InputError
from truepull.geometry.meshes import load_mesh
from truepull.geometry.placement import Placement
from truepull.integrate.sources import SourceField

G = 6.6743e-11


def _points(n):
    k = np.arange(n) + 0.5
    z = 1 - 2 * k / n
    phi = math.pi * (1 + 5**0.5) * k
    s = np.sqrt(1 - z * z)
    return np.stack([s * np.cos(phi), s * np.sin(phi), z], axis=1)


def _write(path, pts):
    np.savetxt(path, pts * 1e3, delimiter=",", header="x,y,z", comments="")  # in mm
    return path


def test_measured_sphere_with_a_p2_deviation(tmp_path):
    R, rho, eps = 0.05, 8000.0, 1e-3
    u = _points(4000)
    p2 = 0.5 * (3 * u[:, 2] ** 2 - 1)
    ideal = load_mesh(_write(tmp_path / "ideal.csv", u * R), "mm")
    measured = load_mesh(_write(tmp_path / "measured.csv", u * (R * (1 + eps * p2))[:, None]), "mm")
    x = np.array([[0.0, 0.0, 0.15], [0.15, 0.0, 0.0], [0.08, 0.05, 0.1]])
    Ua = SourceField(Body("a", "g", ideal, Placement.identity(), rho), G).field(x)[0]
    Ub = SourceField(Body("b", "g", measured, Placement.identity(), rho), G).field(x)[0]
    r = np.linalg.norm(x, axis=1)
    c = x[:, 2] / r
    ref = -G * 4 * math.pi * rho * R**5 * eps / (5 * r**3) * 0.5 * (3 * c * c - 1)
    assert np.all(np.abs((Ub - Ua) / ref - 1) < 0.06)


def test_measured_points_need_x_y_z(tmp_path):
    path = tmp_path / "bad.csv"
    path.write_text("a,b\n1,2\n")
    with pytest.raises(InputError, match="columns x, y, z"):
        load_mesh(path, "mm")
