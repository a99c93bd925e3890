"""Mass properties of groups and the warnings a scene deserves: overlaps (also on the way between
positions), stray holes, and numbers that look written in another unit (densities no solid has,
meshes out of scale with the rest of the scene).

SI throughout: kg, m, kg m^2. Overlap findings come from overlaps.py (sampling plus local search,
see its limits); meetings on the way between positions from moves.py.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from truepull.geometry.overlaps import TOUCH_RTOL, bodies_overlap, bounding_spheres, find_overlaps, sphere_pairs, stray_holes
from truepull.geometry.shapes import MeshShape, Point

PLAUSIBLE_DENSITY = (10.0, 25000.0)
"""kg/m^3: the range of solids. The densest element, osmium, is 22590 kg/m^3 (CRC Handbook of
Chemistry and Physics); the lightest structural foams are about 10 kg/m^3 (common practice)."""

DENSITY_UNITS = ("kg/m^3", "g/cm^3", "g/mm^3", "kg/mm^3", "lb/in^3", "lb/ft^3", "g/m^3")
"""Units a density may have been written in by mistake, most likely first."""

MASS_UNITS = ("kg", "g", "lb", "mg", "t")
"""Units a mass may have been written in by mistake, most likely first."""

MESH_SCALE = 100.0
"""A mesh more than this many times larger (or smaller) than the scene's other bodies is out of scale."""

MESH_LARGEST = 5.0
"""m: a mesh part larger than this (a few metres) on a gravity experiment is out of scale (common practice)."""

FILE_UNITS = ("mm", "m", "cm", "in", "um", "ft")
"""Length units a mesh file may be written in, most common first."""


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
    masses = [b.mass for b in bodies]  # each body's mass and centre once (they are computed, not stored)
    mass = sum(masses)
    first = sum((m * b.com for m, b in zip(masses, bodies)), np.zeros(3))
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


def _factor(unit: str, kind: str) -> float | None:
    from truepull.geometry.quantities import si_factor

    try:
        return si_factor(unit, kind)
    except Exception:
        return None


def _plausible(rho: float) -> bool:
    lo, hi = PLAUSIBLE_DENSITY
    return lo <= rho <= hi


def density_warning(body, density_unit: str, mass_unit: str) -> str | None:
    """A warning naming `body` when its density (SI, stated or from a stated mass and the volume) is
    not a solid's, saying which unit the written number fits; None when plausible."""
    spec = body.spec
    if isinstance(body.shape, Point) or not body.volume > 0:
        return None
    rho = abs(body.density)
    if _plausible(rho):
        return None
    lo, hi = PLAUSIBLE_DENSITY
    range_text = (f"solids lie between about {lo:g} kg/m^3 (light foams) and {hi:g} kg/m^3 (osmium, the densest "
                  "element, is 22590)")
    if spec is not None and spec.mass is not None:
        f = _factor(mass_unit, "mass") or 1.0
        written = abs(spec.mass.value) / f
        fits = [u for u in MASS_UNITS if u != mass_unit and (g := _factor(u, "mass"))
                and _plausible(written * g / body.volume)]
        hint = (f"; the mass {written:.6g} fits {fits[0]}, not {mass_unit}" if fits else
                "; check the mass and the size units")
        return f"{body.name}: its stated mass gives a density of {rho:.4g} kg/m^3, not a solid's ({range_text}){hint}"
    if spec is not None and spec.density is not None:
        f = _factor(density_unit, "density") or 1.0
        written = rho / f
        fits = [u for u in DENSITY_UNITS if u != density_unit and (g := _factor(u, "density"))
                and _plausible(written * g)]
        hint = (f"; the number {written:.6g} fits {fits[0]}, not {density_unit}" if fits else
                "; check the density and its unit")
        return f"{body.name}: density {rho:.4g} kg/m^3 is not a solid's ({range_text}){hint}"
    return None


def _typical_size(bodies) -> float | None:
    """Median bounding diameter (m) of the given bodies with a volume, or None."""
    sizes = [2 * b.bounding_sphere()[1] for b in bodies if not isinstance(b.shape, Point)]
    return float(np.median(sizes)) if sizes else None


