"""`truepull check SCENE`: load and validate a scene; bodies, mass properties, group totals, warnings."""

from __future__ import annotations

import gc

import numpy as np

from truepull.cli.output import fmt, format_table, print_json

HELP = "load and validate a scene; bodies, mass properties, group totals, warnings"


def add_arguments(parser) -> None:
    parser.add_argument("scene", metavar="SCENE", nargs="?", help="scene file (TOML)")
    parser.add_argument("--materials", action="store_true",
                        help="list the material table (density, expansion coefficient, sources) and stop")
    parser.add_argument("--no-overlaps", action="store_true",
                        help="skip the search for overlapping and touching bodies (faster)")


def check_data(scene, overlaps: bool = True) -> dict:
    """The check result in SI, shaped as `check --json` (truepull.api.check)."""
    from truepull.api import check

    return check(scene, overlaps).to_json()


def _shown(scene, kind: str) -> tuple[float, str]:
    """(factor, unit) in which check shows a stated value of this kind: lengths and angles in the
    scene's units, everything else in SI."""
    from truepull.geometry.stated import SI_UNITS

    if kind == "length":
        return scene.length_factor, scene.length_unit
    if kind == "angle":
        return scene.angle_factor, scene.angle_unit
    return 1.0, SI_UNITS.get(kind, "SI")


def stated_lines(scene, stated) -> list[str]:
    """The table of stated uncertainties: key, value +- u, unit (as read)."""
    from truepull.geometry.stated import stated_uncertainties

    stated = stated_uncertainties(scene) if stated is None else stated
    if not stated:
        return ["no stated uncertainties (+-)"]
    rows = []
    for s in stated:
        f, unit = _shown(scene, s.kind)
        rows.append([s.key, f"{fmt(s.value / f, 9)} +- {fmt(s.u / f, 3)}", unit])
    return [f"stated uncertainties ({len(stated)}), as read:",
            format_table(["key", "value +- u", "unit"], rows, align="lrl")]


def _vec(v, factor: float) -> str:
    v = np.asarray(v, dtype=float) / factor
    return "(" + ", ".join(fmt(x, 6) for x in v) + ")"


def render(scene, data: dict, stated=None) -> str:
    """The human-readable report: lengths in the scene's unit, masses in kg. `data` as check_data
    gives it (or a CheckResult's fields: numbers as numpy values); `stated` the scene's stated
    uncertainties when already listed (else listed here)."""
    u, f = scene.length_unit, scene.length_factor
    lines = []
    title = f" - {scene.title}" if scene.title else ""
    lines.append(f"scene {scene.path}{title}")
    axis = ", ".join(fmt(x, 6) for x in scene.frame.axis)
    lines.append(f"frame axis ({axis}) through pivot {_vec(scene.frame.pivot, f)} {u}; G = {scene.G.value:.6g} "
                 "m^3 kg^-1 s^-2")
    lines.append("")
    rows = []
    bodies = data["bodies"]
    # principal moments of every body at once (the same LAPACK call per matrix as one at a time)
    tensors = np.array([d["inertia_com"] for d in bodies], dtype=float).reshape(-1, 3, 3)
    principal = (np.linalg.eigvalsh(tensors) / f**2).tolist() if len(bodies) else []
    for b, d, p in zip(scene.bodies, bodies, principal):
        kind = d["shape"] + (" (hole)" if b.is_hole else "")
        rows.append([d["name"], d["group"], kind, fmt(d["mass"]), fmt(d["volume"] / f**3),
                     _vec(d["com"], f), " ".join(fmt(x, 5) for x in p)])
    lines.append(format_table(["body", "group", "shape", "mass (kg)", f"volume ({u}^3)", f"centre of mass ({u})",
                               f"principal moments (kg {u}^2)"], rows, align="lllrrll"))
    lines.append("")
    grows = []
    for name, g in data["groups"].items():
        grows.append([name, fmt(g["mass"]), _vec(g["com"], f), fmt(g["inertia_axis"] / f**2)])
    lines.append(format_table(["group", "net mass (kg)", f"centre of mass ({u})",
                               f"inertia about frame axis (kg {u}^2)"],
                              grows, align="lrlr"))
    if scene.positions:
        lines.append("")
        prow = [[p.name, p.group, fmt(p.turn.value / scene.angle_factor), scene.angle_unit,
                 _vec([s.value for s in p.shift], f)] for p in scene.positions]
        lines.append(format_table(["position", "group", f"turn ({scene.angle_unit})", f"shift ({u})"],
                                  [r[:3] + r[4:] for r in prow], align="llrl"))
    if scene.measurement is not None:
        lines.append("")
        for m in scene.measurements or (scene.measurement,):
            lines.append(f"measurement: {m.method} at positions {', '.join(m.positions) or '-'}")
    lines.append("")
    lines.extend(stated_lines(scene, stated))
    lines.append("")
    for note in data.get("notes", []):
        lines.append(f"note: {note}")
    if data["warnings"]:
        lines.append(f"warnings ({len(data['warnings'])}):")
        lines.extend(f"  - {w}" for w in data["warnings"])
    else:
        lines.append("no warnings")
    return "\n".join(lines)


def render_result(result) -> str:
    """The human-readable report of a CheckResult (render on its fields, without the JSON conversion)."""
    data = {"bodies": result.bodies, "groups": result.groups, "warnings": result.warnings, "notes": result.notes}
    return render(result.scene, data, result.stated)


def render_materials(rows) -> str:
    """The material table as text: density kg/m^3, expansion 1e-6/K with its u, and the sources."""
    from truepull.geometry.materials import REFERENCE_TEMPERATURE

    table = [[r["name"], fmt(r["density"]), f"{r['expansion'] * 1e6:.3g} +- {r['u_expansion'] * 1e6:.2g}",
              ", ".join(r["aliases"]) or "-", r["density_source"] + "; " + r["expansion_source"]] for r in rows]
    head = f"materials at {REFERENCE_TEMPERATURE:g} degC ({len(rows)}):"
    return head + "\n" + format_table(["material", "density kg/m^3", "expansion 1e-6/K", "also", "sources"],
                                      table, align="lrrll")


def run(args) -> int:
    from truepull.api import check, load_scene

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
    # the scene's objects live to the end: the garbage collector need not look through them again
    gc.freeze()
    result = check(scene, overlaps=not args.no_overlaps)
    if args.json:
        print_json(result.to_json())
    else:
        print(render_result(result))
    return 0
