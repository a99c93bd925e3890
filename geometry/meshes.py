"""Reading triangle-mesh part files (STL, OBJ, PLY, OFF, ... through trimesh) into MeshShape.

A body mesh must be closed (watertight) and consistently wound; one wound inside-out (negative
volume) is turned right way out. Coordinates are scaled from `file_units` to metres; the file's
origin becomes the body's reference point.
"""

from __future__ import annotations

import os
from pathlib import Path

import numpy as np

from truepull.geometry.errors import InputError
from truepull.geometry.quantities import si_factor
from truepull.geometry.shapes import MeshShape


def _read_trimesh(path, file=None, key=None):
    """Load a file as one trimesh.Trimesh (scene files are concatenated), refusing what is not a mesh."""
    import trimesh

    path = Path(path)
    where = file if file is not None else str(path)
    if not path.exists():
        raise InputError(where, key, f"mesh file '{path}' not found")
    if not path.is_file():
        raise InputError(where, key, f"mesh file '{path}' is not a file")
    try:
        mesh = trimesh.load(str(path), force="mesh")
    except Exception as exc:  # trimesh raises many types for unreadable files
        msg = " ".join(str(exc).split())[:200] or type(exc).__name__
        raise InputError(where, key, f"cannot read '{path.name}' as a mesh ({msg})") from None
    if not isinstance(mesh, trimesh.Trimesh):
        raise InputError(where, key, f"'{path.name}' holds no triangle mesh (found {type(mesh).__name__})")
    if len(mesh.faces) == 0 or len(mesh.vertices) == 0:
        raise InputError(where, key, f"'{path.name}' is an empty mesh (no triangles)")
    if not np.all(np.isfinite(mesh.vertices)):
        raise InputError(where, key, f"'{path.name}' has non-finite vertex coordinates")
    return mesh


def load_mesh(path, file_units: str = "m", file=None, key=None) -> MeshShape:
    """Load a closed mesh from `path` with coordinates in `file_units` (a length unit) as a MeshShape
    in metres. `file`/`key` name the scene file and key for error messages."""
    factor = si_factor(file_units, "length", file, key)
    where = file if file is not None else str(path)
    mesh = _read_trimesh(path, file, key)
    name = Path(path).name
    if not mesh.is_watertight:
        raise InputError(where, key, f"mesh '{name}' is not watertight (it has holes or open edges); "
                                     "a body must be a closed surface")
    if not mesh.is_winding_consistent:
        raise InputError(where, key, f"mesh '{name}' is not consistently wound (its faces point inconsistently)")
    vertices = np.asarray(mesh.vertices, dtype=float) * factor
    faces = np.asarray(mesh.faces, dtype=np.int64)
    shape = MeshShape(vertices, faces, os.fspath(path))
    if shape.volume() < 0:
        shape = MeshShape(vertices, faces[:, ::-1], os.fspath(path), inverted=True)
    if not shape.volume() > 0:
        raise InputError(where, key, f"mesh '{name}' encloses no volume")
    return shape


def mesh_report(path, units: str = "m") -> dict:
    """Facts about a mesh file, for inspection: counts, bounding box, watertightness, winding,
    and (when closed) volume, centroid and inertia about the centroid for density 1, all in SI
    after scaling from `units`. Raises InputError only if the file is missing or not a mesh."""
    factor = si_factor(units, "length", str(path), "units")
    mesh = _read_trimesh(path)
    v = np.asarray(mesh.vertices, dtype=float) * factor
    report = {
        "file": os.fspath(path),
        "units": units,
        "vertices": int(len(mesh.vertices)),
        "faces": int(len(mesh.faces)),
        "bounding_box": {"min": v.min(axis=0), "max": v.max(axis=0)},
        "extent": v.max(axis=0) - v.min(axis=0),
        "watertight": bool(mesh.is_watertight),
        "winding_consistent": bool(mesh.is_winding_consistent),
        "inside_out": False,
        "volume": None,
        "centroid": None,
        "inertia": None,
        "notes": [],
    }
    if report["watertight"] and report["winding_consistent"]:
        shape = MeshShape(v, np.asarray(mesh.faces), os.fspath(path))
        if shape.volume() < 0:
            report["inside_out"] = True
            report["notes"].append("wound inside-out; truepull turns it right way out")
            shape = MeshShape(v, np.asarray(mesh.faces)[:, ::-1], os.fspath(path))
        report["volume"] = shape.volume()
        report["centroid"] = shape.centroid()
        report["inertia"] = shape.inertia_unit_density()
    else:
        if not report["watertight"]:
            report["notes"].append("not watertight: volume and inertia are undefined; close the surface")
        if not report["winding_consistent"]:
            report["notes"].append("inconsistent winding: fix face orientation")
    return report
