"""Gauss-Legendre rules on the unit interval [0, 1] (nodes and weights, cached)."""

from __future__ import annotations

from functools import lru_cache

import numpy as np


@lru_cache(maxsize=64)
def gauss_unit(n: int) -> tuple[np.ndarray, np.ndarray]:
    """n-point Gauss-Legendre nodes and weights on [0, 1]; exact for polynomials of degree 2n-1."""
    x, w = np.polynomial.legendre.leggauss(int(n))
    x = 0.5 * (x + 1.0)
    w = 0.5 * w
    x.setflags(write=False)
    w.setflags(write=False)
    return x, w
