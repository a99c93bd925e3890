"""Field of uniform solids of revolution (cylinders, tubes, cones, frustums) from their surface bands.

A BAND patch (see patches.py) is the surface swept by the straight generator (r0, z0) -> (r1, z1) about
the body's axis. By the divergence theorem the potential and field of a uniform body are surface
integrals, U = -(G rho/2) * integral of ((x'-x) . n')/|x'-x| dA' and g = -G rho * integral of n'/|x'-x| dA'.
Along a generator the distance |x' - x| is the square root of a quadratic in the generator parameter s,
so the s-integral is done in closed form (arcsinh); and (x'-x) . N' is r(s) times a constant, so U and g
both need only J(phi') = integral over s of r(s)/|x'-x| ds. What remains is one integral over the
azimuth phi' of the source, which is even about the point's own azimuth: it runs over [0, pi] on panels
graded geometrically toward phi' = 0, where the point is nearest, with a Gauss rule on each panel. Each
point's value is computed with N_HIGH and N_LOW points per panel; their signed difference is returned as
the refinement error estimate.
"""

from __future__ import annotations

import math

import numpy as np
from numba import njit, prange

from truepull.integrate.gauss import gauss_unit
from truepull.integrate.patches import BAND
from truepull.integrate.threads import kernel_threads

N_HIGH = 12
N_LOW = 10
GRADING = 3.0
"""Panel ratio toward the nearest azimuth: a panel [a, 3a] sees the log-type peak at least a away, so
Gauss converges like (2 + sqrt 3)^(-2n), about 1e-14 for n = 12."""


@njit(cache=True, inline="always")
def _generator_integral(r0, z0, dr, dz, rho, z, vers):
    """J = integral over s in [0, 1] of r(s) / |x'(s) - x| for the generator at azimuth offset phi'
    (vers = 1 - cos phi' = 2 sin^2(phi'/2)), point at cylindrical (rho, 0, z) in the body frame.

    With |x' - x|^2 = Q(s) = A s^2 + B s + C = A (s - s*)^2 + h^2, the integral of 1/sqrt(Q) is
    (asinh(sqrt(A)(1 - s*)/h) - asinh(-sqrt(A) s*/h)) / sqrt(A); it is formed as the log of a ratio of
    sqrt(Q) + sqrt(A)(s - s*) terms (or their reciprocals, for negative arguments) so that nothing cancels,
    and the integral of s/sqrt(Q) follows as (sqrt(Q(1)) - sqrt(Q(0)))/A + s* times the first."""
    A = dr * dr + dz * dz
    u = r0 - rho
    w = z0 - z
    # vers = 1 - cos phi' = 2 sin^2(phi'/2), given exactly: near phi' = 0 nothing below cancels
    B = 2.0 * (dr * (u + rho * vers) + w * dz)
    C = u * u + 2.0 * r0 * rho * vers + w * w
    sa = math.sqrt(A)
    s_star = -B / (2.0 * A)
    # squared distance from the point to the generator's line, |(x'(0) - x) x t|^2 / A by components
    k = r0 * dz - w * dr
    m = w * dr - u * dz + k * vers
    h2 = (vers * (2.0 - vers) * (k * k + rho * rho * dr * dr) + m * m) / A
    floor = 1e-300 + 1e-28 * C
    if h2 < floor:
        h2 = floor
    # |x'(1) - x|^2 and the projections of x'(0) - x and x'(1) - x on the generator, each by its own
    # components (not as A + B + C or from s*), so that they keep their digits near the generator's ends
    u1 = u + dr
    w1 = w + dz
    q1 = u1 * u1 + 2.0 * (r0 + dr) * rho * vers + w1 * w1
    P0 = math.sqrt(C)
    P1 = math.sqrt(q1)
    a0 = 0.5 * B / sa
    a1 = (dr * (u1 + rho * vers) + w1 * dz) / sa
    if a0 >= 0.0:
        ratio = (P1 + a1) / (P0 + a0)
    elif a1 >= 0.0:
        ratio = (P1 + a1) * (P0 - a0) / h2
    else:
        ratio = (P0 - a0) / (P1 - a1)
    i0 = math.log(ratio) / sa
    i1 = (P1 - P0) / A + s_star * i0
    return r0 * i0 + dr * i1


