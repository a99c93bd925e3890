"""The vectorisable arctangent and logarithm against numpy's (C library) versions."""

import numpy as np
from numba import njit

from truepull.integrate.vector_math import atan2_fast, log1p_fast


@njit(error_model="numpy")
def _atan2_all(y, x, out):
    for i in range(y.shape[0]):
        out[i] = atan2_fast(y[i], x[i])


@njit(error_model="numpy")
def _log1p_all(x, out):
    for i in range(x.shape[0]):
        out[i] = log1p_fast(x[i])


def ulps(a, ref):
    return np.abs(a - ref) / np.spacing(np.maximum(np.abs(ref), np.finfo(float).tiny))


def test_atan2_matches_numpy_to_a_few_ulp():
    # Reference: numpy.arctan2 (C library, correctly rounded to within 1 ulp).
    rng = np.random.default_rng(0)
    n = 200000
    y = rng.normal(size=n) * np.exp(rng.uniform(-40, 40, n))
    x = rng.normal(size=n) * np.exp(rng.uniform(-40, 40, n))
    special = np.array([[0.0, 1.0], [0.0, -1.0], [1.0, 0.0], [-1.0, 0.0], [1.0, 1.0],
                        [1.0, -1.0], [-1.0, -1.0], [np.tan(np.pi / 8), 1.0], [0.0, 0.0]])
    y = np.concatenate([y, special[:, 0]])
    x = np.concatenate([x, special[:, 1]])
    out = np.empty_like(y)
    _atan2_all(y, x, out)
    ref = np.arctan2(y, x)
    assert ulps(out, ref).max() <= 4


def test_log1p_matches_numpy_to_a_few_ulp():
    # Reference: numpy.log1p (C library), over tiny, moderate and huge arguments.
    rng = np.random.default_rng(1)
    x = np.concatenate([np.exp(rng.uniform(-700, 700, 200000)), rng.uniform(0, 4, 100000),
                        [0.0, 1e-300, 1e-17, 2.0 ** -52, 0.5, 1.0, np.sqrt(2) - 1, 1e308]])
    out = np.empty_like(x)
    _log1p_all(x, out)
    ref = np.log1p(x)
    assert out[np.flatnonzero(x == 0.0)[0]] == 0.0
    nz = ref != 0
    assert ulps(out[nz], ref[nz]).max() <= 4
