"""Surface (divergence-theorem) rules for volume integrals of homogeneous functions.

Outside references: scipy.integrate.tplquad over the body's volume (brute force, in the body's own
coordinates); the closed-form volumes (from memory) of a box, a b c, and a tube,
pi (R^2 - r^2) L; the volume rules of `volume_rules` (Gauss-
Legendre and trapezoid tensor rules, a different formulation) for a high-degree cross-check.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import tplquad

from truepull.geometry.scene import load_scene_text
from truepull.integrate.flux_rules import flux_nodes
from truepull.integrate.volume_rules import body_nodes, polynomial_orders, rule_kind

SCENE = """
[units]
length = "mm"
[[body]]
name = "block"
group = "pendulum"
shape = "box"
size = [30, 12, 7]
density = 2700
at = [14, -9, 5]
rotate = { axis = [1, -2, 0.5], angle = 0.7 }
[[body]]
name = "tube"
group = "pendulum"
shape = "cylinder"
radius = 11
inner_radius = 4
length = 25
density = 8000
at = [-20, 6, -3]
axis = [0.3, 1, 0.2]
[[body]]
name = "bore"
group = "pendulum"
shape = "cylinder"
radius = 3
length = 8
density = 8000
subtract = true
at = [-20, 6, 30]
"""

ORIGIN = np.array([0.002, -0.001, 0.003])
POWERS = (3, 1, 2)  # f = x^3 y z^2 about ORIGIN: homogeneous of degree 6


def _f(points):
    d = np.asarray(points, float) - ORIGIN
    return d[..., 0] ** POWERS[0] * d[..., 1] ** POWERS[1] * d[..., 2] ** POWERS[2]


def _flux_integral(body, degree):
    X, w = flux_nodes(body, ORIGIN, degree)
    return float(np.sum(w * _f(X))) / (sum(POWERS) + 3)


# quadpack flags roundoff in the tube's azimuth integrals (the integrand changes sign); the results
# still agree with the surface rule to 1e-10, which is what the tests check
QUADPACK_ROUNDOFF = pytest.mark.filterwarnings("ignore::scipy.integrate.IntegrationWarning")


def _tplquad(body):
    """Brute force: scipy tplquad of rho f over the body, in its local box or cylindrical coordinates."""
    Rm, t = body.placement.rotation, body.placement.translation
    sh = body.shape
    if sh.kind == "box":
        hx, hy, hz = 0.5 * np.asarray(sh.size)
        v, _ = tplquad(lambda z, y, x: _f(Rm @ np.array([x, y, z]) + t), -hx, hx, -hy, hy, -hz, hz,
                       epsabs=0, epsrel=1e-11)
    else:
        def g(z, phi, rho):
            p = np.array([rho * math.cos(phi), rho * math.sin(phi), z])
            return _f(Rm @ p + t) * rho

        v, _ = tplquad(g, sh.inner_radius, sh.radius, 0, 2 * math.pi, -sh.length / 2, sh.length / 2,
                       epsabs=0, epsrel=1e-11)
    return body.density * v


@QUADPACK_ROUNDOFF
@pytest.mark.parametrize("name", ["block", "tube", "bore"])
def test_surface_rule_matches_brute_force_volume_quadrature(name):
    body = load_scene_text(SCENE).body(name)
    ref = _tplquad(body)  # scipy.integrate.tplquad
    got = _flux_integral(body, sum(POWERS))
    assert abs(got - ref) <= 1e-10 * abs(ref)


@pytest.mark.parametrize("name,volume", [("block", 30 * 12 * 7 * 1e-9),
                                         ("tube", math.pi * (11**2 - 4**2) * 25 * 1e-9)])
def test_degree_zero_gives_the_handbook_mass(name, volume):
    # f = 1: sum(w) / 3 is the mass; the closed-form volumes of a box (a b c) and a tube (pi (R^2 - r^2) L),
    # from memory
    body = load_scene_text(SCENE).body(name)
    _, w = flux_nodes(body, ORIGIN, 0)
    assert abs(w.sum() / 3 - body.density * volume) <= 1e-13 * body.density * volume


@pytest.mark.parametrize("name", ["block", "tube"])
def test_high_degree_agrees_with_the_volume_rule(name):
    # degree 40: both rules are exact for polynomials, by different formulations (surface and volume)
    body = load_scene_text(SCENE).body(name)
    rng = np.random.default_rng(7)
    direction = rng.normal(size=3)
    direction /= np.linalg.norm(direction)
    deg = 40

    def f(p):  # ((x - o).u)^40: homogeneous of degree 40
        return ((np.asarray(p) - ORIGIN) @ direction) ** deg

    X, w = flux_nodes(body, ORIGIN, deg)
    surface = float(np.sum(w * f(X))) / (deg + 3)
    Xv, wv = body_nodes(body, polynomial_orders(rule_kind(body), deg))
    volume = float(np.sum(wv * f(Xv)))
    scale = float(np.sum(np.abs(wv) * np.abs(f(Xv))))
    assert abs(surface - volume) <= 1e-12 * scale


@QUADPACK_ROUNDOFF
def test_too_low_a_degree_is_not_exact():
    # the rule is exact up to its degree and no further: a degree-2 rule misses x^3 y z^2 (so the
    # brute-force test above can fail)
    body = load_scene_text(SCENE).body("tube")
    ref = _tplquad(body)
    assert abs(_flux_integral(body, 2) - ref) > 1e-6 * abs(ref)
