"""geometry/unit_table.py: every fast factor equals pint's (pint is the outside reference)."""

from __future__ import annotations

import pint
import pytest

from truepull.geometry.quantities import KINDS, parse_scalar, si_factor
from truepull.geometry.unit_table import TABLE, lookup

UREG = pint.UnitRegistry()
ENTRIES = [(kind, unit) for kind, t in TABLE.items() for unit in t]


@pytest.mark.parametrize("kind,unit", ENTRIES, ids=[f"{k}:{u}" for k, u in ENTRIES])
def test_factor_equals_pints(kind, unit):
    # pint's own conversion, and its dimension check, as the reference
    si_unit, _ = KINDS[kind]
    q = UREG.Quantity(1.0, unit)
    if kind == "angle":
        assert q.dimensionless
        ref = q.to("radian").magnitude
    else:
        assert q.dimensionality == UREG.Quantity(1.0, si_unit).dimensionality
        ref = q.to(si_unit).magnitude
    assert lookup(unit, kind) == pytest.approx(ref, rel=2e-16, abs=0)


def test_other_units_fall_back_to_pint():
    # not in the table: pint answers (yard = 0.9144 m exactly, international yard)
    assert lookup("yd", "length") is None
    assert si_factor("yd", "length") == pytest.approx(0.9144, rel=1e-15)
    # a table unit of the wrong kind is not taken from the table: pint's dimension check refuses it
    assert lookup("mm", "mass") is None
    from truepull.geometry.errors import InputError

    with pytest.raises(InputError, match="not a mass unit"):
        si_factor("mm", "mass")
    assert parse_scalar("12.7 +- 0.01 mm", "length", "m").value == pytest.approx(0.0127, rel=1e-15)
    assert lookup("g / cm^3", "density") == 1e3


def test_spaces_read_as_pint_reads_them():
    # pint (the reference) reads a space between two symbols as a product: "N m/V^2" is N*m/V^2, the
    # servo's calibration unit, found in the table with pint's factor exactly (1); "m m" is m^2 and
    # "k g" Boltzmann's constant times a gram, so neither is taken as mm or kg
    assert lookup("N m/V^2", "torque_per_volt2") == UREG.Quantity(1.0, "N m/V^2").to("N*m/V^2").magnitude == 1.0
    assert lookup(" m^3 / (kg s^2) ", "gravitational_constant") == 1.0
    assert UREG.Quantity(1.0, "m m").dimensionality == UREG.Quantity(1.0, "m^2").dimensionality
    assert lookup("m m", "length") is None and lookup("k g", "mass") is None
    from truepull.geometry.errors import InputError

    with pytest.raises(InputError, match="not a length unit"):
        si_factor("m m", "length")
    with pytest.raises(InputError, match="not a mass unit"):
        si_factor("k g", "mass")
