"""`truepull field SCENE`: potential, field and gradient tensor of a group at points, with error estimates.

Points come from `--points CSV` (columns x, y, z, header row), `--line X0,Y0,Z0:X1,Y1,Z1:N` (N points,
both ends included) or `--grid X0:X1:NX,Y0:Y1:NY,Z0:Z1:NZ` (NX*NY*NZ points, x fastest; a count of 1
takes the start value), all in the scene's length unit or with a unit (--line after each end, --grid
after each START and STOP or once after STOP: '-10:10 mm:5'). Output values are SI: positions m, U J/kg,
g = -grad U m/s^2 (toward the masses), T_ij = d g_i / d x_j 1/s^2, errors absolute (norms). Along a
line, the points where the gradient along the line vanishes are found and printed with the field's
curvature there. The computation is `integrate.field_at_points`; this module only reads and formats.
"""

from __future__ import annotations

import io
import os
import sys
from pathlib import Path

import numpy as np

from truepull.geometry.errors import InputError

HELP = "potential, field and gradient tensor of a group at points, with error estimates"

COLUMNS = (["x_m", "y_m", "z_m", "potential_J_per_kg", "gx_m_per_s2", "gy_m_per_s2", "gz_m_per_s2"]
           + [f"T{a}{b}_per_s2" for a in "xyz" for b in "xyz"]
           + ["error_potential_J_per_kg", "error_field_m_per_s2", "error_gradient_per_s2"])


def add_arguments(parser) -> None:
    from truepull.cli.options import add_groups, add_position, add_rtol, add_scene

    add_scene(parser)
    where = parser.add_mutually_exclusive_group(required=True)
    where.add_argument("--points", metavar="CSV", help="points from a CSV file with columns x, y, z (header row)")
    where.add_argument("--line", metavar="X0,Y0,Z0:X1,Y1,Z1:N",
                       help="N points on a segment, both ends included; the scene's length unit or a unit after "
                            "each end, e.g. '0,0,-5 cm:0,0,5 cm:101'")
    where.add_argument("--grid", metavar="X0:X1:NX,Y0:Y1:NY,Z0:Z1:NZ",
                       help="a box grid of NX*NY*NZ points; the scene's length unit or a unit after START and "
                            "STOP, or once after STOP for both, e.g. '0:10 mm:5,0:0:1,-1 cm:1 cm:3' ('--grid=...' when it starts with '-')")
    add_groups(parser, test=None, source="group whose field is computed")
    add_position(parser)
    add_rtol(parser)
    parser.add_argument("--out", metavar="FILE", help="write the CSV table to FILE instead of stdout")
    parser.add_argument("--vtk", metavar="FILE", help="also write the values as VTK point data (.vtk, .vtp or .vts)")


def _number(text, key, what):
    try:
        v = float(text)
    except ValueError:
        raise InputError(None, key, f"cannot read '{text}' as a number ({what})") from None
    if not np.isfinite(v):
        raise InputError(None, key, f"{what} is not finite")
    return v


def _count(text, key, what, least):
    try:
        n = int(text)
    except ValueError:
        raise InputError(None, key, f"cannot read '{text}' as a whole number ({what})") from None
    if n < least:
        raise InputError(None, key, f"{what} must be at least {least}, got {n}")
    return n


def parse_line(text: str, scene):
    """'X0,Y0,Z0:X1,Y1,Z1:N' -> (start (3,) m, end (3,) m, N): coordinates in the scene's length unit,
    or with a unit after an end point's coordinates ('0,0,-5 cm:0,0,5 cm:101')."""
    from truepull.cli.options import length_vector

    parts = text.split(":")
    if len(parts) != 3:
        raise InputError(None, "--line", f"expected X0,Y0,Z0:X1,Y1,Z1:N, got '{text}'")
    ends = []
    for p in parts[:2]:
        xyz = p.split(",")
        if len(xyz) != 3:
            raise InputError(None, "--line", f"an end point needs three coordinates, got '{p}'")
        ends.append(np.array(length_vector(p, scene, "--line")))
    n = _count(parts[2], "--line", "the number of points N", 2)
    if np.array_equal(ends[0], ends[1]):
        raise InputError(None, "--line", "the two ends are the same point")
    return ends[0], ends[1], n


