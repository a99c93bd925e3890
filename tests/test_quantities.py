"""Scalars from scene text: units, '+-', the concise notation, true angle units, finite ranges."""

import math

import pytest
from scipy.constants import physical_constants

from truepull.geometry.errors import InputError
from truepull.geometry.quantities import LIMITS, parse_direction, parse_scalar


def read(raw, kind="length", unit="m"):
    return parse_scalar(raw, kind, unit, "s.toml", "body[b].radius")


def refused(raw, kind="length", unit="m") -> str:
    with pytest.raises(InputError) as info:
        read(raw, kind, unit)
    assert info.value.file == "s.toml" and info.value.key == "body[b].radius"
    return info.value.reason


def test_concise_notation_of_jcgm_100_7_2_2():
    # JCGM 100:2008 (GUM) 7.2.2, from memory: m_S = 100.021 47(35) g means u_c = 0.000 35 g, the number
    # in parentheses referring to the last digits; 100.021 47(0.000 35) g states u_c in the unit itself
    for text in ("100.02147(35) g", "100.02147(0.00035) g"):
        m = read(text, "mass", "kg")
        assert m.value == pytest.approx(0.10002147, rel=1e-15)
        assert m.u == pytest.approx(3.5e-7, rel=1e-12)


def test_concise_notation_reads_codata_g_as_scipy_states_it():
    # CODATA 2018 as printed: G = 6.674 30(15) x 10^-11 m^3 kg^-1 s^-2 (from memory); scipy.constants
    # carries the same value and standard uncertainty
    value, _unit, u = physical_constants["Newtonian constant of gravitation"]
    m = read("6.67430(15)e-11", "gravitational_constant", "m^3/(kg s^2)")
    assert m.value == pytest.approx(value, rel=1e-15) and m.u == pytest.approx(u, rel=1e-12)


@pytest.mark.parametrize("text, value, u", [
    ("10.000(2)", 10.0, 0.002),           # = 10.000 +- 0.002 (last digits)
    ("10.000(2) mm", 0.010, 2e-6),
    ("1.23(45)e-3", 1.23e-3, 0.45e-3),   # the exponent applies to value and uncertainty alike
    ("12(3)", 12.0, 3.0),
    ("12.7 +- 0.01 mm", 0.0127, 1e-5),
    ("12.7 ± 0.01 mm", 0.0127, 1e-5),
])
def test_uncertainty_notations(text, value, u):
    m = read(text)
    assert m.value == pytest.approx(value, rel=1e-14) and m.u == pytest.approx(u, rel=1e-12)


@pytest.mark.parametrize("text", ["10 +- mm", "10 +-", "+- 1", "10(2) +- 1", "10 mm +- 1", "10 20 mm",
                                  "10 (2)", "1 +- 2 +- 3"])
def test_misplaced_uncertainty_refused(text):
    refused(text)


@pytest.mark.parametrize("unit, factor", [
    # the definitions of the units (SI Brochure, 9th ed., table 8; a turn is 2 pi rad, a gon pi/200 rad)
    ("rad", 1.0), ("deg", math.pi / 180), ("arcmin", math.pi / 180 / 60), ("arcsec", math.pi / 180 / 3600),
    ("mrad", 1e-3), ("urad", 1e-6), ("turn", 2 * math.pi), ("revolution", 2 * math.pi),
    ("grad", math.pi / 200),
])
def test_true_angle_units(unit, factor):
    assert read(f"0.5 {unit}", "angle", "deg").value == pytest.approx(0.5 * factor, rel=1e-14)


@pytest.mark.parametrize("text", ["1 mm/m", "1 deg**2", "90 deg deg", "1 pi", "1 %", "1", "1 m"])
def test_dimensionless_ratios_are_not_angles(text):
    if text == "1":  # a bare number takes the default unit: refused only when that is no angle
        assert read(text, "angle", "deg").value == pytest.approx(math.pi / 180)
        with pytest.raises(InputError):
            read(text, "angle", "mm/m")
        return
    assert "angle" in refused(text, "angle", "deg")


@pytest.mark.parametrize("raw", [float("nan"), float("inf"), "nan", "-inf", "1e400", "1e308 km", 10**400,
                                 "1e20", 1e-320, "1e-13", "1 +- 1e20"])
def test_values_outside_the_finite_range_refused(raw):
    with pytest.raises(InputError) as info:
        parse_scalar(raw, "length", "m", "s.toml", "body[b].radius", positive=True)
    reason = info.value.reason
    assert any(w in reason for w in ("finite", "too large", "too small", "cannot read"))


def test_range_limits_keep_mass_properties_finite():
    # the fifth power of the largest and smallest length, times the extreme densities, stays normal
    big, small = LIMITS["length"]
    rho_big, rho_small = LIMITS["density"]
    assert math.isfinite(rho_big * big**5) and rho_small * small**5 > 2.2250738585072014e-308
    assert read(big).value == big and read(-big).value == -big and read(small).value == small
    assert read(0).value == 0.0
    # a coordinate computed as r cos(pi/2) is 6e-17 r: zero in effect, and accepted as such
    assert read(math.cos(math.pi / 2)).value == math.cos(math.pi / 2)
    with pytest.raises(InputError, match="too small"):
        parse_scalar(1e-13, "length", "m", "s.toml", "body[b].radius", positive=True)


def test_angle_bound():
    assert read("1e6 rad", "angle", "deg").value == 1e6
    assert "too large" in refused("1.1e6 rad", "angle", "deg")
    assert "too large" in refused(1e300, "angle", "deg")


def test_directions_are_plain_numbers_normalised_by_scaling():
    assert parse_direction([1e-320, 0, 0], "s.toml", "frame.axis") == (1.0, 0.0, 0.0)
    x, y, z = parse_direction([1e308, 1e308, 0], "s.toml", "frame.axis")
    assert x == pytest.approx(math.sqrt(0.5), rel=1e-15) and y == x and z == 0
    for bad in (["1 deg deg", 0, 0], ["1 pi", 0, 0], ["1 +- 0.1", 0, 1], [True, 0, 0], [0, 0, 0],
                [float("nan"), 0, 1], [10**400, 0, 0], [1, 0], "z"):
        with pytest.raises(InputError) as info:
            parse_direction(bad, "s.toml", "frame.axis")
        assert info.value.key == "frame.axis"
