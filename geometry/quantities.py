"""Scalars with units and standard uncertainties, read from scene text and converted to SI once.

A scalar is a number, or a string such as "25.40 mm", "12.7 +- 0.01", "12.7 ± 0.01 mm" or
"3.2 +- 0.1 deg", or in the concise notation of JCGM 100:2008 7.2.2, "10.000(2) mm" (= 10.000 +- 0.002
mm) and "1.23(45)e-3". The uncertainty is a standard uncertainty (k = 1) in the value's own unit.
SI units: m, kg, kg/m^3, rad, s. Non-finite values (after unit conversion too) and magnitudes outside
LIMITS are refused; angle units must be true angle units; directions are plain numbers.
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
    # the measured quantities of the acceleration and servo methods
    "angular_acceleration": ("rad/s^2", "1 / [time] ** 2"),
    "torque": ("N*m", "[mass] * [length] ** 2 / [time] ** 2"),
    "voltage": ("V", "[mass] * [length] ** 2 / [time] ** 3 / [current]"),
    "torque_per_volt2": ("N*m/V^2", "[time] ** 4 * [current] ** 2 / [mass] / [length] ** 2"),
    "density_gradient": ("kg/m^4", "[mass] / [length] ** 4"),
    "expansion": ("1/K", "1 / [temperature]"),
}

_MANTISSA = r"[-+]?(?:\d+\.?\d*|\.\d+)"
_EXPONENT = r"[eE][-+]?\d+"
_NUMBER = rf"{_MANTISSA}(?:{_EXPONENT})?"
# "value [(concise u)] [exponent] [+- u] [unit]"; the concise form is JCGM 100:2008 7.2.2's
# "100.021 47(35) g" (digits without a point: u in units of the last digits of the value) or
# "100.021 47(0.000 35) g" (with a point: u in the value's own unit); digits are written unspaced here.
_PATTERN = re.compile(
    rf"^\s*(?P<mantissa>{_MANTISSA})(?:\((?P<concise>\d+(?:\.\d*)?|\.\d+)\))?(?P<exponent>{_EXPONENT})?"
    rf"\s*(?:(?:\+-|\+/-|±)\s*(?P<u>{_NUMBER}))?\s*(?P<unit>.*?)\s*$"
)
_PLUS_MINUS = ("+-", "+/-", "±")

# Accepted magnitudes in SI, per kind: (largest |value|, smallest nonzero |value|). They keep every
# value, and the squares, cubes and fifth powers that mass properties and budgets form from it, finite
# and normal in double precision, with wide margins around any apparatus:
# - length 1e-12 m .. 1e12 m (a picometre to beyond the Earth-Sun distance; L**5 stays within 1e+-60);
# - mass 1e-30 kg .. 1e30 kg (an electron to a solar mass); density 1e-9 .. 1e9 kg/m^3 (any gas to
#   white-dwarf matter, so rho L**5 stays finite);
# - angle up to 1e6 rad (about 160 000 turns; beyond that a double's spacing exceeds 1e-10 rad, so the
#   angle itself is no longer known to the precision torques need), smallest nonzero 1e-30 rad;
# - time 1e-12 s .. 1e12 s; angular rate 1e-30 .. 1e6 rad/s; dimensionless 1e-30 .. 1e30;
# - G 1e-30 .. 1e10 in SI (any value a scaled test may use, never a subnormal or an overflow);
# - angular acceleration 1e-30 .. 1e6 rad/s^2, torque 1e-40 .. 1e10 N m, voltage 1e-12 .. 1e7 V,
#   torque per volt squared 1e-40 .. 1e6 N m/V^2 (a servo's torques are 1e-15 N m and smaller).
# Zero is always accepted where the key allows it; the smallest nonzero magnitude binds sizes and other
# positive values, masses and densities, not coordinates or uncertainties (a computed 3e-18 m is zero).
# An uncertainty has the same largest bound as its value.
LIMITS = {
    "length": (1e12, 1e-12),
    "mass": (1e30, 1e-30),
    "density": (1e9, 1e-9),
    "angle": (1e6, 1e-30),
    "time": (1e12, 1e-12),
    "angular_rate": (1e6, 1e-30),
    "dimensionless": (1e30, 1e-30),
    "gravitational_constant": (1e10, 1e-30),
    "angular_acceleration": (1e6, 1e-30),
    "torque": (1e10, 1e-40),
    "voltage": (1e7, 1e-12),
    "torque_per_volt2": (1e6, 1e-40),
    "density_gradient": (1e21, 1e-30),
    "expansion": (1e-2, 1e-30),
}
_SI_NAMES = {"length": "m", "mass": "kg", "density": "kg/m^3", "angle": "rad", "time": "s",
             "angular_rate": "rad/s", "dimensionless": "", "gravitational_constant": "m^3/(kg s^2)",
             "angular_acceleration": "rad/s^2", "torque": "N m", "voltage": "V", "torque_per_volt2": "N m/V^2",
             "density_gradient": "kg/m^4", "expansion": "1/K"}

# pint's names of true angle units (after alias resolution); any prefixed radian (mrad, urad) too
ANGLE_UNITS = ("radian", "degree", "arcminute", "arcsecond", "turn", "grade")


def _is_angle_unit(parsed) -> bool:
    """True when a parsed pint unit is exactly one true angle unit to the first power."""
    items = dict(parsed._units)
    if len(items) != 1:
        return False
    (name, power), = items.items()
    return power == 1 and (name in ANGLE_UNITS or name.endswith("radian"))


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
    An angle unit must be a true angle unit (rad, deg, arcmin, arcsec, mrad, urad, turn/revolution,
    grad), not just any dimensionless ratio such as "mm/m" or "deg**2".
    Factors are remembered per (unit, kind): a scene of thousands of bodies parses each unit once."""
    try:
        return _known_factor(unit, kind)
    except InputError as exc:
        raise InputError(file, key, exc.reason) from None


