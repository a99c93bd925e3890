"""Make shapes/bracket.stl: the mirror bracket of the built-in demo balance (an invented part).

How it was made: an L-shaped profile (six corners, in the y-z plane) is extruded 10 mm along x.
The profile is triangulated by a fan from its inner (reflex) corner, which sees every other corner
because an L is star-shaped about that corner; the two end caps and the six side walls are written
as triangles by hand and handed to trimesh.Trimesh, which writes the binary STL. (trimesh's own
extrude_polygon needs shapely, which truepull does not depend on.) The mesh is watertight and wound
outward (positive signed volume); the script checks both before writing.

Units: millimetres. Origin: the middle of the top face of the horizontal leg, so a scene places
the bracket by that point. The horizontal leg (10 mm long in y, 2 mm thick) sits under the beam;
the vertical leg (2 mm thick in y, 13.5 mm tall) hangs from its -y end and carries the mirror.

Run from anywhere:  python shapes/make_bracket.py   (rewrites shapes/bracket.stl)
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import trimesh

WIDTH_X = 10.0      # mm, extrusion length along x
LEG_Y = (-6.0, 4.0)  # mm, horizontal leg spans y from -6 to +4
THICK = 2.0         # mm, both legs
DROP = 13.5         # mm, vertical leg goes from the top face (z = 0) down to z = -DROP


def l_profile() -> np.ndarray:
    """The six corners (y, z) in mm of the L, counter-clockwise seen from +x, starting at the inner
    (reflex) corner."""
    y0, y1 = LEG_Y
    t = THICK
    return np.array([
        [y0 + t, -t],     # 0: inner (reflex) corner, under the horizontal leg
        [y1, -t],         # 1: far bottom corner of the horizontal leg
        [y1, 0.0],        # 2: far top corner
        [y0, 0.0],        # 3: outer top corner, above the vertical leg
        [y0, -DROP],      # 4: foot of the vertical leg, outer side
        [y0 + t, -DROP],  # 5: foot of the vertical leg, inner side
    ])


def signed_area(poly: np.ndarray) -> float:
    y, z = poly[:, 0], poly[:, 1]
    return 0.5 * float(np.sum(y * np.roll(z, -1) - np.roll(y, -1) * z))


def extrude(poly: np.ndarray, width: float) -> trimesh.Trimesh:
    """Prism over a star-shaped polygon (corner 0 sees all others), x from -width/2 to +width/2."""
    if signed_area(poly) < 0:  # make the (y, z) loop counter-clockwise seen from +x
        poly = np.vstack([poly[:1], poly[1:][::-1]])
    n = len(poly)
    lo = np.column_stack([np.full(n, -width / 2), poly])   # vertices 0..n-1 at x = -w/2
    hi = np.column_stack([np.full(n, +width / 2), poly])   # vertices n..2n-1 at x = +w/2
    vertices = np.vstack([lo, hi])
    faces = []
    for i in range(1, n - 1):  # fan from corner 0
        faces.append([n + 0, n + i, n + i + 1])  # cap at +x: CCW seen from +x -> normal +x
        faces.append([0, i + 1, i])              # cap at -x: reversed -> normal -x
    for i in range(n):  # side walls: edge i -> i+1 of a CCW loop, outward normal to its right
        j = (i + 1) % n
        faces.append([i, j, n + j])
        faces.append([i, n + j, n + i])
    return trimesh.Trimesh(vertices=vertices, faces=np.array(faces), process=False)


def make_bracket() -> trimesh.Trimesh:
    mesh = extrude(l_profile(), WIDTH_X)
    if not (mesh.is_watertight and mesh.is_winding_consistent):
        raise RuntimeError("bracket mesh is not closed and consistently wound")
    # the L's area: horizontal leg plus the part of the vertical leg below it
    y0, y1 = LEG_Y
    area = (y1 - y0) * THICK + THICK * (DROP - THICK)
    if not np.isclose(mesh.volume, area * WIDTH_X, rtol=1e-12):
        raise RuntimeError(f"bracket volume {mesh.volume} mm^3 is not {area * WIDTH_X} mm^3 (wrong winding?)")
    return mesh


def main(argv=None) -> int:
    out = Path(__file__).with_name("bracket.stl")
    mesh = make_bracket()
    data = trimesh.exchange.stl.export_stl(mesh)  # binary STL
    tmp = out.with_suffix(".stl.tmp")
    tmp.write_bytes(data)
    tmp.replace(out)
    print(f"wrote {out}: {len(mesh.faces)} triangles, volume {mesh.volume:.6g} mm^3, "
          f"bounds {mesh.bounds.tolist()} mm")
    return 0


if __name__ == "__main__":
    sys.exit(main())
