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
the refinement error estimate. The generator integral is formed so that nothing cancels near the band or
far from it (`_generator_integral`), and beside the values comes a first-order bound of their rounding
error built from the operations actually done (a few U_ROUND per operation times its operands, each
carried through the steps that follow with its conditioning, and U_ROUND times every partial sum):
for a 3 mm cylinder 10 to 100 sizes away it is 50 to 100 times the largest true error measured against
30-digit mpmath (tests/test_field_band.py); a bound of 64 eps sum|J| ext^2 had been 1e-10 of the field.
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


U_ROUND = 2.0**-53
"""Unit roundoff of IEEE doubles: each +, -, *, / and sqrt is exact times (1 + d), |d| <= U_ROUND."""
LIB_ULPS = 4.0
"""log1p, asinh and sin are taken within LIB_ULPS * U_ROUND relative (2 ulps; glibc states 1 to 2 ulps
for these, from memory)."""


ODD_RECIPROCALS = np.array([1.0 / (2 * k + 1) for k in range(40)])
"""1 / (2k + 1), the coefficients of the atanh series (each within U_ROUND of its value)."""


@njit(cache=True, inline="always")
def _log1p_and_gap(x):
    """(log1p(x), x - log1p(x)) for x >= 0, the second without cancellation: with y = x / (2 + x),
    log1p(x) = 2 atanh(y) = 2 (y + s), s = y^3/3 + y^5/5 + ..., and x - log1p(x) = x y - 2 s, the
    series summed to rounding for x < 0.5 (y < 0.2, no term larger than 5 % of the first; y within
    2 U_ROUND and s within a few, so log1p within 3.1 U_ROUND, inside LIB_ULPS); above, log1p(x) from
    the library and the gap directly, where it is at least a fifth of x."""
    if x >= 0.5:
        L = math.log1p(x)
        return L, x - L
    y = x / (2.0 + x)
    y2 = y * y
    t = y * y2
    s = 0.0
    for k in range(1, 40):
        s += t * ODD_RECIPROCALS[k]
        t *= y2
        if t < 1e-18 * s:
            break
    return 2.0 * (y + s), x * y - 2.0 * s


@njit(cache=True, inline="always")
def _band_constants(r0, z0, dr, dz, rho, z):
    """What the generator integrals of one band at one point (rho, 0, z) of its frame share over the
    azimuth nodes: the generator (r0, z0) + s (dr, dz), A = dr^2 + dz^2, sqrt A, the offsets of its ends
    from the point, J's coefficients r0 / sqrt A, (r0 + dr) / sqrt A and dr / A, and the parts of the
    squared distances that do not depend on the node (each formed as `_generator_integral` used them)."""
    A = dr * dr + dz * dz
    sa = math.sqrt(A)
    u = r0 - rho
    w = z0 - z
    r1 = r0 + dr
    k = r0 * dz - w * dr
    return (r0, dr, dz, rho, A, sa, u, w, u + dr, w + dz, 2.0 * r0 * rho, 2.0 * r1 * rho,
            r0 / sa, r1 / sa, dr / A, 1.0 / sa, 1.0 / A, k, k * k + rho * rho * dr * dr,
            abs(r0 * dz) + abs(w * dr))


