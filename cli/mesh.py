"""`truepull mesh FILE`: inspect a part file (STL, OBJ, PLY, ... via trimesh) before using it in a scene.

Bounding box (file units, metres unless --units says otherwise, as in scenes, and m), watertightness, winding, volume, centre of mass and inertia about
it (for the given density or material; otherwise per unit density, said so), a warning when the
size suggests the units are wrong, and a ready `[[body]]` block. A file that is missing, empty,
not a mesh, open (not watertight) or inconsistently wound is refused (exit 2, one line): such a
part cannot be a body.
"""

from __future__ import annotations

import json
import os

import numpy as np

from truepull.cli.output import fmt, format_table, print_json
from truepull.geometry.errors import InputError
from truepull.geometry.materials import MATERIALS, known_materials, material_key
from truepull.geometry.meshes import mesh_report
from truepull.geometry.quantities import parse_scalar, si_factor

HELP = "inspect a mesh part file and print a [[body]] block for it"

PLAUSIBLE_SIZE = (1e-4, 5.0)
"""m: a part whose largest extent falls outside 0.1 mm .. 5 m probably has its units wrong (common practice)."""
UNIT_CHOICES = ("mm", "in", "cm", "m", "um")
"""Units tried, most common in part files first, when the stated ones look wrong."""


def add_arguments(parser) -> None:
    parser.add_argument("file", metavar="FILE", help="part file: STL, OBJ, PLY, OFF, ... (anything trimesh reads)")
    parser.add_argument("--units", default=None, metavar="UNIT", help="length unit of the file's coordinates "
                        "(default m, as in scenes: a file's numbers are metres unless said otherwise; e.g. mm, in)")
    parser.add_argument("--scene", metavar="SCENE", help="the scene file the [[body]] block is for: its `file` is "
                        "then written relative to that scene's folder (default: relative to the current folder)")
    matter = parser.add_mutually_exclusive_group()
    matter.add_argument("--density", metavar="X", help="density, kg/m^3 or with a unit, e.g. '8.5 g/cm^3'")
    matter.add_argument("--material", metavar="NAME", help="a named material (e.g. brass, tungsten, aluminium)")
    parser.add_argument("--name", metavar="NAME", help="body name for the [[body]] block (default: the file's stem)")
    parser.add_argument("--group", default="attractor", metavar="NAME", help="group for the [[body]] block "
                                                                             "(default: attractor)")


def _density(args):
    """(density kg/m^3 or None, where it comes from)."""
    if args.density is not None:
        raw = args.density.strip()
        try:
            raw = float(raw)
        except ValueError:
            pass
        d = parse_scalar(raw, "density", "kg/m^3", None, "--density", positive=True)
        return d.value, "given"
    if args.material is not None:
        key = material_key(args.material)
        if key is None:
            raise InputError(None, "--material", f"unknown material '{args.material}' (known: "
                                                 f"{', '.join(known_materials())})")
        return MATERIALS[key][0], f"material {key} ({MATERIALS[key][1]})"
    return None, "per unit density (give --density or --material for real values)"


def unit_warnings(extent_m: np.ndarray, units: str) -> list[str]:
    """A warning when the largest extent (m) is implausible, naming the units that would fit."""
    size = float(np.max(extent_m))
    lo, hi = PLAUSIBLE_SIZE
    if lo <= size <= hi:
        return []
    native = size / si_factor(units, "length")
    fits = [u for u in UNIT_CHOICES if lo <= native * si_factor(u, "length") <= hi and u != units]
    hint = f"; if the file is in {' or '.join(fits)}, give --units {fits[0]}" if fits else ""
    which = "larger than 5 m" if size > hi else "smaller than 0.1 mm"
    si = f" ({fmt(size, 4)} m)" if si_factor(units, "length") != 1.0 else ""
    return [f"the part is {fmt(native, 4)} {units}{si} across, {which}: "
            f"the file's units may be wrong{hint}"]


def _toml_str(s: str) -> str:
    return json.dumps(s, ensure_ascii=False)  # a JSON string is a valid TOML basic string


def block_path(file: str, scene: str | None) -> str:
    """The mesh's path as a scene reads it: relative to the scene's folder (or to the current folder when
    no scene is named), POSIX separators, so the block names no folder of this machine. A path with no
    relative form (another drive) is kept as given."""
    start = os.path.dirname(os.path.abspath(scene)) if scene else os.getcwd()
    try:
        rel = os.path.relpath(os.path.abspath(file), start)
    except ValueError:
        return file
    return rel.replace(os.sep, "/")


def body_block(file: str, units: str, name: str, group: str, args) -> str:
    """A [[body]] block for a scene; `file` as block_path made it."""
    where = ("relative to the scene file's folder" if getattr(args, "scene", None) else
             "relative to the current folder; a scene reads it relative to its own folder (mesh --scene SCENE)")
    lines = ["[[body]]", f"name = {_toml_str(name)}", f"group = {_toml_str(group)}", 'shape = "mesh"',
             f"file = {_toml_str(file)}   # {where}", f"file_units = {_toml_str(units)}"]
    if args.material is not None:
        lines.append(f"material = {_toml_str(material_key(args.material))}")
    elif args.density is not None:
        d, _ = _density(args)
        lines.append(f'density = "{d:.10g} kg/m^3"')
    else:
        lines.append("# density = ...   # state one of density, material or mass (kg) before use")
    lines.append("at = [0, 0, 0]   # where the file's origin goes, in the scene's length unit")
    return "\n".join(lines)