@lru_cache(maxsize=1024)
def _known_factor(unit: str, kind: str) -> float:
    file = key = None
    si_unit, dim = KINDS[kind]
    text = unit.strip()
    if text in ("", "1") and kind in ("dimensionless",):
        return 1.0
    if any(pm in text for pm in _PLUS_MINUS):
        raise InputError(file, key, f"misplaced '+-' in '{unit}': write \"value +- u unit\", e.g. \"10 +- 0.01 mm\"")
    # fast path: plain units from an exact table, without building pint's registry
    from truepull.geometry.unit_table import lookup

    fast = lookup(unit, kind)
    if fast is not None:
        return fast
    ureg = units()
    try:
        parsed = ureg.parse_units(text)
        q = ureg.Quantity(1.0, parsed)
    except Exception:
        raise InputError(file, key, f"unknown unit '{unit}'") from None
    if kind == "angle":
        if not _is_angle_unit(parsed):
            raise InputError(file, key, f"unit '{unit}' is not an angle (use rad, deg, arcmin, arcsec, mrad, "
                                        "urad, turn or grad)")
        return float(q.to("radian").magnitude)
    if kind == "dimensionless":
        if not q.dimensionless:
            raise InputError(file, key, f"unit '{unit}' should be dimensionless")
        return float(q.to("dimensionless").magnitude)
    if q.dimensionality != ureg.Quantity(1.0, si_unit).dimensionality:
        raise InputError(file, key, f"unit '{unit}' is not a {kind.replace('_', ' ')} unit")
    return float(q.to(si_unit).magnitude)


def _read_text(raw: str, file, key):
    """(value, u or None, unit text) from "value [+- u] [unit]" or the concise "value(u) [unit]"."""
    m = _PATTERN.match(raw)
    if not m:
        raise InputError(file, key, f"cannot read '{raw}' as a number with optional +- and unit")
    unit = m.group("unit")
    if any(pm in unit for pm in _PLUS_MINUS):
        raise InputError(file, key, f"misplaced '+-' in '{raw}': write \"value +- u unit\", e.g. \"10 +- 0.01 mm\"")
    exponent = m.group("exponent") or ""
    value = float(m.group("mantissa") + exponent)
    u = float(m.group("u")) if m.group("u") is not None else None
    concise = m.group("concise")
    if concise is not None:
        if u is not None:
            raise InputError(file, key, f"'{raw}' states the uncertainty twice (in parentheses and after +-)")
        power = int(exponent[1:]) if exponent else 0
        if "." in concise:  # JCGM 100 7.2.2: u in the unit of the quoted result
            u = float(f"{concise}e{power}")
        else:  # u in units of the last digits of the value
            mantissa = m.group("mantissa")
            decimals = len(mantissa.split(".")[1]) if "." in mantissa else 0
            u = float(f"{concise}e{power - decimals}")
    return value, u, unit