@njit(cache=True, inline="always")
def _segment_distance(r0, z0, r1, z1, rho, z):
    """Distance in the meridian half-plane from (rho, z) to the generator segment."""
    dr = r1 - r0
    dz = z1 - z0
    t = ((rho - r0) * dr + (z - z0) * dz) / (dr * dr + dz * dz)
    if t < 0.0:
        t = 0.0
    elif t > 1.0:
        t = 1.0
    a = r0 + t * dr - rho
    b = z0 + t * dz - z
    return math.sqrt(a * a + b * b)


@njit(cache=True, inline="always")
def _panel_sum(r0, z0, dr, dz, rho, z, a, L, x, w):
    """One azimuth panel [a, a + L] by the Gauss rule (x, w) on [0, 1]: the panel's shares of IU,
    IG_rho and IG_z, and the sum of |J| (for the rounding estimate)."""
    su = 0.0
    sr = 0.0
    sz = 0.0
    mag = 0.0
    for i in range(x.shape[0]):
        ph = a + L * x[i]
        sh = math.sin(0.5 * ph)
        vers = 2.0 * sh * sh
        c = 1.0 - vers
        J = _generator_integral(r0, z0, dr, dz, rho, z, vers) * w[i] * L
        su += (dr * (z0 - z) - dz * (r0 - rho + rho * vers)) * J
        sr += -dz * c * J
        sz += dr * J
        mag += abs(J)
    return su, sr, sz, mag


@njit(cache=True, inline="always")
def _band_at_point(p, rho, z, xh, wh, xl, wl):
    """(IU, IG_rho, IG_z), their signed refinement differences (high minus low rule) and the sum of
    magnitudes, for one band at a point (rho, 0, z) of its frame.
    IU = integral of ((x'-x).N')/R, IG = integral of N'/R (components along e_rho and the axis)."""
    r0 = p[12]
    z0 = p[13]
    r1 = p[14]
    z1 = p[15]
    sign = p[16]
    dr = r1 - r0
    dz = z1 - z0
    rmax = max(abs(r0), abs(r1), rho, 1e-300)
    dmin = _segment_distance(r0, z0, r1, z1, rho, z)
    eps = dmin / rmax
    m = 1
    if eps < 1.0:
        m = int(math.ceil(math.log(math.pi / max(eps, 1e-14)) / math.log(GRADING))) + 1
        if m < 1:
            m = 1
    iu = 0.0
    igr = 0.0
    igz = 0.0
    eu = 0.0
    egr = 0.0
    egz = 0.0
    mag = 0.0
    # panels [0, pi q^-m], then [pi q^-k, pi q^-(k-1)] for k = m .. 1 (q = GRADING)
    for k in range(m + 1):
        if k == 0:
            a = 0.0
            b = math.pi * GRADING ** (-m)
        else:
            a = math.pi * GRADING ** (-(m - k + 1))
            b = GRADING * a
        L = b - a
        hu, hr, hz, m_abs = _panel_sum(r0, z0, dr, dz, rho, z, a, L, xh, wh)
        lu, lr, lz, _ = _panel_sum(r0, z0, dr, dz, rho, z, a, L, xl, wl)
        mag += m_abs
        iu += hu
        igr += hr
        igz += hz
        eu += hu - lu
        egr += hr - lr
        egz += hz - lz
    f = 2.0 * sign  # the integral over [-pi, pi] is twice that over [0, pi]
    return f * iu, f * igr, f * igz, f * eu, f * egr, f * egz, mag


