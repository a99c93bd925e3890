"""Concise notation value(u) against hand-worked cases of JCGM 100:2008 7.2.2 and common practice."""

from __future__ import annotations

import pytest

from truepull.cli.notation import concise, ppm, with_unit


@pytest.mark.parametrize("value, u, text", [
    # JCGM 100:2008 7.2.2 (from memory): "m_s = 100,021 47(35) g" for m_s = 100.02147 g, u_c = 0.35 mg
    (100.02147, 0.00035, "100.02147(35)"),
    # CODATA 2018 G (from memory): 6.674 30(15) x 10^-11, u written with two digits
    (6.67430e-11, 1.5e-15, "6.67430(15) x 10^-11"),
    # hand-worked: u = 7.33e-14 -> 7.3e-14, its last digit 1e-15, so the value to 1e-15
    (6.6742999e-11, 7.33e-14, "6.6743(73) x 10^-11"),
    # rounding u carries: 0.0999 -> 0.10, last digit 1e-2
    (1.23456, 0.0999, "1.23(10)"),
    # rounding the value carries: 9.99999 to 1e-4 is 10.0000
    (9.99999, 0.0012, "10.0000(12)"),
    # ... and moves the power of ten
    (9.999996e-11, 1.2e-15, "1.000000(12) x 10^-10"),
    # u with a leading 1: still two digits
    (6.674e-11, 1.0e-14, "6.6740(10) x 10^-11"),
    (3.14159, 0.0123, "3.142(12)"),
    # u larger than the value, and a zero value
    (0.0012, 0.034, "0.001(34)"),
    (0.0, 0.034, "0.000(34)"),
    # u's digits straddle the decimal point: in units of the value's last digit
    (12.3456, 1.5, "12.3(15)"),
    # u's last digit left of the units: a power of ten instead of ambiguous zeros
    (12345.0, 1500.0, "1.23(15) x 10^4"),
    (-5.0, 0.25, "-5.00(25)"),
])
def test_concise_notation(value, u, text):
    assert concise(value, u) == text


def test_no_uncertainty_gives_the_value():
    assert concise(6.6743e-11, 0.0) == "6.6743e-11"


@pytest.mark.parametrize("u, value, text", [(7.33e-14, 6.6743e-11, "1100"), (0.00035, 100.02147, "3.5"),
                                             (1.5e-15, 6.6743e-11, "22"), (9.96e-6, 1.0, "10")])
def test_ppm_to_two_digits(u, value, text):
    # arithmetic: u / |value| x 10^6, rounded to two significant digits (9.96 carries to 10)
    assert ppm(u, value) == text


def test_with_unit():
    assert with_unit(100.02147, 0.00035, "g") == "100.02147(35) g (3.5 ppm)"
