"""`truepull view SCENE`: a 3-D picture of the bodies, the source group's field and the net pull.

Every body with its true shape and placement, groups in their own colours with a legend; the field
g of the source group (the engine's own values) on a plane through the test group's centre of
mass, as a colour map of |g| (m/s^2) with arrows along g; the net force on the test group and the
torque about the pivot as arrows. Axes read in the scene's length unit.

A window opens where there is a display (and no --png); `--png FILE` draws off-screen anywhere.
`--vtk FILE.vtm` writes the bodies and the sampled field (SI, metres) for ParaView: see
cli/vtk_output.py for what the file holds.
"""

from __future__ import annotations

import io
import sys
from pathlib import Path

import numpy as np

from truepull.cli.field_plane import PLANES, default_plane, field_polydata, sample_field, shown_plane
from truepull.cli.offscreen import RenderingUnavailable, have_display, prepare_offscreen
from truepull.cli.output import fmt, not_reached_exit, print_json, write_atomic
from truepull.geometry.errors import InputError
from truepull.geometry.scene import load_scene

HELP = "3-D picture of the bodies and the source group's field"
WINDOW_SIZE = (1400, 1000)
GRID_RANGE = (5, 201)


def add_arguments(parser) -> None:
    from truepull.cli import options

    options.add_scene(parser)
    options.add_position(parser, what="draw the scene at this [[position]]")
    parser.add_argument("--png", metavar="FILE", help="draw off-screen into this PNG file instead of a window")
    parser.add_argument("--vtk", metavar="FILE", help="also write bodies and sampled field as a VTK MultiBlock "
                                                     "(.vtm, SI units) for ParaView")
    parser.add_argument("--plane", choices=tuple(PLANES), help="plane of the field samples, through the test "
                                                               "group's centre of mass (default: across the fiber)")
    parser.add_argument("--grid", type=int, default=41, metavar="N", help="N x N field samples (default: 41)")
    options.add_groups(parser, source="group that pulls, whose field is drawn")
    options.add_rtol(parser, 1e-6)


def _centre(bodies) -> np.ndarray:
    """Net centre of mass (m) of a group; the mean body centre when the net mass is zero."""
    mass = sum(b.mass for b in bodies)
    if mass != 0:
        return sum((b.mass * b.com for b in bodies), np.zeros(3)) / mass
    return np.mean([b.bounding_sphere()[0] for b in bodies], axis=0)


def _check_args(args, scene) -> None:
    path = scene.path
    if args.position is not None:
        scene.get_position(args.position)
    lo, hi = GRID_RANGE
    if not lo <= args.grid <= hi:
        raise InputError(path, "--grid", f"the grid needs {lo} to {hi} points a side (got {args.grid})")
    if not args.rtol > 0:
        raise InputError(path, "--rtol", "the tolerance must be greater than zero")
    if args.png and Path(args.png).suffix.lower() != ".png":
        raise InputError(path, "--png", f"'{args.png}': the picture is written as PNG; name it *.png")
    if args.vtk:
        from truepull.cli.vtk_output import check_vtm_target

        check_vtm_target(args.vtk)
    if not args.png and not args.vtk and not have_display():
        raise InputError(path, "--png", "no display here: give --png FILE to draw off-screen (or --vtk FILE)")


def _png_bytes(image: np.ndarray) -> bytes:
    from PIL import Image

    buf = io.BytesIO()
    Image.fromarray(np.ascontiguousarray(image)).save(buf, format="PNG")
    return buf.getvalue()