def check_range(value: float, kind: str, file, key, raw, what: str = "value", small: bool = True):
    """Refuse a non-finite SI value, or one outside LIMITS[kind] (see there for why); the smallest
    nonzero magnitude is enforced only with `small` (sizes, masses, densities: not coordinates, where a
    computed 3e-18 m means zero)."""
    largest, smallest = LIMITS[kind]
    si = _SI_NAMES[kind]
    if not math.isfinite(value):
        raise InputError(file, key, f"{what} {raw!r} is not a finite number (in SI)")
    if abs(value) > largest:
        raise InputError(file, key, f"{what} {raw!r} is too large: {abs(value):.3g} {si} is beyond the accepted "
                                    f"{largest:g} {si}".rstrip())
    if small and value != 0 and abs(value) < smallest:
        raise InputError(file, key, f"{what} {raw!r} is too small: {abs(value):.3g} {si} is below the accepted "
                                    f"nonzero {smallest:g} {si}")


def parse_scalar(raw, kind: str, default_unit: str, file=None, key=None,
                 positive: bool = False, nonnegative: bool = False) -> Measured:
    """Read one scalar (number, "value +- u unit" or concise "value(u) unit" string) and return it in
    SI, refusing non-finite values and magnitudes outside LIMITS[kind]."""
    raw_type = type(raw)
    if raw_type is float or raw_type is int or (isinstance(raw, (int, float)) and raw_type is not bool):
        try:
            value = float(raw)
        except OverflowError:
            raise InputError(file, key, "integer too large for a floating-point number") from None
        u, unit = None, default_unit
    elif isinstance(raw, bool):
        raise InputError(file, key, "expected a number, got true/false")
    elif isinstance(raw, str):
        value, u, unit = _read_text(raw, file, key)
        unit = unit or default_unit
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
    largest, smallest = LIMITS[kind]
    small = positive or kind in ("mass", "density")
    size = abs(value_si)
    if not (size <= largest and (not small or value_si == 0 or size >= smallest)):
        check_range(value_si, kind, file, key, raw, small=small)  # out of range: raises, naming the bound
    if u_si is not None:
        check_range(u_si, kind, file, key, raw, "uncertainty of", small=False)
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


def parse_direction(raw, file=None, key=None) -> tuple[float, float, float]:
    """A direction: a list of three plain numbers (no units, no +-), not all zero, returned as a unit
    vector. Scaled by its largest component before normalising, so [1e-320, 0, 0] and
    [1e308, 1e308, 0] are read as the directions they name."""
    if not isinstance(raw, (list, tuple)):
        raise InputError(file, key, "expected a list of 3 plain numbers, e.g. [0, 0, 1]")
    if len(raw) != 3:
        raise InputError(file, key, f"expected 3 numbers, got {len(raw)}")
    comps = []
    for i, c in enumerate(raw):
        if isinstance(c, bool) or not isinstance(c, (int, float)):
            what = f"'{c}'" if isinstance(c, str) else _kind_name(c)
            hint = (" (state the uncertainty of a tilt as rotate = { axis = [...], angle = \"0 +- u deg\" })"
                    if isinstance(c, str) and any(pm in c for pm in _PLUS_MINUS) else "")
            raise InputError(file, key, f"a direction's components are plain numbers (no unit, no +-); "
                                        f"component {i} is {what}{hint}")
        try:
            c = float(c)
        except OverflowError:
            raise InputError(file, key, f"component {i} is an integer too large for a floating-point number") from None
        if not math.isfinite(c):
            raise InputError(file, key, f"component {i} is not a finite number")
        comps.append(c)
    scale = max(abs(c) for c in comps)
    if scale == 0:
        raise InputError(file, key, "vector must not be zero")
    v = [c / scale for c in comps]
    n = math.sqrt(sum(c * c for c in v))
    return tuple(c / n for c in v)


def _kind_name(raw) -> str:
    return {dict: "a table", list: "a list", bool: "true/false"}.get(type(raw), type(raw).__name__)