@njit(cache=True, parallel=True)
def band_body_field(points, kinds, params, xh, wh, xl, wl):
    """Unit-density, unit-G integrals IU (N,), IG (N, 3) over all BAND patches of one body (rows of
    `params` that share the body's frame); DU, DG the same minus their low-order values (signed), and
    RU (N,) a rounding estimate (a few hundred ulps of the sum of magnitudes, in IU's units)."""
    n = points.shape[0]
    IU = np.zeros(n)
    IG = np.zeros((n, 3))
    DU = np.zeros(n)
    DG = np.zeros((n, 3))
    RU = np.zeros(n)
    RG = np.zeros(n)
    for q in prange(n):
        for k in range(kinds.shape[0]):
            if kinds[k] != BAND:
                continue
            p = params[k]
            dx = points[q, 0] - p[0]
            dy = points[q, 1] - p[1]
            dz = points[q, 2] - p[2]
            z = dx * p[9] + dy * p[10] + dz * p[11]
            vx = dx - z * p[9]
            vy = dy - z * p[10]
            vz = dz - z * p[11]
            rho = math.sqrt(vx * vx + vy * vy + vz * vz)
            if rho > 0.0:
                ex = vx / rho
                ey = vy / rho
                ez = vz / rho
            else:
                ex = p[3]
                ey = p[4]
                ez = p[5]
            iu, igr, igz, du, dgr, dgz, mag = _band_at_point(p, rho, z, xh, wh, xl, wl)
            IU[q] += iu
            IG[q, 0] += igr * ex + igz * p[9]
            IG[q, 1] += igr * ey + igz * p[10]
            IG[q, 2] += igr * ez + igz * p[11]
            DU[q] += du
            DG[q, 0] += dgr * ex + dgz * p[9]
            DG[q, 1] += dgr * ey + dgz * p[10]
            DG[q, 2] += dgr * ez + dgz * p[11]
            ext = abs(p[12]) + abs(p[14]) + abs(p[13]) + abs(p[15]) + rho + abs(z)
            RU[q] += 64 * 2.220446049250313e-16 * mag * ext * ext
            RG[q] += 64 * 2.220446049250313e-16 * mag * ext
    return IU, IG, DU, DG, RU, RG


RULE_LADDER = ((5, 3), (7, 5), (9, 7), (N_HIGH, N_LOW))
"""(high, low) Gauss points per azimuth panel, cheapest first; the last is the default. A relative
tolerance picks the cheapest pair whose low rule should reach a tenth of it (a graded panel gains
about 1.1 digits a point, (2 + sqrt 3)^-2 per point); the signed difference of the two rules is the
field's error estimate either way, so a looser rule shows in the estimate and never hides."""
DIGITS_PER_POINT = 1.1


def rung_for(rtol: float | None) -> int:
    """Index in RULE_LADDER of the cheapest pair whose low rule should reach rtol / 10 (the default
    pair for None or anything tighter than it serves)."""
    if rtol is None:
        return len(RULE_LADDER) - 1
    for k, (_, low) in enumerate(RULE_LADDER):
        if 10.0 ** (-DIGITS_PER_POINT * low) <= 0.1 * rtol:
            return k
    return len(RULE_LADDER) - 1


def band_field(points, patchset, density, G, rtol: float | None = None):
    """Field of a uniform body bounded by BAND patches only (cylinder, tube, cone, frustum) at world
    points: (U J/kg, g m/s^2, dU, dg, rU, rg) with dU, dg the signed differences between a high and a
    low azimuth rule (a refinement error estimate that keeps its sign, so that integrals over a test
    surface can estimate their own error with the cancellations they have) and rU, rg rounding
    magnitudes. rtol: the relative accuracy wanted, which picks the rules (`rung_for`); None gives
    N_HIGH and N_LOW."""
    if np.any(patchset.kinds != BAND):
        raise ValueError("band_field needs a body bounded by bands only")
    points = np.ascontiguousarray(points, float).reshape(-1, 3)
    high, low = RULE_LADDER[rung_for(rtol)]
    xh, wh = gauss_unit(high)
    xl, wl = gauss_unit(low)
    with kernel_threads(points.shape[0] * len(patchset.kinds) * 50):
        IU, IG, DU, DG, RU, RG = band_body_field(points, patchset.kinds, patchset.params, xh, wh, xl, wl)
    fu = -0.5 * G * density
    fg = -G * density
    return fu * IU, fg * IG, fu * DU, fg * DG, abs(fu) * RU, abs(fg) * RG