@njit(cache=True, inline="always")
def _generator_integral(bc, vers, bound):
    """(J, eJ): J = integral over s in [0, 1] of r(s) / |x'(s) - x| for the generator at azimuth offset
    phi' (vers = 1 - cos phi' = 2 sin^2(phi'/2)), point at cylindrical (rho, 0, z) in the body frame
    (`_band_constants`);
    eJ a first-order bound of J's rounding error when `bound` (else 0).

    Along the generator |x' - x| = sqrt(a^2 + h^2), a = a0 + sqrt(A) s the projection on the generator
    (a0 = B / (2 sqrt A) at s = 0, a1 = a0 + sqrt A at s = 1), h the distance
    from the point to the line.
    Then sqrt(A) i0 = L = integral of da / sqrt(a^2 + h^2) and A i1 = K = integral of (a - a0) da /
    sqrt(a^2 + h^2), J = r0 i0 + dr i1. Three branches, none of which cancels near the generator or far:
    - a0 >= 0 (the foot of the perpendicular before s = 0): with D = sqrt(a^2 + h^2) + a,
      L = log1p(d), d = D1/D0 - 1 = (sqrt A + P1 - P0) / (P0 + a0), P1 - P0 = (A + B)/(P0 + P1) (>= 0),
      and K = a0 (d - log1p d) + h^2 d^2 / (2 D1): both terms positive (d - log1p d by `_log1p_and_gap`,
      h^2 = (P0 - a0)(P0 + a0), good to a few ulps of P0 / h where h << P0 makes its term (h/P0)^2 of K);
    - a1 < 0 (foot past s = 1): the same about the s = 1 end (b = -a), J = r1 i0 - dr i1' with
      i1' = integral of (1 - s)/|x' - x|;
    - otherwise (foot on the generator): L = asinh(a1/h) + asinh(-a0/h), K = (P1 - P0) - a0 L, where
      -a0 L >= 0 and |P1 - P0| <= 2 |a0| L.
    J = (r0 / sqrt A) L + (dr / A) K, the coefficients the band's own (`_band_constants`; each within
    3 U_ROUND as L / sqrt A and K / A were, so the bound is unchanged); the bound's divisions by one
    quantity are products with its reciprocal (it moves by an ulp or so).
    The rounding bound follows each operation (U_ROUND per operation times the magnitude of its operands,
    LIB_ULPS for log1p, asinh and sin) to first order, with the conditioning of each step; the error of
    B (the projection a0) is carried as a shift of a0 and a1 together, whose effect on L and K is their
    derivative along the generator (1/P1 - 1/P0 and sqrt(A)/P1 - L), small far away (a1 is formed as
    a0 + sqrt A there, by its own components near the s = 1 end). r0, z0, dr, dz,
    rho, z are taken as given; the differences r0 - rho, z0 - z are rounded once (a shift of the point
    by a relative U_ROUND of its offset, whose effect on J is within the few-ulp terms)."""
    r0, dr, dz, rho, A, sa, u, w, u1, w1, c2r0, c2r1, cr0, cr1, cdA, inv_sa, inv_A, k, kk, kmag = bc
    # vers = 1 - cos phi' = 2 sin^2(phi'/2), given exactly: near phi' = 0 nothing below cancels
    t1 = u + rho * vers
    hB = dr * t1 + w * dz  # B / 2: Q(s) = A s^2 + B s + C
    a0 = hB / sa
    # |x'(0) - x|^2 and |x'(1) - x|^2 by components (not from A, B), so they keep their digits near the ends
    C = u * u + c2r0 * vers + w * w
    q1 = u1 * u1 + c2r1 * vers + w1 * w1
    P0 = math.sqrt(C)
    P1 = math.sqrt(q1)
    # a1 = a0 + sqrt A exactly; formed so where the point is farther from the s = 1 end than the
    # generator is long (an error of B then shifts a0 and a1 alike, which far away hardly changes L or
    # K), and by its own components nearer (where a0 + sqrt A would cancel)
    tied = P1 >= sa
    if tied:
        a1 = a0 + sa
    else:
        a1 = (dr * (u1 + rho * vers) + w1 * dz) / sa
    S = P0 + P1
    ApB = A + 2.0 * hB  # = q1 - C
    dP = ApB / S  # P1 - P0
    U = U_ROUND
    if bound:
        # B/2's roundings (the product rho vers, u + rho vers, dr (..), w dz, the sum), with vers as given
        # (its error is the node's, see _panel_sum)
        ehB = U * (abs(dr) * (rho * vers + 2.0 * abs(t1)) + abs(w * dz) + abs(hB))
        ea_t = ehB * inv_sa  # the error of B / 2, a shift of a0 and a1 together
        ea_d = 3.0 * U * abs(a0)  # the division's (and sqrt A's) rounding, in a0 and a1 only
        if tied:
            e1i = U * (2.0 * sa + abs(a1))  # a1's own: sqrt A and the sum
        else:
            e1i = 5.0 * U * (abs(dr) * (abs(u1) + rho * vers) + abs(w1 * dz)) * inv_sa + 3.0 * U * abs(a1)
        eApB = 2.0 * U * A + 2.0 * ehB + U * abs(ApB)
        edP = eApB / S + 6.0 * U * abs(dP)  # P0, P1 within 4 U each (C, q1 sums of 3 positive terms)
    eJ = 0.0
    if a0 >= 0.0 or a1 < 0.0:
        # the end nearer the foot: s = 0 (n = a0 >= 0) or s = 1 (n = -a1 > 0), far end the other
        if a0 >= 0.0:
            n = a0
            Pn = P0
            num = sa + dP
            cL = cr0
            cK = cdA
        else:
            n = -a1
            Pn = P1
            num = sa - dP
            cL = cr1
            cK = -cdA
        den = Pn + n
        d = num / den
        L, gap = _log1p_and_gap(d)
        Df = den + num
        # h^2 d^2 / (2 D1) with h^2 = (Pn - n)(Pn + n) from the near end's own digits (where h << n the
        # difference loses digits but the term is then (h/n)^2 of K)
        hn = Pn - n
        if hn < 0.0:
            hn = 0.0
        t2 = hn * num * d / (2.0 * Df)
        K = n * gap + t2
        J = cL * L + cK * K
        if bound:
            if a0 >= 0.0:
                en = ea_t + ea_d
            elif tied:
                en = ea_t + ea_d + e1i
            else:
                en = e1i
            # J = (rn / sqrt A) L(num, den) +- (dr / A) K(num, den, hn, n): its first-order change with
            # each primary error (num, Pn, n) and each rounding on the way, summed with its sign inside J
            # (so that where rn i0 and dr i1 nearly cancel, their common error from d does too)
            enum = 2.0 * U * sa + edP + 2.0 * U * num  # with the division num / den's rounding
            inv_den = 1.0 / den
            inv_Df = 1.0 / Df
            inv_1d = 1.0 / (1.0 + d)
            q = d * inv_1d
            c2 = 0.5 * num * num * inv_den * inv_Df  # dK/dhn
            J_num = cL * inv_1d * inv_den + cK * (n * q * inv_den + t2 * (2.0 / num - inv_Df))
            J_den = -cL * q * inv_den + cK * (-n * q * d * inv_den - t2 * (inv_den + inv_Df))
            J_hn = cK * c2
            J_n = J_den - J_hn + cK * gap
            own_gap = 6.0 * U * gap if d < 0.5 else U * (d + (LIB_ULPS + 1.0) * L + gap)
            eJ = (abs(J_num) * enum + abs(J_den + J_hn) * 4.0 * U * Pn + abs(J_n) * en
                  + abs(J_den) * U * den + abs(J_hn) * U * hn
                  + cL * (LIB_ULPS + 3.0) * U * L
                  + abs(cK) * (n * own_gap + U * n * gap + 5.0 * U * t2 + U * K + 3.0 * U * K)
                  + 3.0 * U * (cL * L + abs(cK) * K))
    else:
        # squared distance from the point to the generator's line, |(x'(0) - x) x t|^2 / A by components
        m = w * dr - u * dz + k * vers
        X = vers * (2.0 - vers) * kk + m * m
        h2 = X / A
        floor = 1e-300 + 1e-28 * C
        if h2 < floor:
            h2 = floor
        h = math.sqrt(h2)
        L = math.asinh(a1 / h) + math.asinh(-a0 / h)
        K = dP - a0 * L
        J = cr0 * L + cdA * K
        if bound:
            mmag = abs(w * dr) + abs(u * dz) + abs(k) * vers
            eX = (8.0 * U * X + vers * (2.0 - vers) * 4.0 * U * abs(k) * kmag
                  + 2.0 * abs(m) * U * (7.0 * mmag + 2.0 * vers * kmag))
            eh = (eX * inv_A + 3.0 * U * h2) / (2.0 * h) + U * h
            eL_i = e1i / P1 + eh * (a1 / P1 - a0 / P0) / h + (LIB_ULPS + 2.0) * U * L
            if tied:
                dinv = abs(dP) / (P0 * P1)  # |1/P1 - 1/P0|: dL/da0 along the generator
                eL = (ea_t + ea_d) * dinv + eL_i
                eK = (ea_t * abs(sa / P1 - L) + ea_d * (L + abs(a0) * dinv)
                      + (2.0 * ea_t * abs(dP) + 2.0 * U * A + U * abs(ApB)) / S + 6.0 * U * abs(dP)
                      + abs(a0) * eL_i + 2.0 * U * (abs(dP) + abs(a0) * L))
            else:
                eL = (ea_t + ea_d) / P0 + eL_i
                eK = edP + abs(a0) * eL + (ea_t + ea_d) * L + 2.0 * U * (abs(dP) + abs(a0) * L)
            # J's coefficients within 3 U (sqrt A or A and the division), the products and the sum
            eJ = cr0 * eL + abs(cdA) * eK + 6.0 * U * (cr0 * L + abs(cdA) * abs(K))
    return J, eJ


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
def _two_sum(s, x):
    """(s + x rounded, its exact rounding error) by Knuth's TwoSum (no branch)."""
    t = s + x
    v = t - s
    return t, (s - (t - v)) + (x - v)


