"""Axis labels that carry the power of ten, so tick values read as plain numbers (matplotlib figures).

A label reads "torque about the axis (10^-12 N m)" and the ticks 20, 40, 60: the power is a multiple
of three (engineering notation), the unit in parentheses, the same style in every figure.
"""

from __future__ import annotations

import math

import numpy as np


def power_of_ten(values) -> int:
    """A multiple of three at or below log10 of the largest finite |value| (0 when there is none)."""
    v = np.asarray(values, float)
    v = np.abs(v[np.isfinite(v)])
    if not v.size or not v.max() > 0:
        return 0
    return int(3 * math.floor(math.log10(v.max()) / 3))


def scaled_label(text: str, unit: str, power: int) -> str:
    """'text (unit)', or 'text (10^power unit)' when the values are divided by 10^power."""
    return f"{text} ({unit})" if power == 0 else f"{text} (10^{power} {unit})"
