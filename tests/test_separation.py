"""Farthest and nearest points of bodies from a centre, against brute force: dense samples of the
body's surface (farthest) and scipy.optimize over its surface parametrisation (nearest)."""

from __future__ import annotations

import numpy as np
from scipy.optimize import minimize

from truepull.geometry.scene import load_scene_text
from truepull.integrate.separation import farthest, nearest

SCENE = """
[[body]]
name = "cyl"
group = "a"
shape = "cylinder"
radius = 0.02
length = 0.05
density = 1
at = [0.05, 0.02, -0.01]
axis = [1, 1, 2]
[[body]]
name = "cone"
group = "a"
shape = "cone"
radius = 0.02
radius_top = 0.005
length = 0.04
density = 1
at = [-0.04, 0.03, 0.02]
axis = [0, 1, -1]
[[body]]
name = "ell"
group = "a"
shape = "ellipsoid"
radii = [0.03, 0.02, 0.01]
density = 1
at = [0.02, -0.06, 0.03]
axis = [1, 0, 1]
rotate = { axis = [0, 0, 1], angle = 25 }
"""


def _surface_samples(body, n=400):
    """Points on the body's surface, densely (world)."""
    s = body.shape
    t = np.linspace(0, 2 * np.pi, n, endpoint=False)
    if s.kind == "ellipsoid":
        u = np.linspace(0, np.pi, n // 2)
        U, T = np.meshgrid(u, t)
        a, b, c = s.radii
        p = np.stack([a * np.sin(U) * np.cos(T), b * np.sin(U) * np.sin(T), c * np.cos(U)], -1).reshape(-1, 3)
    else:
        top = s.radius if s.kind == "cylinder" else s.radius_top
        rims = [(-s.length / 2, s.radius), (s.length / 2, top)]
        p = np.vstack([np.stack([r * np.cos(t), r * np.sin(t), np.full(n, z)], -1) for z, r in rims])
    return body.placement.apply(p)


def test_farthest_is_at_least_every_sample_and_attained():
    # reference: brute force, the largest distance to dense samples of each surface (for bodies of
    # revolution the farthest point lies on a rim circle, which the samples cover to 2 pi / 400)
    sc = load_scene_text(SCENE)
    c = np.array([0.001, -0.002, 0.003])
    for b in sc.bodies:
        d = np.linalg.norm(_surface_samples(b) - c, axis=1).max()
        f = farthest(b, c)
        assert f >= d - 1e-15
        if b.shape.kind != "ellipsoid":  # exact for bodies of revolution (rim circles)
            assert f - d < 1e-5 * f


def test_nearest_point_of_an_ellipsoid_is_exact():
    # reference: scipy.optimize.minimize (Nelder-Mead, three starts) of the distance over the
    # ellipsoid's angle parametrisation; and no dense surface sample may lie nearer
    sc = load_scene_text(SCENE)
    b = sc.body("ell")
    c = np.array([0.001, -0.002, 0.003])
    a1, a2, a3 = b.shape.radii

    def dist(x):
        p = b.placement.apply(np.array([a1 * np.sin(x[0]) * np.cos(x[1]), a2 * np.sin(x[0]) * np.sin(x[1]),
                                        a3 * np.cos(x[0])]))
        return np.linalg.norm(p - c)

    samples = _surface_samples(b, 200)
    i = np.argmin(np.linalg.norm(samples - c, axis=1))
    best = min((minimize(dist, x0, method="Nelder-Mead", options={"xatol": 1e-12, "fatol": 1e-15, "maxiter": 4000})
                for x0 in ([1.0, 1.0], [2.0, 4.0], [0.5, 3.0])), key=lambda r: r.fun)
    assert abs(nearest(b, c) - best.fun) < 1e-10
    assert nearest(b, c) <= np.linalg.norm(samples[i] - c)
    assert nearest(b, b.com) == 0.0