@njit(cache=True, inline="always")
def _panel_sum(bc, z0, z, nodes, bound):
    """One azimuth panel by its Gauss nodes (`azimuth_tables`: vers, cos and weight times the panel's
    length of each node): the panel's shares of IU,
    IG_rho and IG_z, and (when `bound`) first-order bounds of their rounding errors: each node's J
    error and its coefficient's times the other factor, and the products'. The node terms are summed
    with their rounding errors carried (TwoSum, Ogita, Rump and Oishi's Sum2, SIAM J. Sci. Comput. 26,
    2005; from memory), whose result is within U_ROUND |sum| + (n U_ROUND)^2 sum |terms| (their bound,
    with a margin): the terms of the side's IU change sign round the azimuth."""
    su = 0.0
    sr = 0.0
    sz = 0.0
    cu_ = 0.0
    cr_ = 0.0
    cz_ = 0.0
    au = 0.0
    ar = 0.0
    az = 0.0
    eu = 0.0
    er = 0.0
    ez = 0.0
    U = U_ROUND
    r0, dr, dz, rho = bc[0], bc[1], bc[2], bc[3]
    n = nodes.shape[0]
    for i in range(n):
        vers = nodes[i, 0]
        c = nodes[i, 1]
        wl = nodes[i, 2]
        Jg, eJg = _generator_integral(bc, vers, bound)
        J = Jg * wl
        cu = dr * (z0 - z) - dz * (r0 - rho + rho * vers)
        tu = cu * J
        tr = -dz * c * J
        tz = dr * J
        su, e = _two_sum(su, tu)
        cu_ += e
        sr, e = _two_sum(sr, tr)
        cr_ += e
        sz, e = _two_sum(sz, tz)
        cz_ += e
        if bound:
            # vers is within 2 LIB_ULPS + 1 of U (sin, its square): a shift of the node that changes
            # |x' - x|^2 by as much relative, J by half that
            ev = (2.0 * LIB_ULPS + 1.0) * U * vers
            eJ = eJg * wl + (3.0 + LIB_ULPS + 1.0) * U * abs(J)
            ecu = 2.0 * U * abs(dr * (z0 - z)) + abs(dz) * (3.0 * U * abs(r0 - rho) + rho * ev + 3.0 * U * rho * vers) + U * abs(cu)
            eu += abs(cu) * eJ + ecu * abs(J) + U * abs(tu)
            er += abs(dz * c) * eJ + abs(dz * J) * (U * abs(c) + ev + U) + 2.0 * U * abs(tr)
            ez += abs(dr) * eJ + U * abs(tz)
            au += abs(tu)
            ar += abs(tr)
            az += abs(tz)
    su += cu_
    sr += cr_
    sz += cz_
    if bound:
        g2 = 1.01 * (n * U) ** 2
        eu += U * abs(su) + g2 * au
        er += U * abs(sr) + g2 * ar
        ez += U * abs(sz) + g2 * az
    return su, sr, sz, eu, er, ez


