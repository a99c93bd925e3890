"""Named materials and their densities (kg/m^3) at room temperature, with where each value comes from.

These are typical handbook values recalled from memory, good to roughly 0.5-2 %; an alloy's real
density depends on its grade and a part's on its making. For a G measurement weigh the part and give
`mass`, or give a measured `density` with its uncertainty; a material name is for design work.
"""

from __future__ import annotations

_TYPICAL = "from memory, typical handbook value"

MATERIALS: dict[str, tuple[float, str]] = {
    "tungsten": (19250.0, _TYPICAL + " (pure, fully dense)"),
    "tungsten-alloy": (18000.0, "from memory, typical of W-Ni-Fe/W-Ni-Cu heavy alloys (17000-18500 by grade)"),
    "gold": (19300.0, _TYPICAL),
    "platinum": (21450.0, _TYPICAL),
    "lead": (11340.0, _TYPICAL),
    "silver": (10490.0, _TYPICAL),
    "copper": (8960.0, _TYPICAL),
    "brass": (8500.0, "from memory, typical of common brasses (8400-8730 by grade)"),
    "bronze": (8800.0, "from memory, typical of tin bronzes (8700-8900)"),
    "invar": (8050.0, "from memory, typical of Fe-36Ni"),
    "stainless-steel": (8000.0, "from memory, typical of 300-series austenitic (7900-8030)"),
    "steel": (7850.0, "from memory, typical of carbon steel"),
    "iron": (7874.0, _TYPICAL + " (pure iron)"),
    "titanium": (4506.0, _TYPICAL + " (commercially pure; Ti-6Al-4V about 4430)"),
    "aluminium": (2700.0, _TYPICAL + " (pure; common alloys 2660-2810)"),
    "glass": (2203.0, "from memory, typical handbook value for fused silica"),
    "fused-silica": (2203.0, _TYPICAL),
    "borosilicate": (2230.0, _TYPICAL),
    "zerodur": (2530.0, "from memory, typical maker's datasheet value"),
    "granite": (2700.0, "from memory, typical (2600-2800 by stone)"),
    "marble": (2700.0, "from memory, typical (2600-2800 by stone)"),
    "peek": (1320.0, "from memory, typical of unfilled PEEK"),
    "acrylic": (1180.0, "from memory, typical of cast PMMA"),
    "delrin": (1410.0, "from memory, typical of acetal homopolymer"),
    "nylon": (1140.0, "from memory, typical of nylon 6/6"),
    "ptfe": (2200.0, "from memory, typical (2100-2300)"),
    "polycarbonate": (1200.0, _TYPICAL),
    "water": (997.0, "from memory, pure water near 25 degC"),
    "wood": (600.0, "from memory, very rough: woods range 300-900; measure yours"),
}

ALIASES: dict[str, str] = {
    "aluminum": "aluminium",
    "stainless": "stainless-steel",
    "heavy-alloy": "tungsten-alloy",
    "pmma": "acrylic",
    "silica": "fused-silica",
    "acetal": "delrin",
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
    return MATERIALS[key][0]


def known_materials() -> list[str]:
    return sorted(MATERIALS)
