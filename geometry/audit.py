"""Mass properties of groups and the warnings a scene deserves (overlaps, stray holes, odd masses).

SI throughout: kg, m, kg m^2. Overlap findings come from overlaps.py (sampling plus local search,
see its limits).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from truepull.geometry.overlaps import bodies_overlap, find_overlaps, stray_holes
from truepull.geometry.shapes import MeshShape

PLAUSIBLE_DENSITY = (50.0, 23000.0)
"""kg/m^3: below foams' and above osmium's (about 22590, from memory) a stated mass is suspicious."""


@dataclass(frozen=True, eq=False)
class GroupTotals:
    """Net mass (kg, holes subtracted), centre of mass (m; NaN when the net mass is zero) and moment of
    inertia about the frame axis through the pivot (kg m^2) of one group."""

    name: str
    mass: float
    com: np.ndarray
    inertia_axis: float
    inertia_pivot: np.ndarray  # 3x3 tensor about the pivot, world axes


def group_totals(scene, name: str) -> GroupTotals:
    bodies = scene.group(name)
    mass = sum(b.mass for b in bodies)
    first = sum((b.mass * b.com for b in bodies), np.zeros(3))
    com = first / mass if mass != 0 else np.full(3, np.nan)
    pivot, axis = scene.frame.pivot, scene.frame.axis
    tensor = sum((b.inertia_tensor_about(pivot) for b in bodies), np.zeros((3, 3)))
    return GroupTotals(name, float(mass), com, float(axis @ tensor @ axis), tensor)


def all_group_totals(scene) -> dict[str, GroupTotals]:
    return {g: group_totals(scene, g) for g in scene.groups()}


def _pair_warning(a, b, kind, where: str = "") -> str | None:
    at = f" at position {where}" if where else ""
    if a.group != b.group:
        if kind == "overlap":
            return (f"{a.name} ({a.group}) and {b.name} ({b.group}) overlap{at}: bodies of different groups "
                    "cannot share space, and compare will refuse them")
        return (f"{a.name} ({a.group}) and {b.name} ({b.group}) touch{at}: the exact integration is "
                "slow and less certain at a contact; check its error estimate")
    if kind == "overlap":
        if a.is_hole and b.is_hole:
            return f"holes {a.name} and {b.name} (group {a.group}) overlap: their common volume is removed twice"
        if not a.is_hole and not b.is_hole:
            return (f"{a.name} and {b.name} (group {a.group}) overlap and neither is a hole: their common "
                    "volume is counted twice")
        return None  # a hole in its host: as intended
    if a.is_hole or b.is_hole:
        return None  # a hole meeting its host's surface (e.g. a through bore): as intended
    return f"{a.name} and {b.name} (group {a.group}) touch (note: fine for an assembly)"


def scene_warnings(scene, overlaps: bool = True) -> list[str]:
    """Plain-English warnings about the scene, in a stable order."""
    out: list[str] = []
    names = scene.groups()
    if "pendulum" not in names or "attractor" not in names:
        missing = [g for g in ("pendulum", "attractor") if g not in names]
        out.append(f"no group named {' or '.join(missing)}: compare needs --test and --source groups")
    for b in scene.bodies:
        spec = b.spec
        if spec is not None and spec.mass is not None and spec.shape_kind != "point":
            rho = abs(b.density)
            lo, hi = PLAUSIBLE_DENSITY
            if not lo <= rho <= hi:
                out.append(f"{b.name}: its stated mass gives a density of {rho:.4g} kg/m^3, outside "
                           f"{lo:g}-{hi:g}; check the mass and the size units")
        if isinstance(b.shape, MeshShape):
            note = f"{b.name}: mesh '{b.shape.file}' ({len(b.shape.faces)} faces); mass properties are those " \
                   "of the polyhedron as written"
            if b.shape.inverted:
                note += "; it was wound inside-out and has been turned right way out"
            out.append(note)
    if not overlaps:
        return out
    by_name = {b.name: b for b in scene.bodies}
    for a_name, b_name, kind in find_overlaps(scene.bodies):
        w = _pair_warning(by_name[a_name], by_name[b_name], kind)
        if w:
            out.append(w)
    for name, frac in stray_holes(scene.bodies):
        out.append(f"hole {name} is not inside a body of its group (about {100 * frac:.3g} % of it lies "
                   "outside): it removes mass that is not there")
    for pos in scene.positions:
        moved = scene.at_position(pos)
        movers = [b for b in moved.bodies if b.group == pos.group]
        others = [b for b in moved.bodies if b.group != pos.group]
        for a in movers:
            for b in others:
                kind = bodies_overlap(a, b)
                if kind:
                    w = _pair_warning(a, b, kind, pos.name)
                    if w:
                        out.append(w)
    return list(dict.fromkeys(out))