MAX_PANELS = 40
"""Rows of the azimuth tables: the grading gives at most 32 panels (eps floored at 1e-14)."""


@njit(cache=True)
def _azimuth_nodes(x, w):
    """(2, MAX_PANELS, n, 3) table of a Gauss rule (x, w) on [0, 1] placed on the graded azimuth panels:
    [0, m] the first panel [0, pi q^-m] of a point graded in m panels, [1, j] the panel
    [pi q^-j, pi q^-(j-1)] (q = GRADING); for each node vers = 1 - cos phi' = 2 sin^2(phi'/2), cos phi'
    = 1 - vers and the weight times the panel's length. The same for every point and band, so computed
    once for each rule."""
    n = x.shape[0]
    t = np.zeros((2, MAX_PANELS, n, 3))
    for j in range(1, MAX_PANELS):
        for side in range(2):
            if side == 0:
                a = 0.0
                b = math.pi * GRADING ** (-j)
            else:
                a = math.pi * GRADING ** (-j)
                b = GRADING * a
            L = b - a
            for i in range(n):
                ph = a + L * x[i]
                sh = math.sin(0.5 * ph)
                vers = 2.0 * sh * sh
                t[side, j, i, 0] = vers
                t[side, j, i, 1] = 1.0 - vers
                t[side, j, i, 2] = w[i] * L
    return t


