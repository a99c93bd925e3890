"""The point-mass model (integrate/point_model.py) against Newton's law in mpmath.

Reference: for point masses m at c and M at C, F = G m M (C - c) / |C - c|^3, torque (c - p) x F about
the pivot p, E = -G m M / |C - c|, and the stiffness K = -d tau_e / d theta for the test point turned
by theta about the axis e through the pivot (Rodrigues' formula), by mpmath's numerical
differentiation (mpmath.diff) at 40 digits, from the doubles given.
"""

from __future__ import annotations

from types import SimpleNamespace

import mpmath as mp
import numpy as np

from truepull.integrate.point_model import point_model, point_pair_values

G = 6.674e-11  # m^3 kg^-1 s^-2 (CODATA 2018 6.67430e-11, rounded; from memory)


def newton_mp(m, c, M, C, pivot, axis):
    """[F, torque, K, E] of the pair in mpmath (40 digits)."""
    with mp.workdps(40):
        k = [mp.mpf(float(x)) for x in axis]
        n = mp.sqrt(sum(x * x for x in k))
        k = [x / n for x in k]
        r = [mp.mpf(float(c[i])) - mp.mpf(float(pivot[i])) for i in range(3)]
        S = [mp.mpf(float(C[i])) - mp.mpf(float(pivot[i])) for i in range(3)]
        gmm = mp.mpf(G) * mp.mpf(float(m)) * mp.mpf(float(M))

        def cross(a, b):
            return [a[1] * b[2] - a[2] * b[1], a[2] * b[0] - a[0] * b[2], a[0] * b[1] - a[1] * b[0]]

        def force(rr):
            d = [S[i] - rr[i] for i in range(3)]
            n3 = mp.sqrt(sum(x * x for x in d)) ** 3
            return [gmm * x / n3 for x in d]

        def torque_axis(theta):
            ct, st = mp.cos(theta), mp.sin(theta)
            kxr, kr = cross(k, r), sum(a * b for a, b in zip(k, r))
            rr = [r[i] * ct + kxr[i] * st + k[i] * kr * (1 - ct) for i in range(3)]
            return sum(a * b for a, b in zip(k, cross(rr, force(rr))))

        F = force(r)
        d = mp.sqrt(sum((S[i] - r[i]) ** 2 for i in range(3)))
        return F + cross(r, F) + [-mp.diff(torque_axis, 0), -gmm / d]


def test_pairs_are_newton():
    rng = np.random.default_rng(4)
    point = SimpleNamespace   # the model needs only `mass` (kg) and `com` (m)
    tests = [point(mass=float(m), com=c) for m, c in zip(rng.uniform(0.1, 2, 3), rng.normal(size=(3, 3)) * 0.1)]
    sources = [point(mass=float(m), com=c) for m, c in zip(rng.uniform(1, 5, 2), rng.normal(size=(2, 3)) + 1.0)]
    sources.append(point(mass=0.0, com=np.zeros(3)))          # a massless source pulls nothing
    pivot, axis = np.array([0.01, -0.02, 0.0]), np.array([0.1, 0.2, 1.0])
    pp = point_pair_values(tests, sources, pivot, axis, G)
    assert pp.shape == (3, 3, 8)
    assert np.all(pp[:, 2] == 0.0)
    for i, t in enumerate(tests):
        for j, s in enumerate(sources[:2]):
            ref = np.array([float(x) for x in newton_mp(t.mass, t.com, s.mass, s.com, pivot, axis)])
            sf, st = np.linalg.norm(ref[0:3]), np.linalg.norm(ref[3:6])
            scale = np.array([sf, sf, sf, st, st, st, abs(ref[6]), abs(ref[7])])
            assert np.all(np.abs(pp[i, j] - ref) <= 1e-13 * scale), (i, j, pp[i, j], ref)
    assert np.array_equal(point_model(tests, sources, pivot, axis, G), pp.sum(axis=(0, 1)))