def inspect(args) -> dict:
    """The facts as a dict (SI, plus the file-unit bounding box); raises InputError for a bad part."""
    path = args.file
    units_stated = args.units is not None
    if not units_stated:
        args.units = "m"
    factor = si_factor(args.units, "length", None, "--units")
    density, density_source = _density(args)
    rep = mesh_report(path, args.units)
    name = os.path.basename(path)
    if not rep["watertight"]:
        raise InputError(path, None, f"mesh '{name}' is not watertight (it has holes or open edges): a body must "
                                     f"be a closed surface ({rep['faces']} faces)")
    if not rep["winding_consistent"]:
        raise InputError(path, None, f"mesh '{name}' is not consistently wound (its faces point inconsistently)")
    if not rep["volume"] or not rep["volume"] > 0:
        raise InputError(path, None, f"mesh '{name}' encloses no volume")
    rho = 1.0 if density is None else density
    inertia = rho * np.asarray(rep["inertia"], float)
    lo, hi = rep["bounding_box"]["min"], rep["bounding_box"]["max"]
    body_name = args.name or os.path.splitext(name)[0]
    facts = {
        "file": rep["file"], "units": args.units, "vertices": rep["vertices"], "faces": rep["faces"],
        "bounding_box": {"min": lo, "max": hi},
        "bounding_box_file_units": {"min": lo / factor, "max": hi / factor},
        "extent": rep["extent"], "extent_file_units": rep["extent"] / factor,
        "watertight": rep["watertight"], "winding_consistent": rep["winding_consistent"],
        "inside_out": rep["inside_out"], "volume": rep["volume"], "centroid": rep["centroid"],
        "centroid_file_units": np.asarray(rep["centroid"]) / factor,
        "density": density, "density_source": density_source, "mass": rho * rep["volume"],
        "per_unit_density": density is None, "inertia_com": inertia,
        "principal_moments": np.linalg.eigvalsh(0.5 * (inertia + inertia.T)),
        "warnings": unit_warnings(rep["extent"], args.units), "notes": rep["notes"],
        "units_stated": units_stated,
        "body_block": body_block(block_path(path, getattr(args, "scene", None)), args.units, body_name,
                                 args.group, args),
    }
    return facts


def render(f: dict) -> str:
    u = f["units"]

    def vec(v, digits=6):
        return "(" + ", ".join(fmt(x, digits) for x in v) + ")"

    per = " per unit density (1 kg/m^3)" if f["per_unit_density"] else ""
    rows = [
        ["file", f["file"]],
        ["triangles / vertices", f"{f['faces']} / {f['vertices']}"],
        ["closed (watertight)", "yes" if f["watertight"] else "no"],
        ["winding", "consistent" + (", was inside-out (reversed)" if f["inside_out"] else "")],
        [f"bounding box {u}", f"{vec(f['bounding_box_file_units']['min'])} to {vec(f['bounding_box_file_units']['max'])}"],
        ["bounding box m", f"{vec(f['bounding_box']['min'])} to {vec(f['bounding_box']['max'])}"],
        [f"size {u}", vec(f["extent_file_units"])],
        ["volume m^3", fmt(f["volume"], 8)],
        [f"centre of mass {u}", vec(f["centroid_file_units"], 8)],
        ["centre of mass m", vec(f["centroid"], 8)],
        ["density kg/m^3", fmt(f["density"]) if f["density"] is not None else "not given"],
        [f"mass kg{per}", fmt(f["mass"], 8)],
        [f"principal moments kg m^2{per}", " ".join(fmt(x, 6) for x in f["principal_moments"])],
    ]
    unit_note = (f"file units: {u} (as given by --units)" if f.get("units_stated", True) else
                 "file units: m (the default, as in scenes: the file's numbers are read as metres; "
                 "give --units mm, in, ... if they are not)")
    lines = [format_table(["", "value"], rows, align="ll"), unit_note, "", f"inertia about the centre of mass, kg m^2{per}:"]
    lines += ["  " + "  ".join(f"{x + 0.0: .6e}" for x in row) for row in np.asarray(f["inertia_com"])]
    if not f["per_unit_density"]:
        lines.append(f"density: {f['density_source']}")
    for w in f["warnings"]:
        lines.append(f"warning: {w}")
    for n in f["notes"]:
        lines.append(f"note: {n}")
    lines += ["", "for a scene:", "", f["body_block"]]
    return "\n".join(lines)


def run(args) -> int:
    facts = inspect(args)
    if args.json:
        print_json(facts)
    else:
        print(render(facts))
    return 0
