"""Exact SI factors of the plain units scenes use, so that reading them needs no full unit registry.

`lookup(unit, kind)` returns the factor taking a number in `unit` to SI for quantity `kind` (the kinds
of `quantities.KINDS`), or None when the unit is not in the table (or belongs to another kind): the
caller then asks pint, which also gives the error messages. The factors are the exact SI definitions
(BIPM SI Brochure; the inch and pound by the 1959 international yard and pound agreement) and are
tested equal to pint's own factors for every entry.
"""

from __future__ import annotations

import math

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

TABLE = {"length": _LENGTH, "mass": _MASS, "density": _DENSITY, "angle": _ANGLE, "time": _TIME,
         "angular_rate": _RATE}
"""kind -> {unit string as written (spaces removed): SI factor}."""


def lookup(unit: str, kind: str) -> float | None:
    """The exact SI factor of `unit` for `kind`, or None if the table does not hold it."""
    table = TABLE.get(kind)
    if table is None:
        return None
    return table.get(unit.replace(" ", ""))
