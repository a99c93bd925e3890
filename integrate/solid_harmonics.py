"""Complex solid harmonics in Racah normalisation, and weighted sums of them over many points.

Regular   R_lm(x) = sqrt(4 pi / (2l+1)) r^l Y_lm(theta, phi)
Irregular I_lm(x) = sqrt(4 pi / (2l+1)) r^(-l-1) Y_lm(theta, phi)
with Y_lm the orthonormal spherical harmonics with the Condon-Shortley phase (as scipy.special),
so that 1 / |x - y| = sum_lm conj(R_lm(x)) I_lm(y) for |x| < |y| (the addition theorem).
The factor sqrt(4 pi / (2l+1)) is Racah's normalisation of the spherical harmonics, C_lm (G. Racah,
"Theory of complex spectra. II", Phys. Rev. 62, 438 (1942)); with it the addition theorem carries no
4 pi / (2l+1), which is why the engine works in it. The moments shown to users are converted to the
orthonormal-Y_lm convention of the torsion-balance literature (see integrate/multipoles.py).
Only m >= 0 is stored: arrays are (L+1, L+1) complex with [l, m] (zero for m > l); the rest
follows from R_l,-m = (-1)^m conj(R_lm), and the same for I.

Recurrences (from the Legendre recurrences, for the unit vector u = x / r):
  R_00 = 1,  R_{m+1,m+1} = -sqrt((2m+1)/(2m+2)) (u_x + i u_y) R_mm,
  R_{l+1,m} = [(2l+1) u_z R_lm - sqrt((l+m)(l-m)) R_{l-1,m}] / sqrt((l+m+1)(l-m+1)),
then scaled by r^l (regular) or r^(-l-1) (irregular), which keeps them in range for any degree.
Units: the harmonics carry m^l or m^(-l-1).
"""

from __future__ import annotations

import math
from functools import lru_cache

import numpy as np
from numba import njit, prange


def _coefficients(L: int):
    """Recurrence coefficients: diag[m] for R_mm from R_{m-1,m-1}, and for R_{l+1,m}:
    up[l, m] = (2l+1) / sqrt((l+m+1)(l-m+1)), down[l, m] = sqrt((l+m)(l-m)) / sqrt((l+m+1)(l-m+1))."""
    diag = np.zeros(L + 1)
    up = np.zeros((L + 1, L + 1))
    down = np.zeros((L + 1, L + 1))
    for m in range(1, L + 1):
        diag[m] = -math.sqrt((2.0 * m - 1.0) / (2.0 * m))
    for m in range(L + 1):
        for l in range(m, L + 1):
            d = math.sqrt((l + m + 1.0) * (l - m + 1.0))
            up[l, m] = (2.0 * l + 1.0) / d
            down[l, m] = math.sqrt((l + m) * (l - m)) / d
    return diag, up, down


@njit(cache=True)
def _unit_harmonics(ux, uy, uz, L, diag, up, down, out):
    """Fill out[l, m] (m >= 0, l >= m) with R_lm of the unit vector (ux, uy, uz)."""
    out[0, 0] = 1.0
    w = complex(ux, uy)
    for m in range(L + 1):
        if m > 0:
            out[m, m] = diag[m] * w * out[m - 1, m - 1]
        if m + 1 <= L:
            out[m + 1, m] = up[m, m] * uz * out[m, m]
        for l in range(m + 1, L):
            out[l + 1, m] = up[l, m] * uz * out[l, m] - down[l, m] * out[l - 1, m]


@njit(cache=True)
def _accumulate(points, weights, L, irregular, lo, hi, diag, up, down, acc, work):
    for i in range(lo, hi):
        x = points[i, 0]
        y = points[i, 1]
        z = points[i, 2]
        r = math.sqrt(x * x + y * y + z * z)
        w = weights[i]
        if r == 0.0:
            if irregular:
                acc[0, 0] += np.nan
            else:
                acc[0, 0] += w
            continue
        _unit_harmonics(x / r, y / r, z / r, L, diag, up, down, work)
        if irregular:
            s = w / r
            f = 1.0 / r
        else:
            s = w
            f = r
        for l in range(L + 1):
            for m in range(l + 1):
                acc[l, m] += s * work[l, m]
            s *= f


@njit(cache=True, parallel=True)
def _weighted_sum_parallel(points, weights, L, irregular, n_chunks, diag, up, down):
    n = points.shape[0]
    parts = np.zeros((n_chunks, L + 1, L + 1), dtype=np.complex128)
    for c in prange(n_chunks):
        lo = (n * c) // n_chunks
        hi = (n * (c + 1)) // n_chunks
        work = np.zeros((L + 1, L + 1), dtype=np.complex128)
        _accumulate(points, weights, L, irregular, lo, hi, diag, up, down, parts[c], work)
    out = np.zeros((L + 1, L + 1), dtype=np.complex128)
    for c in range(n_chunks):
        out += parts[c]
    return out


@njit(cache=True)
def _weighted_sum_serial(points, weights, L, irregular, diag, up, down):
    acc = np.zeros((L + 1, L + 1), dtype=np.complex128)
    work = np.zeros((L + 1, L + 1), dtype=np.complex128)
    _accumulate(points, weights, L, irregular, 0, points.shape[0], diag, up, down, acc, work)
    return acc


def weighted_sum(points, weights, L: int, irregular: bool) -> np.ndarray:
    """sum_i weights[i] * R_lm(points[i]) (or I_lm when `irregular`), as an (L+1, L+1) array, m >= 0.
    Points (N, 3) in m, relative to the expansion centre; weights (N,) e.g. in kg."""
    p = np.ascontiguousarray(points, dtype=float).reshape(-1, 3)
    w = np.ascontiguousarray(weights, dtype=float).reshape(-1)
    diag, up, down = _coefficients_cached(int(L))
    if len(p) * (L + 1) ** 2 < 200_000:
        return _weighted_sum_serial(p, w, int(L), bool(irregular), diag, up, down)
    import numba

    chunks = max(1, min(4 * numba.get_num_threads(), len(p) // 64))
    return _weighted_sum_parallel(p, w, int(L), bool(irregular), chunks, diag, up, down)


@lru_cache(maxsize=32)
def _coefficients_cached(L: int):
    return _coefficients(L)


def regular(points, L: int) -> np.ndarray:
    """R_lm at each point: (N, L+1, L+1) complex (m >= 0). For tests and small inputs."""
    p = np.asarray(points, float).reshape(-1, 3)
    return np.stack([weighted_sum(q[None, :], np.ones(1), L, False) for q in p])


def irregular(points, L: int) -> np.ndarray:
    """I_lm at each point: (N, L+1, L+1) complex (m >= 0). For tests and small inputs."""
    p = np.asarray(points, float).reshape(-1, 3)
    return np.stack([weighted_sum(q[None, :], np.ones(1), L, True) for q in p])


def full_m(a: np.ndarray) -> np.ndarray:
    """(L+1, L+1) array for m >= 0 -> (L+1, 2L+1) array over m = -L..L (index m + L), using
    X_l,-m = (-1)^m conj(X_lm)."""
    L = a.shape[0] - 1
    out = np.zeros((L + 1, 2 * L + 1), dtype=complex)
    m = np.arange(L + 1)
    out[:, L + m] = a
    out[:, L - m[1:]] = ((-1.0) ** m[1:]) * np.conj(a[:, 1:])
    mask = np.abs(np.arange(-L, L + 1))[None, :] <= np.arange(L + 1)[:, None]
    return np.where(mask, out, 0.0)
