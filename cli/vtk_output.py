"""Bodies and the sampled field as a VTK MultiBlock file (.vtm) for ParaView, written whole.

Layout of the file (coordinates in metres, values SI):
    bodies/<body name>   closed surface of each body (PolyData); field data: body, group, shape,
                         is_hole, mass_kg
    field                the sampling plane (PolyData): point arrays g (m/s^2), g_magnitude, U (J/kg),
                         err_g, err_U (absolute error estimates), masked (1 = inside or grazing a
                         source body, values NaN)
    force                one point at the pendulum's centre of mass, point array force (N)
    torque               one point at the pivot, point array torque (N m, about the pivot)
A .vtm is an index file plus a folder of pieces beside it (`NAME.vtm` and `NAME/`). Both are written
in a temporary folder next to the target and moved in at the end, so a failure leaves the old ones.
"""

from __future__ import annotations

import os
import re
import shutil
import tempfile
from pathlib import Path

import numpy as np

from truepull.geometry.errors import InputError

_PIECE = re.compile(r".+_\d+(_\d+)*\.vt[pkiu]$")


def view_multiblock(surfaces, field_poly, com, force, pivot, torque):
    """The MultiBlock described above, from body surfaces (PolyData with field data 'body'),
    the field plane PolyData (metres), and the net force at `com` and torque at `pivot`."""
    import pyvista as pv

    bodies = pv.MultiBlock()
    for s in surfaces:
        bodies[str(s.field_data["body"][0])] = s
    mb = pv.MultiBlock()
    mb["bodies"] = bodies
    mb["field"] = field_poly
    f = pv.PolyData(np.asarray(com, float).reshape(1, 3))
    f.point_data["force"] = np.asarray(force, float).reshape(1, 3)
    t = pv.PolyData(np.asarray(pivot, float).reshape(1, 3))
    t.point_data["torque"] = np.asarray(torque, float).reshape(1, 3)
    mb["force"] = f
    mb["torque"] = t
    return mb


def check_vtm_target(path) -> Path:
    """Refuse a target that is not a .vtm, or whose pieces folder holds anything but our pieces."""
    path = Path(path)
    if path.suffix.lower() != ".vtm":
        raise InputError(None, "--vtk", f"'{path}': write a VTK MultiBlock file ending in .vtm")
    if path.exists() and not path.is_file():
        raise InputError(None, "--vtk", f"'{path}' exists and is not a file")
    folder = path.with_suffix("")
    if folder.exists():
        stray = [p.name for p in folder.iterdir() if not (p.is_file() and _PIECE.match(p.name))] \
            if folder.is_dir() else [folder.name]
        if stray:
            raise InputError(None, "--vtk", f"'{folder}' already exists and holds other files "
                                            f"({', '.join(sorted(stray)[:3])}); choose another file name")
    return path


def write_vtm_atomic(mb, path) -> None:
    """Write the MultiBlock `mb` to `path` (.vtm) and its pieces folder, whole or not at all."""
    path = check_vtm_target(path)
    parent = path.parent
    parent.mkdir(parents=True, exist_ok=True)
    folder = path.with_suffix("")
    tmp = Path(tempfile.mkdtemp(prefix=f".{path.name}.", dir=parent))
    try:
        mb.save(str(tmp / path.name))
        old = tmp / ".previous"
        if folder.exists():
            os.replace(folder, old)
        try:
            os.replace(tmp / folder.name, folder)
        except BaseException:
            if old.exists():
                os.replace(old, folder)
            raise
        os.replace(tmp / path.name, path)
    finally:
        shutil.rmtree(tmp, ignore_errors=True)