def parse_grid(text: str, scene):
    """'X0:X1:NX,Y0:Y1:NY,Z0:Z1:NZ' -> three coordinate arrays in m: START and STOP in the scene's
    length unit, each with its own unit ('-10 mm:1 cm:5'), or one unit after STOP for both
    ('-10:10 mm:5')."""
    from truepull.cli.options import quantities

    axes = text.split(",")
    if len(axes) != 3:
        raise InputError(None, "--grid", f"expected X0:X1:NX,Y0:Y1:NY,Z0:Z1:NZ, got '{text}'")
    out = []
    for name, a in zip("xyz", axes):
        parts = a.split(":")
        if len(parts) != 3:
            raise InputError(None, "--grid", f"the {name} range must be START:STOP:COUNT, got '{a}'")
        lo, hi = quantities(f"{parts[0]}:{parts[1]}", ":", 2, "length", scene.length_unit, "--grid", scene.path,
                            f"the {name} START and STOP")
        if not (np.isfinite(lo) and np.isfinite(hi)):
            raise InputError(scene.path, "--grid", f"the {name} range is not finite, got '{a}'")
        n = _count(parts[2], "--grid", f"the {name} count", 1)
        if n == 1 and lo != hi:
            raise InputError(None, "--grid", f"a count of 1 along {name} needs START = STOP, got '{a}'")
        if n > 1 and lo == hi:
            raise InputError(None, "--grid", f"the {name} range is empty but the count is {n}")
        out.append(np.linspace(lo, hi, n))
    return out


def read_points_csv(path: str) -> np.ndarray:
    """(N, 3) points from a CSV with a header naming columns x, y, z (any order, other columns ignored)."""
    import csv

    try:
        with open(path, newline="") as fh:
            rows = list(csv.reader(fh))
    except OSError as exc:
        raise InputError(path, "--points", f"cannot read the file ({exc.strerror})") from None
    if not rows:
        raise InputError(path, "--points", "the file is empty")
    header = [h.strip().lower() for h in rows[0]]
    missing = [c for c in "xyz" if c not in header]
    if missing:
        raise InputError(path, "--points", f"missing column(s) {', '.join(missing)} in the header row")
    idx = [header.index(c) for c in "xyz"]
    pts = []
    for line_no, r in enumerate(rows[1:], start=2):
        if not any(c.strip() for c in r):
            continue
        if len(r) <= max(idx):
            raise InputError(path, f"line {line_no}", "too few columns")
        pts.append([_csv_number(r[i], path, line_no) for i in idx])
    if not pts:
        raise InputError(path, "--points", "no points below the header row")
    return np.array(pts, float)


def _csv_number(text, path, line_no):
    try:
        v = float(text)
    except ValueError:
        raise InputError(path, f"line {line_no}", f"cannot read '{text.strip()}' as a number") from None
    if not np.isfinite(v):
        raise InputError(path, f"line {line_no}", "a coordinate is not finite")
    return v


def csv_text(pf) -> str:
    table = np.column_stack([pf.points, pf.U, pf.g, pf.T.reshape(-1, 9), pf.err_U, pf.err_g, pf.err_T])
    buf = io.StringIO()
    buf.write(",".join(COLUMNS) + "\n")
    np.savetxt(buf, table, delimiter=",", fmt="%.17g")
    return buf.getvalue()


def to_json(pf, zeros=None) -> dict:
    """The `field --json` object (truepull.results.FieldResult.to_json)."""
    from truepull.results import FieldResult

    return FieldResult(pf, zeros).to_json()


