"""The point response (integrate/point_response.py) against mpmath.

Reference: for a point mass m at c in a field that is linear about c (potential U, field g, gradient T
there), the torque about the pivot on the mass turned by theta about the axis e is
tau_e(theta) = e . (r(theta) x m g(c_theta)), r(theta) by Rodrigues' rotation formula and
g(c_theta) = g + T (c_theta - c); the stiffness is K = -d tau_e / d theta at 0, here by mpmath's
numerical differentiation at 40 digits (mpmath.diff), F = m g and E = m U; all from the doubles given.
The stated error bounds (rounding only, zero field errors given) must cover the true error.
"""

from __future__ import annotations

import mpmath as mp
import numpy as np

from truepull.integrate.point_response import point_response, point_response_errors

DPS = 40


def reference(m, c, U, g, T, pivot, axis):
    """(F, tau, K, E) in mpmath at DPS digits."""
    with mp.workdps(DPS):
        f = [mp.mpf(float(x)) for x in g]
        Tm = [[mp.mpf(float(T[i, j])) for j in range(3)] for i in range(3)]
        cm = [mp.mpf(float(x)) for x in c]
        r = [cm[i] - mp.mpf(float(pivot[i])) for i in range(3)]
        k = [mp.mpf(float(x)) for x in axis]
        m = mp.mpf(float(m))

        def cross(a, b):
            return [a[1] * b[2] - a[2] * b[1], a[2] * b[0] - a[0] * b[2], a[0] * b[1] - a[1] * b[0]]

        def torque_axis(theta):
            ct, st = mp.cos(theta), mp.sin(theta)
            kxr, kr = cross(k, r), sum(a * b for a, b in zip(k, r))
            rr = [r[i] * ct + kxr[i] * st + k[i] * kr * (1 - ct) for i in range(3)]     # Rodrigues
            shift = [rr[i] - r[i] for i in range(3)]
            gt = [f[i] + sum(Tm[i][j] * shift[j] for j in range(3)) for i in range(3)]
            return sum(a * b for a, b in zip(k, cross(rr, [m * x for x in gt])))

        F = [m * x for x in f]
        return F, cross(r, F), -mp.diff(torque_axis, 0), m * mp.mpf(float(U))


def test_response_and_its_bounds_against_mpmath():
    rng = np.random.default_rng(11)
    for _ in range(20):
        m = rng.uniform(0.1, 3.0)
        c = rng.normal(size=3) * 0.1
        pivot = rng.normal(size=3) * 0.05
        axis = rng.normal(size=3)
        axis /= np.linalg.norm(axis)
        g = rng.normal(size=3) * 1e-8
        A = rng.normal(size=(3, 3)) * 1e-7
        T = A + A.T
        U = -rng.uniform(1e-9, 1e-8)
        F, tau, K, E = point_response(m, c, U, g, T, pivot, axis)
        err = point_response_errors(m, c, pivot, axis, g, T, U, 0.0, 0.0, 0.0)
        rF, rtau, rK, rE = reference(m, c, U, g, T, pivot, axis)
        with mp.workdps(DPS):
            true = [abs(mp.mpf(float(a)) - b) for a, b in zip(list(F) + list(tau) + [K, E], rF + rtau + [rK, rE])]
        for k, t in enumerate(true):
            assert err[k] >= float(t), (k, err[k], float(t))
        # not vacuous (our rule): the bounds stay within 1e-12 of the sizes
        assert err[6] < 1e-12 * m * (np.linalg.norm(g) + np.linalg.norm(T) * 0.2) * 0.2