_TABLES = {}


def azimuth_tables(high: int, low: int):
    """The azimuth node tables (`_azimuth_nodes`) of the high and the low Gauss rule, kept per pair."""
    key = (high, low)
    if key not in _TABLES:
        xh, wh = gauss_unit(high)
        xl, wl = gauss_unit(low)
        th, tl = _azimuth_nodes(xh, wh), _azimuth_nodes(xl, wl)
        th.setflags(write=False)
        tl.setflags(write=False)
        _TABLES[key] = (th, tl)
    return _TABLES[key]


@njit(cache=True, inline="always")
def _band_at_point(p, rho, z, th, tl, full):
    """(IU, IG_rho, IG_z), their signed refinement differences (high minus low rule) and first-order
    bounds of the high rule's rounding errors, for one band at a point (rho, 0, z) of its frame.
    IU = integral of ((x'-x).N')/R, IG = integral of N'/R (components along e_rho and the axis).
    With `full` False the high rule's values alone (the same bits; differences and bounds 0)."""
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
    ru = 0.0
    rgr = 0.0
    rgz = 0.0
    U = U_ROUND
    bc = _band_constants(r0, z0, dr, dz, rho, z)
    # panels [0, pi q^-m], then [pi q^-k, pi q^-(k-1)] for k = m .. 1 (q = GRADING)
    for k in range(m + 1):
        side = 0 if k == 0 else 1
        j = m if k == 0 else m - k + 1
        if not full:
            hu, hr, hz, _, _, _ = _panel_sum(bc, z0, z, th[side, j], False)
            iu += hu
            igr += hr
            igz += hz
            continue
        hu, hr, hz, bu, br, bz = _panel_sum(bc, z0, z, th[side, j], True)
        lu, lr, lz, _, _, _ = _panel_sum(bc, z0, z, tl[side, j], False)
        iu += hu
        igr += hr
        igz += hz
        ru += bu + U * abs(iu)
        rgr += br + U * abs(igr)
        rgz += bz + U * abs(igz)
        eu += hu - lu
        egr += hr - lr
        egz += hz - lz
    f = 2.0 * sign  # the integral over [-pi, pi] is twice that over [0, pi]
    return f * iu, f * igr, f * igz, f * eu, f * egr, f * egz, 2.0 * ru, 2.0 * rgr, 2.0 * rgz


@njit(cache=True, inline="always")
def _same_frame(p, f):
    """Whether patch row p has the frame (origin, axes: entries 0..11) of row f."""
    for i in range(12):
        if p[i] != f[i]:
            return False
    return True


@njit(cache=True, inline="always")
def _point_in_frame(point, p):
    """(rho, z, e_rho) of a world point in the frame of patch row p (e_rho: the frame's first axis on
    the axis)."""
    dx = point[0] - p[0]
    dy = point[1] - p[1]
    dz = point[2] - p[2]
    z = dx * p[9] + dy * p[10] + dz * p[11]
    vx = dx - z * p[9]
    vy = dy - z * p[10]
    vz = dz - z * p[11]
    rho = math.sqrt(vx * vx + vy * vy + vz * vz)
    if rho > 0.0:
        return rho, z, vx / rho, vy / rho, vz / rho
    return rho, z, p[3], p[4], p[5]


