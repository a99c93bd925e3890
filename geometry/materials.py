"""Named materials: density (kg/m^3) and linear expansion coefficient (1/K, with a standard
uncertainty) at the reference temperature REFERENCE_TEMPERATURE (degC), each with where it comes from.

Generic names only. The values are typical handbook values recalled from memory (the tables of the
CRC Handbook of Chemistry and Physics and of metals and polymer handbooks give these to within the
grade-to-grade spread); no edition was consulted, so every source says "from memory". Densities are
good to roughly 0.5-2 %, expansion coefficients to the stated u (about half the spread between grades,
or 10 % where the spread is not known). For a G measurement weigh the part and give `mass`, or give a
measured `density`; measure the expansion of a critical part and give `expansion` on the body.
"""

from __future__ import annotations

from typing import NamedTuple

REFERENCE_TEMPERATURE = 20.0
"""degC: the temperature the table's densities and the scene's sizes refer to (handbook practice)."""


class Material(NamedTuple):
    """density kg/m^3, where it comes from, expansion coefficient alpha 1/K, its standard u, source."""

    density: float
    density_source: str
    alpha: float
    u_alpha: float
    alpha_source: str


_T = "from memory, typical handbook value"
_A = "from memory, typical handbook value near 20 degC"


def _m(density, dsrc, alpha_ppm, u_ppm, asrc=_A) -> Material:
    return Material(density, dsrc, alpha_ppm * 1e-6, u_ppm * 1e-6, asrc)


MATERIALS: dict[str, Material] = {
    "tungsten": _m(19250.0, _T + " (pure, fully dense)", 4.5, 0.2),
    "tungsten-alloy": _m(18000.0, "from memory, typical of W-Ni-Fe/W-Ni-Cu heavy alloys (17000-18500 by grade)",
                         5.0, 0.5, "from memory, heavy alloys 4.4-5.6e-6/K by grade"),
    "gold": _m(19300.0, _T, 14.2, 0.3),
    "platinum": _m(21450.0, _T, 8.8, 0.2),
    "lead": _m(11340.0, _T, 28.9, 0.5),
    "silver": _m(10490.0, _T, 18.9, 0.3),
    "copper": _m(8960.0, _T, 16.5, 0.3),
    "brass": _m(8500.0, "from memory, typical of common brasses (8400-8730 by grade)", 19.5, 1.0,
                "from memory, common brasses 18-21e-6/K"),
    "bronze": _m(8800.0, "from memory, typical of tin bronzes (8700-8900)", 18.0, 1.0),
    "iron-nickel-low-expansion": _m(8050.0, "from memory, typical of the Fe-36Ni low-expansion alloy", 1.2, 0.5,
                                    "from memory, Fe-36Ni 0.6-2e-6/K by heat treatment"),
    "stainless-steel": _m(8000.0, "from memory, typical of 300-series austenitic (7900-8030)", 16.5, 0.8,
                          "from memory, 300-series 16-17.3e-6/K"),
    "steel": _m(7850.0, "from memory, typical of carbon steel", 11.7, 0.8),
    "iron": _m(7874.0, _T + " (pure iron)", 11.8, 0.3),
    "titanium": _m(4506.0, _T + " (commercially pure; Ti-6Al-4V about 4430)", 8.6, 0.4),
    "aluminium": _m(2700.0, _T + " (pure; common alloys 2660-2810)", 23.1, 0.8,
                    "from memory, pure 23.1e-6/K, common alloys 21-24e-6/K"),
    "fused-silica": _m(2203.0, _T, 0.55, 0.05),
    "borosilicate": _m(2230.0, _T, 3.3, 0.2),
    "low-expansion-glass-ceramic": _m(2530.0, "from memory, typical of zero-expansion glass-ceramics", 0.0, 0.1,
                                      "from memory, 0 +- 0.1e-6/K by class"),
    "granite": _m(2700.0, "from memory, typical (2600-2800 by stone)", 8.0, 2.0),
    "marble": _m(2700.0, "from memory, typical (2600-2800 by stone)", 7.0, 3.0),
    "polyether-ether-ketone": _m(1320.0, "from memory, typical of the unfilled polymer", 47.0, 5.0),
    "acrylic": _m(1180.0, "from memory, typical of cast PMMA", 70.0, 7.0),
    "acetal": _m(1410.0, "from memory, typical of acetal homopolymer", 110.0, 11.0),
    "nylon": _m(1140.0, "from memory, typical of nylon 6/6", 80.0, 8.0),
    "ptfe": _m(2200.0, "from memory, typical (2100-2300)", 120.0, 20.0,
               "from memory; PTFE has a phase change near 19 degC, so this is rough near room temperature"),
    "polycarbonate": _m(1200.0, _T, 65.0, 6.0),
    "water": _m(997.0, "from memory, pure water near 25 degC", 69.0, 7.0,
                "from memory: a third of the volume coefficient 2.07e-4/K near 20 degC"),
    "wood": _m(600.0, "from memory, very rough: woods range 300-900; measure yours", 5.0, 3.0,
               "from memory, along the grain 3-6e-6/K; across it several times more"),
}

ALIASES: dict[str, str] = {
    "aluminum": "aluminium",
    "stainless": "stainless-steel",
    "heavy-alloy": "tungsten-alloy",
    "pmma": "acrylic",
    "silica": "fused-silica",
    "glass": "fused-silica",
    "peek": "polyether-ether-ketone",
    "polyoxymethylene": "acetal",
    "pom": "acetal",
    "fe-36ni": "iron-nickel-low-expansion",
    "glass-ceramic": "low-expansion-glass-ceramic",
}


def material_key(name: str) -> str | None:
    """The canonical material name for `name` (case and '_' / ' ' insensitive), or None if unknown."""
    key = str(name).strip().lower().replace("_", "-").replace(" ", "-")
    key = ALIASES.get(key, key)
    return key if key in MATERIALS else None


def density_of(name: str) -> float:
    """Density (kg/m^3) of a known material; KeyError for an unknown one."""
    key = material_key(name)
    if key is None:
        raise KeyError(name)
    return MATERIALS[key].density


def known_materials() -> list[str]:
    return sorted(MATERIALS)


def material_rows() -> list[dict]:
    """The table for `check --materials`: one dict per material (SI), with its sources and aliases."""
    rows = []
    for name in known_materials():
        m = MATERIALS[name]
        rows.append({"name": name, "aliases": sorted(a for a, k in ALIASES.items() if k == name),
                     "density": m.density, "density_source": m.density_source, "expansion": m.alpha,
                     "u_expansion": m.u_alpha, "expansion_source": m.alpha_source,
                     "reference_temperature_degC": REFERENCE_TEMPERATURE})
    return rows