def check_vtk_name(path: str, grid: bool) -> str:
    """The --vtk file's suffix, checked: .vts or .vtk for a grid, .vtp or .vtk otherwise."""
    suffix = Path(path).suffix.lower()
    allowed = (".vts", ".vtk") if grid else (".vtp", ".vtk")
    if suffix not in allowed:
        raise InputError(None, "--vtk", f"file name must end in {' or '.join(allowed)}, got '{path}'")
    return suffix


def write_vtk(path: str, pf, grid_shape=None) -> None:
    """Point data (SI) on a StructuredGrid (for --grid) or PolyData, written whole or not at all."""
    import tempfile

    import pyvista as pv

    target = Path(path)
    suffix = check_vtk_name(path, grid_shape is not None)
    if grid_shape is not None:
        nx, ny, nz = grid_shape
        xyz = pf.points.reshape(nz, ny, nx, 3)
        mesh = pv.StructuredGrid(*(np.ascontiguousarray(xyz[..., k].transpose(2, 1, 0)) for k in range(3)))
        order = np.arange(nx * ny * nz).reshape(nz, ny, nx).transpose(2, 1, 0).ravel(order="F")
    else:
        mesh = pv.PolyData(pf.points)
        order = np.arange(len(pf.points))
    mesh.point_data["potential"] = pf.U[order]
    mesh.point_data["field"] = pf.g[order]
    mesh.point_data["gradient"] = pf.T.reshape(-1, 9)[order]
    mesh.point_data["error_potential"] = pf.err_U[order]
    mesh.point_data["error_field"] = pf.err_g[order]
    mesh.point_data["error_gradient"] = pf.err_T[order]
    target.parent.mkdir(parents=True, exist_ok=True)
    fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=suffix, dir=target.parent)
    os.close(fd)
    try:
        mesh.save(tmp)
        os.replace(tmp, target)
    finally:
        if os.path.exists(tmp):
            os.unlink(tmp)


def zeros_text(zeros, direction) -> list[str]:
    d = ", ".join(f"{c:.6g}" for c in direction)
    if not zeros:
        return [f"the gradient along the line (direction {d}) does not vanish between its ends"]
    lines = []
    for z in zeros:
        at = ", ".join(f"{c:.12g}" for c in z.at)
        lines.append(f"gradient along the line vanishes at [{at}] m (s = {z.s:.12g} +- {z.err_s:.2g} m); "
                     f"curvature d2g/ds2 = {z.curvature:.9g} +- {z.err_curvature:.2g} 1/(m s^2)")
    return lines


def run(args) -> int:
    from truepull.api import field, load_scene
    from truepull.cli.output import print_json, write_atomic

    scene = load_scene(args.scene)
    if args.position is not None:
        scene.get_position(args.position)
    f = scene.length_factor
    grid_shape = None
    line = None
    if args.points is not None:
        pts = read_points_csv(args.points) * f
    elif args.line is not None:
        line = parse_line(args.line, scene)
    else:
        xs, ys, zs = parse_grid(args.grid, scene)
        grid_shape = (len(xs), len(ys), len(zs))
        Z, Y, X = np.meshgrid(zs, ys, xs, indexing="ij")
        pts = np.column_stack([X.ravel(), Y.ravel(), Z.ravel()])
    if args.vtk:
        check_vtk_name(args.vtk, grid_shape is not None)   # before the work, not after it
    result = field(scene, None if line is not None else pts, line=line, source=args.source,
                   position=args.position, rtol=args.rtol)
    pf, zeros = result.point_field, result.gradient_zeros
    if args.vtk:
        write_vtk(args.vtk, pf, grid_shape)
    if args.json:
        print_json(result.to_json())
        return 0
    text = csv_text(pf)
    notes = zeros_text(zeros, result.direction) if zeros is not None else []
    if args.out:
        write_atomic(args.out, text)
        sys.stdout.write(f"{len(pf.points)} points written to {args.out}\n")
        for line_text in notes:
            sys.stdout.write(line_text + "\n")
    else:
        sys.stdout.write(text)
        for line_text in notes:
            sys.stdout.write(f"# {line_text}\n")
    return 0
