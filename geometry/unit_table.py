"""Exact SI factors of the plain units scenes use, so that reading them needs no full unit registry.

`lookup(unit, kind)` returns the factor taking a number in `unit` to SI for quantity `kind` (the kinds
of `quantities.KINDS`), or None when the unit is not in the table (or belongs to another kind): the
caller then asks pint, which also gives the error messages. The factors are the exact SI definitions
(BIPM SI Brochure; the inch and pound by the 1959 international yard and pound agreement) and are
tested equal to pint's own factors for every entry. A unit is looked up as written with the spaces
around operators removed and a space between two symbols read as a product ("N m/V^2" is "N*m/V^2",
as pint reads it; "m m" is m^2, not mm).
"""

from __future__ import annotations

import math
import re

_LENGTH = {"m": 1.0, "meter": 1.0, "metre": 1.0, "km": 1e3, "dm": 0.1, "cm": 1e-2, "mm": 1e-3,
           "um": 1e-6, "µm": 1e-6, "micron": 1e-6, "nm": 1e-9, "millimeter": 1e-3, "millimetre": 1e-3,
           "centimeter": 1e-2, "centimetre": 1e-2, "in": 0.0254, "inch": 0.0254, "ft": 0.3048,
           "foot": 0.3048}
_MASS = {"kg": 1.0, "kilogram": 1.0, "g": 1e-3, "gram": 1e-3, "mg": 1e-6, "t": 1e3, "tonne": 1e3,
         "lb": 0.45359237, "pound": 0.45359237}
_DENSITY = {"kg/m^3": 1.0, "kg/m**3": 1.0, "g/cm^3": 1e3, "g/cm**3": 1e3, "kg/dm^3": 1e3,
            "kg/dm**3": 1e3, "g/m^3": 1e-3, "g/m**3": 1e-3, "kg/cm^3": 1e6, "kg/cm**3": 1e6}
_ANGLE = {"rad": 1.0, "radian": 1.0, "radians": 1.0, "mrad": 1e-3, "urad": 1e-6, "µrad": 1e-6,
          "deg": math.pi / 180.0, "degree": math.pi / 180.0, "degrees": math.pi / 180.0,
          "arcmin": math.pi / 10800.0, "arcsec": math.pi / 648000.0}
_TIME = {"s": 1.0, "second": 1.0, "seconds": 1.0, "ms": 1e-3, "us": 1e-6, "µs": 1e-6, "min": 60.0,
         "minute": 60.0, "h": 3600.0, "hour": 3600.0, "day": 86400.0}
_RATE = {"rad/s": 1.0, "1/s": 1.0, "Hz": 1.0, "mrad/s": 1e-3, "deg/s": math.pi / 180.0}
# the measured quantities of the acceleration and servo methods, and G, in the units scenes state them
_ACCELERATION = {"rad/s^2": 1.0, "rad/s**2": 1.0, "1/s^2": 1.0, "1/s**2": 1.0, "mrad/s^2": 1e-3,
                 "urad/s^2": 1e-6, "µrad/s^2": 1e-6, "nrad/s^2": 1e-9}
_TORQUE = {"N*m": 1.0, "mN*m": 1e-3, "uN*m": 1e-6, "µN*m": 1e-6, "nN*m": 1e-9, "pN*m": 1e-12, "fN*m": 1e-15}
_VOLTAGE = {"V": 1.0, "volt": 1.0, "kV": 1e3, "mV": 1e-3, "uV": 1e-6, "µV": 1e-6}
_TORQUE_PER_VOLT2 = {"N*m/V^2": 1.0, "N*m/V**2": 1.0}
_G = {"m^3/(kg*s^2)": 1.0, "m**3/(kg*s**2)": 1.0, "m^3/kg/s^2": 1.0, "N*m^2/kg^2": 1.0}
_EXPANSION = {"1/K": 1.0}

TABLE = {"length": _LENGTH, "mass": _MASS, "density": _DENSITY, "angle": _ANGLE, "time": _TIME,
         "angular_rate": _RATE, "angular_acceleration": _ACCELERATION, "torque": _TORQUE,
         "voltage": _VOLTAGE, "torque_per_volt2": _TORQUE_PER_VOLT2, "gravitational_constant": _G,
         "expansion": _EXPANSION}
"""kind -> {unit string in the form `written_form` gives: SI factor}."""

_AROUND_OPERATORS = re.compile(r"\s*(\*\*|[*/^()])\s*")
_BETWEEN_SYMBOLS = re.compile(r"\s+")


def written_form(unit: str) -> str:
    """`unit` with the spaces around operators removed and a space between symbols written '*'."""
    return _BETWEEN_SYMBOLS.sub("*", _AROUND_OPERATORS.sub(r"\1", unit.strip()))


def lookup(unit: str, kind: str) -> float | None:
    """The exact SI factor of `unit` for `kind`, or None if the table does not hold it."""
    table = TABLE.get(kind)
    if table is None:
        return None
    return table.get(written_form(unit))
