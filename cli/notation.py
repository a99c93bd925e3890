"""A value with its standard uncertainty written as metrologists write it.

Concise notation (JCGM 100:2008 7.2.2, second form): the value rounded to the last digit of u, u to
two significant digits in parentheses in units of that last digit, e.g. 100.02147(35) g or
6.6743(73) x 10^-11 m^3 kg^-1 s^-2. Two significant digits of u always (common practice, and JCGM
100 7.2.6: "at most two"); rounding u can carry (9.96 -> 10), which moves the last digit.
"""

from __future__ import annotations

import math

DIGITS = 2


def _u_exponent(u: float, digits: int) -> int:
    """The power of ten of u's last kept digit, after rounding u to `digits` significant digits."""
    e = math.floor(math.log10(u))
    rounded = round(u / 10.0**e, digits - 1) * 10.0**e  # 9.96 -> 10.0: one more digit place
    return math.floor(math.log10(rounded) + 1e-12) - digits + 1


def concise(value: float, u: float, *, digits: int = DIGITS, times: str = "x", exponent: int | None = None) -> str:
    """`value(u)` in concise notation; a power of ten (` x 10^e`, e that of the larger of |value| and
    u) when that lies outside 1e-3 .. 1e6 or u's last digit would be left of the units, or when
    `exponent` is given. u = 0 or not finite: the value
    to 9 significant digits."""
    value, u = float(value), float(u)
    if not (u > 0 and math.isfinite(u)) or not math.isfinite(value):
        return f"{value:.9g}"
    last = _u_exponent(u, digits)
    if exponent is None:
        e = math.floor(math.log10(max(abs(value), u)))
        rounded_value = round(value / 10.0**last) * 10.0**last
        if abs(rounded_value) >= u:
            e = math.floor(math.log10(abs(rounded_value)) + 1e-12)  # 9.99996 -> 10.0000 carries
        # plain when the value is of a handy size and u's last digit is not left of the units
        exponent = 0 if (-3 <= e <= 5 and last <= 0) else e
    places = max(exponent - last, 0)  # decimals of the mantissa
    mantissa = round(value / 10.0**last) * 10.0 ** (last - exponent)
    digits_u = round(u / 10.0**last)  # u in units of the last digit (10 when rounding carried)
    text = f"{mantissa:.{places}f}({digits_u * 10 ** max(last - exponent, 0)})"
    if exponent:
        text += f" {times} 10^{exponent}"
    return text


def ppm(u: float, value: float) -> str:
    """u relative to |value| in parts per million, to two significant digits, without a power of ten."""
    if not value or not math.isfinite(u):
        return "-"
    x = abs(u / value) * 1e6
    if x == 0:
        return "0"
    e = math.floor(math.log10(x))
    rounded = round(x, -e + DIGITS - 1)
    e = math.floor(math.log10(rounded) + 1e-12)
    return f"{rounded:.{max(DIGITS - 1 - e, 0)}f}"


def with_unit(value: float, u: float, unit: str, **kw) -> str:
    """`value(u) unit (u_r ppm)`: concise notation and the relative standard uncertainty."""
    return f"{concise(value, u, **kw)} {unit} ({ppm(u, value)} ppm)"


def rounded(value: float, u: float, **kw) -> str:
    """The value alone, rounded and written as concise(value, u) writes it (e.g. interval ends)."""
    text = concise(value, u, **kw)
    head, _, tail = text.partition("(")
    return head + tail.partition(")")[2] if tail else text