def mesh_scale_warning(body, others) -> str | None:
    """A warning naming a mesh body whose size is out of scale with the other bodies (more than
    MESH_SCALE times larger or smaller than their median size) or larger than MESH_LARGEST, saying
    which `file_units` would make it fit; None otherwise."""
    if not isinstance(body.shape, MeshShape):
        return None
    ext = body.shape.vertices.max(axis=0) - body.shape.vertices.min(axis=0)
    size = float(np.max(ext))
    typical = _typical_size(others)

    def fits(s):
        if s > MESH_LARGEST:
            return False
        return typical is None or 1.0 / MESH_SCALE <= s / typical <= MESH_SCALE

    if fits(size) and (typical is None or size >= typical / MESH_SCALE):
        return None
    spec = body.spec
    units = (spec.file_units if spec is not None and spec.file_units else "m")
    f = _factor(units, "length") or 1.0
    options = []
    for u in FILE_UNITS:
        g = _factor(u, "length")
        if u != units and g and fits(size / f * g):
            options.append((abs(np.log(size / f * g / typical)) if typical else 0.0, u))
    hint = f"; with file_units = \"{min(options)[1]}\" it would be {size / f * _factor(min(options)[1], 'length'):.4g} m" \
        if options else ""
    where = (f"while the scene's other bodies are about {typical:.4g} m" if typical is not None else
             f"larger than {MESH_LARGEST:g} m")
    return (f"{body.name}: mesh read in {units} is {size:.4g} m across, {where}: its file_units look "
            f"wrong{hint}")


def _overlaps_at(scene, pos, spheres) -> list:
    """(moving body, other body, kind) for each overlap or touch between the group `pos` moves and
    the rest, with that group at position `pos`, in body order. The bounding spheres are moved as
    arrays (padded by 1e-12 of their size and distance from the origin, for rounding) to find the
    candidate pairs; only the bodies of those pairs are moved and tested (as scene.at_position would
    move them)."""
    c, r = spheres
    bodies = scene.bodies
    move = pos.placement(scene.frame)
    mask = np.array([b.group == pos.group for b in bodies], bool)
    if not mask.any() or mask.all():
        return []
    moved_c = c.copy()
    moved_c[mask] = c[mask] @ move.rotation.T + move.translation
    pad = 1e-12 * (r + np.linalg.norm(moved_c, axis=1) + np.linalg.norm(c, axis=1))
    moved = {}

    def placed(i):
        if not mask[i]:
            return bodies[i]
        if i not in moved:
            moved[i] = bodies[i].moved(move)
        return moved[i]

    out = []
    for i, j in sphere_pairs(moved_c, r + pad, TOUCH_RTOL, between=mask):
        a, b = placed(i), placed(j)
        kind = bodies_overlap(a, b, TOUCH_RTOL)
        if kind is not None:
            out.append((b, a, kind) if mask[j] else (a, b, kind))
    return out


def scene_warnings(scene, overlaps: bool = True) -> list[str]:
    """Plain-English warnings about the scene, in a stable order."""
    import os

    out: list[str] = []
    names = scene.groups()
    if "pendulum" not in names or "attractor" not in names:
        missing = [g for g in ("pendulum", "attractor") if g not in names]
        out.append(f"no group named {' or '.join(missing)}: compare needs --test and --source groups")
    for b in scene.bodies:
        w = density_warning(b, getattr(scene, "density_unit", "kg/m^3"), getattr(scene, "mass_unit", "kg"))
        if w:
            out.append(w)
        if isinstance(b.shape, MeshShape):
            w = mesh_scale_warning(b, [o for o in scene.bodies if o is not b and not isinstance(o.shape, MeshShape)]
                                   or [o for o in scene.bodies if o is not b])
            if w:
                out.append(w)
            shown = b.shape.file
            if shown and scene.base_dir and os.path.isabs(shown):
                try:
                    shown = os.path.relpath(shown, scene.base_dir).replace(os.sep, "/")
                except ValueError:
                    pass
            note = f"{b.name}: mesh '{shown}' ({len(b.shape.faces)} faces); mass properties are those " \
                   "of the polyhedron as written"
            if b.shape.inverted:
                note += "; it was wound inside-out and has been turned right way out"
            out.append(note)
    if not overlaps:
        return out
    bodies = scene.bodies
    spheres = bounding_spheres(bodies)
    by_name = {b.name: b for b in bodies}
    for a_name, b_name, kind in find_overlaps(bodies, spheres=spheres):
        w = _pair_warning(by_name[a_name], by_name[b_name], kind)
        if w:
            out.append(w)
    for name, frac in stray_holes(bodies):
        out.append(f"hole {name} is not inside a body of its group (about {100 * frac:.3g} % of it lies "
                   "outside): it removes mass that is not there")
    for pos in scene.positions:
        for a, b, kind in _overlaps_at(scene, pos, spheres):
            w = _pair_warning(a, b, kind, pos.name)
            if w:
                out.append(w)
    from truepull.geometry.moves import path_meetings

    for m in path_meetings(scene):
        a, b = scene.body(m.moving), scene.body(m.other)
        turn = m.turn / scene.angle_factor
        verb = "overlap" if m.kind == "overlap" else "touch"
        out.append(f"{a.name} ({a.group}) and {b.name} ({b.group}) {verb} on the way from position {m.start} to "
                   f"{m.end} (first near turn {turn:.4g} {scene.angle_unit}, turning the shorter way): each "
                   "position is clear but the move between them is not; a scan across it has no exact values there")
    return list(dict.fromkeys(out))
