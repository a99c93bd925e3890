"""Scalars with units and standard uncertainties, read from scene text and converted to SI once.

A scalar is a number, or a string such as "25.40 mm", "12.7 +- 0.01", "12.7 ± 0.01 mm" or
"3.2 +- 0.1 deg". The uncertainty is a standard uncertainty (k = 1) in the value's own unit.
SI units: m, kg, kg/m^3, rad, s.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from functools import lru_cache

from truepull.geometry.errors import InputError

# kind -> (SI unit, pint dimensionality string)
KINDS = {
    "length": ("m", "[length]"),
    "mass": ("kg", "[mass]"),
    "density": ("kg/m^3", "[mass] / [length] ** 3"),
    "angle": ("rad", ""),
    "time": ("s", "[time]"),
    "angular_rate": ("rad/s", "1 / [time]"),
    "dimensionless": ("", ""),
    "gravitational_constant": ("m^3/(kg s^2)", "[length] ** 3 / [mass] / [time] ** 2"),
}

_NUMBER = r"[-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?"
_PATTERN = re.compile(
    rf"^\s*(?P<value>{_NUMBER})\s*(?:(?:\+-|\+/-|±)\s*(?P<u>{_NUMBER}))?\s*(?P<unit>.*?)\s*$"
)


@lru_cache(maxsize=1)
def units():
    """The shared pint unit registry."""
    import pint

    return pint.UnitRegistry()


@dataclass(frozen=True)
class Measured:
    """A value in SI with its standard uncertainty (None when the scene states none)."""

    value: float
    u: float | None = None

    def __float__(self) -> float:
        return self.value


def si_factor(unit: str, kind: str, file=None, key=None) -> float:
    """Factor that takes a number in `unit` to SI for quantity `kind`; checks the dimension.
    Factors are remembered per (unit, kind): a scene of thousands of bodies parses each unit once."""
    try:
        return _known_factor(unit, kind)
    except InputError as exc:
        raise InputError(file, key, exc.reason) from None


@lru_cache(maxsize=1024)
def _known_factor(unit: str, kind: str) -> float:
    file = key = None
    si_unit, dim = KINDS[kind]
    if unit.strip() in ("", "1") and kind in ("dimensionless",):
        return 1.0
    ureg = units()
    try:
        q = ureg.Quantity(1.0, unit)
    except Exception:
        raise InputError(file, key, f"unknown unit '{unit}'") from None
    if kind == "angle":
        if not q.dimensionless:
            raise InputError(file, key, f"unit '{unit}' is not an angle")
        return float(q.to("radian").magnitude)
    if kind == "dimensionless":
        if not q.dimensionless:
            raise InputError(file, key, f"unit '{unit}' should be dimensionless")
        return float(q.to("dimensionless").magnitude)
    if q.dimensionality != ureg.Quantity(1.0, si_unit).dimensionality:
        raise InputError(file, key, f"unit '{unit}' is not a {kind.replace('_', ' ')} unit")
    return float(q.to(si_unit).magnitude)


def parse_scalar(raw, kind: str, default_unit: str, file=None, key=None,
                 positive: bool = False, nonnegative: bool = False) -> Measured:
    """Read one scalar (number or "value +- u unit" string) and return it in SI."""
    if isinstance(raw, bool):
        raise InputError(file, key, "expected a number, got true/false")
    if isinstance(raw, (int, float)):
        value, u, unit = float(raw), None, default_unit
    elif isinstance(raw, str):
        m = _PATTERN.match(raw)
        if not m:
            raise InputError(file, key, f"cannot read '{raw}' as a number with optional +- and unit")
        value = float(m.group("value"))
        u = float(m.group("u")) if m.group("u") is not None else None
        unit = m.group("unit") or default_unit
    else:
        raise InputError(file, key, f"expected a number or a string like '12.7 +- 0.01 mm', got {type(raw).__name__}")
    if not math.isfinite(value) or (u is not None and not math.isfinite(u)):
        raise InputError(file, key, "value is not a finite number")
    if u is not None and u < 0:
        raise InputError(file, key, "uncertainty must not be negative")
    if kind == "angle" and unit.strip() in ("rad", "radian", "radians"):
        factor = 1.0
    else:
        factor = si_factor(unit, kind, file, key)
    value_si = value * factor
    u_si = None if u is None else u * abs(factor)
    if positive and not value_si > 0:
        raise InputError(file, key, f"must be greater than zero, got {raw!r}")
    if nonnegative and value_si < 0:
        raise InputError(file, key, f"must not be negative, got {raw!r}")
    return Measured(value_si, u_si)


def parse_vector(raw, kind: str, default_unit: str, file=None, key=None, length: int = 3,
                 nonzero: bool = False) -> tuple[Measured, ...]:
    """Read a list of `length` scalars (each may carry its own unit and uncertainty)."""
    if not isinstance(raw, (list, tuple)):
        raise InputError(file, key, f"expected a list of {length} numbers")
    if len(raw) != length:
        raise InputError(file, key, f"expected {length} numbers, got {len(raw)}")
    out = tuple(parse_scalar(v, kind, default_unit, file, f"{key}[{i}]") for i, v in enumerate(raw))
    if nonzero and all(c.value == 0 for c in out):
        raise InputError(file, key, "vector must not be zero")
    return out
