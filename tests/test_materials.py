"""Tests of geometry/materials.py and `check --materials`.

Outside reference: the densities of the pure metals (CRC Handbook of Chemistry and Physics, values
from memory: tungsten 19.25, lead 11.34, copper 8.96, aluminium 2.70 g/cm^3) and their linear
expansion near 20 degC (from memory: tungsten 4.5, copper 16.5, aluminium 23.1, lead 28.9 1e-6/K).
"""

from __future__ import annotations

import json

import pytest

from truepull.cli.main import main
from truepull.geometry.materials import MATERIALS, material_key


@pytest.mark.parametrize("name, rho, alpha", [("tungsten", 19250, 4.5e-6), ("lead", 11340, 28.9e-6),
                                              ("copper", 8960, 16.5e-6), ("aluminium", 2700, 23.1e-6)])
def test_pure_metals(name, rho, alpha):
    m = MATERIALS[name]
    assert m.density == pytest.approx(rho, rel=2e-3)  # handbook, from memory
    assert m.alpha == pytest.approx(alpha, rel=5e-2)   # handbook, from memory
    assert m.u_alpha > 0


def test_every_material_names_its_sources_and_generic_names():
    for name, m in MATERIALS.items():
        assert m.density_source and m.alpha_source and "memory" in m.density_source + m.alpha_source
        assert name == name.lower()
    assert material_key("Fe-36Ni") == "iron-nickel-low-expansion"
    assert material_key("POM") == "acetal"


def test_check_materials_lists_the_table(capsys):
    assert main(["check", "--materials", "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)["materials"]
    assert {r["name"] for r in rows} == set(MATERIALS)
    assert all(r["reference_temperature_degC"] == 20.0 for r in rows)
