"""`truepull check SCENE`: load and validate a scene; bodies, mass properties, group totals, warnings."""

from __future__ import annotations

import numpy as np

from truepull.cli.output import fmt, format_table, print_json
from truepull.geometry.audit import all_group_totals, scene_warnings
from truepull.geometry.scene import load_scene

HELP = "load and validate a scene; bodies, mass properties, group totals, warnings"


def add_arguments(parser) -> None:
    parser.add_argument("scene", metavar="SCENE", nargs="?", help="scene file (TOML)")
    parser.add_argument("--materials", action="store_true",
                        help="list the material table (density, expansion coefficient, sources) and stop")
    parser.add_argument("--no-overlaps", action="store_true",
                        help="skip the search for overlapping and touching bodies (faster)")


def check_data(scene, overlaps: bool = True) -> dict:
    """The check result in SI, shaped as `check --json`."""
    bodies = [{"name": b.name, "group": b.group, "shape": b.shape.kind, "mass": b.mass, "volume": b.volume,
               "com": b.com, "inertia_com": b.inertia_com} for b in scene.bodies]
    groups = {name: {"mass": t.mass, "com": t.com, "inertia_axis": t.inertia_axis}
              for name, t in all_group_totals(scene).items()}
    notes = []
    for b, d in zip(scene.bodies, bodies):
        if b.has_gradient:
            d["uniform_mass"] = b.uniform_mass
            d["density_gradient"] = (b.placement.rotation @ b.gradient).tolist()
            stated = "stated mass" if b.spec is not None and b.spec.mass is not None else "density times volume"
            notes.append(f"'{b.name}' has a density gradient: its {stated} ({b.uniform_mass:.6g} kg) is the mass of "
                         f"the uniform part; the mass, centre of mass and inertia shown include the linear part")
    for b in scene.bodies:
        spec = b.spec
        if spec is not None and spec.temperature is not None and spec.expansion is None:
            notes.append(f"'{b.name}' has no expansion coefficient (no material, no expansion key): it is not "
                         f"scaled to the temperature {spec.temperature.value:g} degC")
    out = {"bodies": bodies, "groups": groups, "warnings": scene_warnings(scene, overlaps=overlaps)}
    if notes:
        out["notes"] = notes
    return out


def _vec(v, factor: float) -> str:
    v = np.asarray(v, dtype=float) / factor
    return "(" + ", ".join(fmt(x, 6) for x in v) + ")"


def render(scene, data: dict) -> str:
    """The human-readable report: lengths in the scene's unit, masses in kg."""
    u, f = scene.length_unit, scene.length_factor
    lines = []
    title = f" - {scene.title}" if scene.title else ""
    lines.append(f"scene {scene.path}{title}")
    axis = ", ".join(fmt(x, 6) for x in scene.frame.axis)
    lines.append(f"frame axis ({axis}) through pivot {_vec(scene.frame.pivot, f)} {u}; G = {scene.G.value:.6g} "
                 "m^3 kg^-1 s^-2")
    lines.append("")
    rows = []
    for b, d in zip(scene.bodies, data["bodies"]):
        principal = np.linalg.eigvalsh(np.asarray(d["inertia_com"])) / f**2
        kind = d["shape"] + (" (hole)" if b.is_hole else "")
        rows.append([d["name"], d["group"], kind, fmt(d["mass"]), fmt(d["volume"] / f**3),
                     _vec(d["com"], f), " ".join(fmt(x, 5) for x in principal)])
    lines.append(format_table(["body", "group", "shape", "mass kg", f"volume {u}^3", f"centre of mass {u}",
                               f"principal moments kg {u}^2"], rows, align="lllrrll"))
    lines.append("")
    grows = []
    for name, g in data["groups"].items():
        grows.append([name, fmt(g["mass"]), _vec(g["com"], f), fmt(g["inertia_axis"] / f**2)])
    lines.append(format_table(["group", "net mass kg", f"centre of mass {u}", f"inertia about frame axis kg {u}^2"],
                              grows, align="lrlr"))
    if scene.positions:
        lines.append("")
        prow = [[p.name, p.group, fmt(p.turn.value / scene.angle_factor), scene.angle_unit,
                 _vec([s.value for s in p.shift], f)] for p in scene.positions]
        lines.append(format_table(["position", "group", "turn", "unit", f"shift {u}"], prow, align="llrll"))
    if scene.measurement is not None:
        lines.append("")
        m = scene.measurement
        named = m.angle if m.method == "deflection" else m.period
        lines.append(f"measurement: {m.method} at positions {', '.join(named) or '-'}")
    lines.append("")
    for note in data.get("notes", []):
        lines.append(f"note: {note}")
    if data["warnings"]:
        lines.append(f"warnings ({len(data['warnings'])}):")
        lines.extend(f"  - {w}" for w in data["warnings"])
    else:
        lines.append("no warnings")
    return "\n".join(lines)


def render_materials(rows) -> str:
    """The material table as text: density kg/m^3, expansion 1e-6/K with its u, and the sources."""
    from truepull.geometry.materials import REFERENCE_TEMPERATURE

    table = [[r["name"], fmt(r["density"]), f"{r['expansion'] * 1e6:.3g} +- {r['u_expansion'] * 1e6:.2g}",
              ", ".join(r["aliases"]) or "-", r["density_source"] + "; " + r["expansion_source"]] for r in rows]
    head = f"materials at {REFERENCE_TEMPERATURE:g} degC ({len(rows)}):"
    return head + "\n" + format_table(["material", "density kg/m^3", "expansion 1e-6/K", "also", "sources"],
                                      table, align="lrrll")


def run(args) -> int:
    if args.materials:
        from truepull.geometry.materials import material_rows

        rows = material_rows()
        if args.json:
            print_json({"materials": rows})
        else:
            print(render_materials(rows))
        return 0
    if args.scene is None:
        from truepull.geometry.errors import InputError

        raise InputError(None, "SCENE", "check needs a scene file (or --materials)")
    scene = load_scene(args.scene)
    data = check_data(scene, overlaps=not args.no_overlaps)
    if args.json:
        print_json(data)
    else:
        print(render(scene, data))
    return 0