def run(args) -> int:
    from truepull.integrate.interaction import compare_groups

    scene = load_scene(args.scene)
    _check_args(args, scene)
    comparison = compare_groups(scene, args.test, args.source, args.position, args.rtol)
    placed = scene.at_position(args.position)
    test, source = placed.group(args.test), placed.group(args.source)
    centre = _centre(test)
    plane = args.plane or default_plane(scene.frame.axis)
    fp = sample_field(source, test + source, centre, plane, args.grid, scene.G.value, args.rtol)

    from truepull.cli.body_surfaces import body_surface

    point_radius = 0.01 * fp.half_size
    surfaces = [body_surface(b, point_radius=point_radius) for b in placed.bodies]
    files = {}
    if args.vtk:
        from truepull.cli.vtk_output import view_multiblock, write_vtm_atomic

        mb = view_multiblock(surfaces, field_polydata(fp), centre, comparison.exact.force, scene.frame.pivot,
                             comparison.exact.torque)
        write_vtm_atomic(mb, args.vtk)
        files["vtk"] = str(args.vtk)

    window = have_display() and not args.png
    drawn = {}
    if args.png or window:
        try:
            drawn = _render(args, scene, placed, surfaces, fp, comparison, centre, window)
        except RenderingUnavailable as exc:
            sys.stderr.write(f"truepull view: {exc}\n")
            return 1
        if args.png:
            files["png"] = str(args.png)

    mag = fp.g_magnitude[~fp.masked]
    summary = {
        "scene": scene.path, "position": placed.position, "test": args.test, "source": args.source,
        "files": files, "plane": plane, "grid": args.grid, "centre": centre, "half_size": fp.half_size,
        "samples": fp.samples, "masked": int(np.count_nonzero(fp.masked)),
        "field": {"min": float(mag.min()) if mag.size else None, "max": float(mag.max()) if mag.size else None,
                  "max_error": float(np.max(fp.err_g[~fp.masked])) if mag.size else None, "units": "m/s^2",
                  "log_scale": drawn.get("log_scale"), "shown_min": drawn.get("min"), "shown_max": drawn.get("max")},
        "force": comparison.exact.force, "torque": comparison.exact.torque,
        "torque_axis": comparison.exact.torque_axis, "rtol": args.rtol,
        "colours": drawn.get("colours"), "legend": drawn.get("legend"), "force_zero": drawn.get("force_zero"),
    }
    if args.json:
        print_json(summary)
    else:
        u, f = scene.length_unit, scene.length_factor
        print(f"field of '{args.source}' on the {plane} plane through the centre of mass of '{args.test}' "
              f"({', '.join(fmt(x / f, 6) for x in centre)}) {u}: {fp.samples} samples, "
              f"{summary['masked']} masked inside or at source bodies")
        if mag.size:
            print(f"|g| from {fmt(mag.min(), 4)} to {fmt(mag.max(), 4)} m/s^2")
        print(f"net force {fmt(np.linalg.norm(comparison.exact.force), 6)} N, torque about the axis "
              f"{fmt(comparison.exact.torque_axis, 6)} N m")
        for kind, path in files.items():
            print(f"wrote {path}")
    return not_reached_exit("view", bool(comparison.reached))


def _render(args, scene, placed, surfaces, fp, comparison, centre, window: bool) -> dict:
    """Draw the picture: into a window, or off-screen into --png. Raises RenderingUnavailable."""
    if not window:
        prepare_offscreen()
    import pyvista as pv

    from truepull.cli.view_picture import draw

    where = f" at position {placed.position}" if placed.position else ""
    title = (scene.title or Path(scene.path).name) + where + f": field of {args.source}, pull on {args.test}"
    try:
        plotter = pv.Plotter(off_screen=not window, window_size=WINDOW_SIZE)
    except Exception as exc:  # VTK could not make a render window
        raise RenderingUnavailable(f"cannot open a render window ({' '.join(str(exc).split())})") from None
    try:
        shown = shown_plane(fp, placed.group(args.source), scene.G.value)
        info = draw(plotter, placed, placed.bodies, surfaces, fp, shown, comparison, centre, title)
        if window:
            plotter.show(title="truepull view")
            return info
        image = plotter.screenshot(None, return_img=True)
    finally:
        plotter.close()
    if image is None or image.ndim != 3 or np.all(image == image[0, 0]):
        raise RenderingUnavailable("the off-screen picture came out blank: VTK cannot draw on this machine")
    write_atomic(args.png, _png_bytes(image))
    return info
