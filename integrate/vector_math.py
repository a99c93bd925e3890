"""Branch-free arctangent and logarithm for numba loops that the compiler can vectorise (SIMD).

numba calls the scalar C library for np.arctan2 / np.log1p, which stops loop vectorisation and costs
50-70 ns a call; the polyhedron kernel makes one of each per face and edge and point. These versions
use only arithmetic, sqrt-free polynomial evaluation, selects and a bit cast, so a loop over faces
or edges runs several lanes at once. Accuracy: a few units in the last place (checked against
numpy in tests/test_vector_math.py).

- atan2_fast(y, x): reduction to t = min/max in [0, 1], then t > tan(pi/8) -> (t - 1)/(t + 1) with
  an offset of pi/4 (one division in all), then atan(t) = t p(t^2) with p a degree-12 Chebyshev fit (computed at import
  in numpy) on [0, tan^2(pi/8)]; quadrant by selects.
- log1p_fast(x) for x >= 0: u = 1 + x = m 2^k with m in [sqrt(1/2), sqrt(2)) from the exponent
  bits, log m = 2 atanh(f), f = (m - 1)/(m + 1), by its Taylor series (|f| <= 0.172, 11 terms),
  plus the rounding correction (x - (u - 1))/u ~ (x - (u - 1))(2 - u) that keeps log1p accurate
  for small x (one division in all).
"""

from __future__ import annotations

import numpy as np
from llvmlite import ir
from numba import njit, types
from numba.extending import intrinsic

_TAN_PI_8 = np.tan(np.pi / 8)


def _atan_coefficients(degree=12):
    """Power-series coefficients c_k of atan(t)/t = sum c_k z^k, z = t^2 in [0, tan^2(pi/8)],
    by a Chebyshev interpolant at 4x oversampled Chebyshev points (numpy)."""
    zmax = _TAN_PI_8 ** 2
    k = np.arange(4 * (degree + 1))
    x = np.cos(np.pi * (k + 0.5) / k.size)
    z = 0.5 * zmax * (x + 1.0)
    t = np.sqrt(z)
    y = np.where(t > 0, np.arctan(t) / np.where(t > 0, t, 1.0), 1.0)
    cheb = np.polynomial.chebyshev.Chebyshev.fit(z, y, degree, domain=[0.0, zmax])
    return np.ascontiguousarray(cheb.convert(kind=np.polynomial.Polynomial).coef)


_ATAN_C = _atan_coefficients()
_ATAN_DEG = _ATAN_C.shape[0] - 1
(_A0, _A1, _A2, _A3, _A4, _A5, _A6, _A7, _A8, _A9, _A10, _A11, _A12) = [float(c) for c in _ATAN_C]
_LN2_HI = 0.6931471803691238164901733398437500          # ln 2 split so k * _LN2_HI is exact
_LN2_LO = 1.9082149292705877000220157337e-10
_SQRT2 = float(np.sqrt(2.0))


@intrinsic
def _bits(typingctx, x):
    """The IEEE-754 bit pattern of a float64 as an int64."""
    sig = types.int64(types.float64)

    def codegen(context, builder, signature, args):
        return builder.bitcast(args[0], ir.IntType(64))

    return sig, codegen


@intrinsic
def _from_bits(typingctx, k):
    """The float64 with the given int64 bit pattern."""
    sig = types.float64(types.int64)

    def codegen(context, builder, signature, args):
        return builder.bitcast(args[0], ir.DoubleType())

    return sig, codegen


@njit(cache=True, inline="always", error_model="numpy")
def atan2_fast(y, x):
    """atan2(y, x) in (-pi, pi]; atan2(0, 0) = 0. Finite arguments only."""
    ay = abs(y)
    ax = abs(x)
    big = max(ax, ay)
    small = min(ax, ay)
    # one division: t = small/big, or (t - 1)/(t + 1) = (small - big)/(small + big) past tan(pi/8)
    hi = small > _TAN_PI_8 * big
    num = small - big if hi else small
    den = small + big if hi else big
    t = num / den if big > 0.0 else 0.0
    z = t * t
    p = _A12
    p = p * z + _A11
    p = p * z + _A10
    p = p * z + _A9
    p = p * z + _A8
    p = p * z + _A7
    p = p * z + _A6
    p = p * z + _A5
    p = p * z + _A4
    p = p * z + _A3
    p = p * z + _A2
    p = p * z + _A1
    p = p * z + _A0
    a = t * p
    a = a + 0.7853981633974483 if hi else a
    a = 1.5707963267948966 - a if ay > ax else a
    a = 3.141592653589793 - a if x < 0.0 else a
    return -a if y < 0.0 else a


@njit(cache=True, inline="always", error_model="numpy")
def log1p_fast(x):
    """log(1 + x) for 0 <= x < inf, to a few ulp, also for tiny x."""
    u = 1.0 + x
    bits = _bits(u)
    k = ((bits >> 52) & 0x7FF) - 1023
    m = _from_bits((bits & 0x000FFFFFFFFFFFFF) | 0x3FF0000000000000)   # in [1, 2)
    shift = m > _SQRT2
    m = 0.5 * m if shift else m
    k = k + 1 if shift else k
    f = (m - 1.0) / (m + 1.0)
    w = f * f
    s = 1.0 / 23.0
    s = s * w + 1.0 / 21.0
    s = s * w + 1.0 / 19.0
    s = s * w + 1.0 / 17.0
    s = s * w + 1.0 / 15.0
    s = s * w + 1.0 / 13.0
    s = s * w + 1.0 / 11.0
    s = s * w + 1.0 / 9.0
    s = s * w + 1.0 / 7.0
    s = s * w + 1.0 / 5.0
    s = s * w + 1.0 / 3.0
    kf = float(k)
    log_m = 2.0 * f + 2.0 * f * w * s
    # rounding of u = 1 + x, divided by u; only matters for u near 1, where 1/u ~ 2 - u
    corr = (x - (u - 1.0)) * (2.0 - u) if u < 2.0 else 0.0
    return kf * _LN2_HI + (log_m + (kf * _LN2_LO + corr))