@njit(cache=True, parallel=True)
def band_body_field(points, kinds, params, th, tl, full=True):
    """Unit-density, unit-G integrals IU (N,), IG (N, 3) over all BAND patches of one body (rows of
    `params` that share the body's frame); DU, DG the same minus their low-order values (signed); RU
    (N,) and RG (N,) first-order bounds of the rounding errors of IU and of IG (2-norm), in their units:
    each band's (`_band_at_point`), U_ROUND times each partial sum over the bands (where the bands'
    shares cancel, e.g. the two end discs far away), and the turn of the frame's sum into the world axes
    (6 ulps of it: e_rho and the axis are unit vectors within a few ulps). The bands are summed in their
    frame before the turn, so the turn's rounding is of the sum, not of each band's share. The point's
    frame coordinates (rho, z) are taken as the point (their rounding moves it by a relative U_ROUND of
    its offset from the body's origin)."""
    n = points.shape[0]
    IU = np.zeros(n)
    IG = np.zeros((n, 3))
    DU = np.zeros(n)
    DG = np.zeros((n, 3))
    RU = np.zeros(n)
    RG = np.zeros(n)
    U = U_ROUND
    for q in prange(n):
        f = -1  # the row whose frame the running sums are in
        su = 0.0
        sgr = 0.0
        sgz = 0.0
        sdu = 0.0
        sdgr = 0.0
        sdgz = 0.0
        ru = 0.0
        rg = 0.0
        rho = 0.0
        z = 0.0
        ex = 0.0
        ey = 0.0
        ez = 0.0
        for k in range(kinds.shape[0] + 1):
            if k < kinds.shape[0] and kinds[k] != BAND:
                continue
            if f >= 0 and (k == kinds.shape[0] or not _same_frame(params[k], params[f])):
                pf = params[f]
                IU[q] += su
                IG[q, 0] += sgr * ex + sgz * pf[9]
                IG[q, 1] += sgr * ey + sgz * pf[10]
                IG[q, 2] += sgr * ez + sgz * pf[11]
                DU[q] += sdu
                DG[q, 0] += sdgr * ex + sdgz * pf[9]
                DG[q, 1] += sdgr * ey + sdgz * pf[10]
                DG[q, 2] += sdgr * ez + sdgz * pf[11]
                RU[q] += ru + U * abs(IU[q])
                RG[q] += rg + 6.0 * U * (abs(sgr) + abs(sgz)) + U * (abs(IG[q, 0]) + abs(IG[q, 1]) + abs(IG[q, 2]))
                f = -1
            if k == kinds.shape[0]:
                break
            p = params[k]
            if f < 0:
                f = k
                rho, z, ex, ey, ez = _point_in_frame(points[q], p)
                su = 0.0
                sgr = 0.0
                sgz = 0.0
                sdu = 0.0
                sdgr = 0.0
                sdgz = 0.0
                ru = 0.0
                rg = 0.0
            iu, igr, igz, du, dgr, dgz, bu, bgr, bgz = _band_at_point(p, rho, z, th, tl, full)
            su += iu
            sgr += igr
            sgz += igz
            sdu += du
            sdgr += dgr
            sdgz += dgz
            ru += bu + U * abs(su)
            rg += bgr + bgz + U * (abs(sgr) + abs(sgz))
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


def _band_integrals(points, patchset, rtol, full):
    """band_body_field at world points with the rules `rtol` picks; a body of bands only."""
    if np.any(patchset.kinds != BAND):
        raise ValueError("band_field needs a body bounded by bands only")
    points = np.ascontiguousarray(points, float).reshape(-1, 3)
    high, low = RULE_LADDER[rung_for(rtol)]
    th, tl = azimuth_tables(high, low)
    work = points.shape[0] * len(patchset.kinds) * (50 if full else 25)
    with kernel_threads(work):
        return band_body_field(points, patchset.kinds, patchset.params, th, tl, full)


def band_field(points, patchset, density, G, rtol: float | None = None):
    """Field of a uniform body bounded by BAND patches only (cylinder, tube, cone, frustum) at world
    points: (U J/kg, g m/s^2, dU, dg, rU, rg) with dU, dg the signed differences between a high and a
    low azimuth rule (a refinement error estimate that keeps its sign, so that integrals over a test
    surface can estimate their own error with the cancellations they have) and rU, rg bounds of the
    rounding errors of U and of g (2-norm; `band_body_field`). rtol: the relative accuracy wanted, which
    picks the rules (`rung_for`); None gives N_HIGH and N_LOW."""
    IU, IG, DU, DG, RU, RG = _band_integrals(points, patchset, rtol, True)
    fu = -0.5 * G * density
    fg = -G * density
    return fu * IU, fg * IG, fu * DU, fg * DG, abs(fu) * RU, abs(fg) * RG


def band_values(points, patchset, density, G, rtol: float | None = None):
    """(U J/kg, g m/s^2) of `band_field` alone, the same bits, without the low rule and the rounding
    bounds (about a third of the work: for nodes where only the values are used, such as the smaller
    rules of a surface quadrature)."""
    IU, IG, _, _, _, _ = _band_integrals(points, patchset, rtol, False)
    return -0.5 * G * density * IU, -G * density * IG
