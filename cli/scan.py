"""`truepull scan SCENE`: sweep a turn or a shift of a group; exact and point torque and stiffness.

The table (CSV) goes to stdout, or to --csv FILE; notes (method used, overlaps, checks) go to
stderr so that the CSV stays clean. Sweep values: a turn in degrees, a shift in the scene's length
unit on the command line (or either with its own unit, "0:2:0.5 mm"); in the CSV and JSON a turn is
in degrees and a shift in metres. The CSV's column names end in their units (`value_deg`,
`exact_torque_axis_N_m`, ...) and it carries the error columns of the JSON. The work is
`truepull.api.scan`; this module reads the options and writes the outputs.
"""

from __future__ import annotations

import math
import sys

import numpy as np

from truepull.cli import options
from truepull.cli.plot_units import power_of_ten, scaled_label as _scaled_label
from truepull.cli.output import not_reached_exit, print_json, save_figure_atomic, write_atomic
from truepull.integrate.scans import DEFAULT_CHECKS

HELP = "sweep a turn or a shift of a group; exact and point torque and stiffness"


def add_arguments(parser) -> None:
    options.add_scene(parser)
    what = parser.add_mutually_exclusive_group(required=True)
    what.add_argument("--turn", metavar="START:STOP:STEP", help=TURN_HELP)
    what.add_argument("--shift", metavar="x|y|z:START:STOP:STEP",
                      help="shift the group along a scene axis, in the scene's length unit or with a unit, "
                           "e.g. 'x:0:2:0.5 mm' (STOP included when it falls on the grid)")
    options.add_group(parser)
    options.add_groups(parser)
    options.add_position(parser, what="start from this [[position]] of the scene")
    options.add_rtol(parser)
    parser.add_argument("--csv", metavar="FILE", help="write the table to FILE instead of stdout")
    parser.add_argument("--png", metavar="FILE", help="plot of exact and point torque, stiffness and their ratio")
    options.add_parallel(parser)
    options.add_quiet(parser)
    parser.add_argument("--no-multipoles", action="store_true",
                        help="integrate every value directly, even where the multipole series applies")
    parser.add_argument("--checks", type=int, default=DEFAULT_CHECKS,
                        help=f"values also integrated directly to check the multipole series (default: "
                             f"{DEFAULT_CHECKS})")


TURN_HELP = ("turn the group about the frame axis through the pivot, in degrees or with a unit, e.g. "
             "'0:1:0.1 rad'; STOP included when it falls on the grid")


def parse_sweep(scene, args):
    """(sweep in SI, the values as output: degrees for a turn, metres for a shift, that unit's name)."""
    from truepull.api import sweep_of

    return sweep_of(scene, args.turn, args.shift, args.group)


def csv_text(result, shown, rtol: float = float("nan")) -> str:
    """The CSV table of an integrate.scans.ScanResult (truepull.results.ScanResult.csv)."""
    from truepull.results import ScanResult

    unit = "deg" if result.sweep.kind == "turn" else "m"
    return ScanResult(result, np.asarray(shown, float), unit, rtol).csv()


def meeting_spans(x, met) -> list[tuple[float, float]]:
    """(lo, hi) ranges of the sweep where bodies meet: each run of meeting values, widened halfway to
    the clear neighbours on either side (where exactly the bodies first meet is between them)."""
    x = np.asarray(x, float)
    met = np.asarray(met, bool)
    spans = []
    k = 0
    while k < len(x):
        if not met[k]:
            k += 1
            continue
        j = k
        while j + 1 < len(x) and met[j + 1]:
            j += 1
        lo = 0.5 * (x[k - 1] + x[k]) if k > 0 else x[k]
        hi = 0.5 * (x[j] + x[j + 1]) if j + 1 < len(x) else x[j]
        spans.append((min(lo, hi), max(lo, hi)))
        k = j + 1
    return spans


def position_marks(scene, sweep, start: str | None = None) -> list[tuple[str, float]]:
    """(name, sweep value as shown) of each [[position]] of the sweep's group that the sweep passes
    through: for a turn, the position's turn in degrees relative to `start` (a position name, or the
    scene as drawn); for a shift, its shift along the sweep's axis in metres, for positions with the
    start's turn."""
    base = scene.get_position(start) if start is not None else None
    turn0 = base.turn.value if base is not None and base.group == sweep.group else 0.0
    shift0 = [s.value for s in base.shift] if base is not None and base.group == sweep.group else [0.0] * 3
    marks = []
    for p in scene.positions:
        if p.group != sweep.group:
            continue
        if sweep.kind == "turn":
            if all(s.value == b for s, b in zip(p.shift, shift0)):
                marks.append((p.name, math.degrees(p.turn.value - turn0)))
        elif p.turn.value == turn0:
            k = "xyz".index(sweep.direction)
            others = [i for i in range(3) if i != k]
            if all(p.shift[i].value == shift0[i] for i in others):
                marks.append((p.name, p.shift[k].value - shift0[k]))
    return marks


def write_png(path: str, result, shown, unit: str, title: str, marks=()) -> None:
    """Torque, stiffness and their ratio to the point model across the sweep. Where bodies meet (an
    overlap row) no curve is drawn, the point model's included (a gap, not a line through the
    impossible region), and the region is shaded. `marks`: (name, value) of the scene's positions,
    drawn as labelled dotted lines where they fall inside the sweep. Legends sit right of the axes."""
    from matplotlib.figure import Figure

    x = np.asarray(shown, float)
    met = np.array([bool(r.overlap) for r in result.rows])
    exact = np.array([r.exact_torque_axis for r in result.rows])
    point = np.where(met, np.nan, np.array([r.point_torque_axis for r in result.rows]))
    stiff = np.array([r.exact_stiffness_axis for r in result.rows])
    point_stiff = np.where(met, np.nan, np.array([r.point_stiffness_axis for r in result.rows]))
    exact, stiff = np.where(met, np.nan, exact), np.where(met, np.nan, stiff)
    big = np.nanmax(np.abs(point)) if np.any(np.isfinite(point)) else 0.0
    with np.errstate(divide="ignore", invalid="ignore"):
        # near the point model's zeros the ratio says nothing; leave those values out
        ratio = np.where(np.abs(point) > 0.05 * big, exact / point, np.nan)
    pt, ps = power_of_ten(np.r_[exact, point]), power_of_ten(np.r_[stiff, point_stiff])
    fig = Figure(figsize=(9, 9), layout="constrained")
    ax = fig.subplots(3, 1, sharex=True)
    ax[0].plot(x, exact / 10.0**pt, label="exact", lw=1.6)
    ax[0].plot(x, point / 10.0**pt, "--", label="point masses", lw=1.2)
    ax[0].set_ylabel(_scaled_label("torque about the axis", "N m", pt))
    ax[0].set_title(title, pad=14 if marks else 6)
    ax[1].plot(x, stiff / 10.0**ps, label="exact", lw=1.6)
    ax[1].plot(x, point_stiff / 10.0**ps, "--", label="point masses", lw=1.2)
    ax[1].set_ylabel(_scaled_label("gravitational stiffness", "N m/rad", ps))
    ax[2].plot(x, ratio, color="C3", lw=1.4)
    ax[2].set_ylabel("exact / point torque")
    ax[2].set_title("ratio where the point torque exceeds 5% of its largest value", fontsize=9)
    what = "turn" if result.sweep.kind == "turn" else f"shift along {result.sweep.direction}"
    ax[2].set_xlabel(f"{what} of {result.sweep.group} ({unit})")
    spans = meeting_spans(x, met)
    lo, hi = (float(np.min(x)), float(np.max(x))) if x.size else (0.0, 0.0)
    inside = [(n, v) for n, v in marks if lo <= v <= hi]
    for a in ax:
        a.grid(True, alpha=0.3)
        for k, (s0, s1) in enumerate(spans):
            a.axvspan(s0, s1, color="0.6", alpha=0.35, lw=0, label="bodies meet" if k == 0 else None)
        for k, (name, v) in enumerate(inside):
            a.axvline(v, color="0.25", ls=":", lw=1.0, label="positions" if k == 0 else None)
    for name, v in inside:
        ax[0].annotate(name, (v, 1.0), xycoords=("data", "axes fraction"), xytext=(0, 2),
                       textcoords="offset points", ha="center", va="bottom", fontsize=8, color="0.25")
    for a in ax[:2]:
        a.legend(fontsize=8, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)
    if spans or inside:
        ax[2].legend(fontsize=8, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)
    save_figure_atomic(fig, path, dpi=110)


def run(args) -> int:
    from truepull.api import load_scene, scan

    scene = load_scene(args.scene)
    api_result = scan(scene, args.turn, args.shift, group=args.group, test=args.test, source=args.source,
                      position=args.position, rtol=args.rtol, workers=args.workers, scheduler=args.scheduler,
                      progress=options.show_progress(args), scene_path=args.scene,
                      multipoles=not args.no_multipoles, checks=args.checks)
    result, shown, unit, sweep = api_result.result, api_result.values, api_result.unit, api_result.result.sweep
    title = f"{scene.title or scene.path}: {sweep.kind} of {sweep.group}"
    if args.png:
        marks = position_marks(scene, sweep, args.position)
        write_png(args.png, result, shown, unit, title, marks)
    if args.json:
        print_json(api_result.to_json())
    else:
        text = api_result.csv()
        if args.csv:
            write_atomic(args.csv, text)
            print(f"wrote {args.csv}: {len(result.rows)} rows ({result.method})")
        else:
            sys.stdout.write(text)
    for note in result.notes:
        sys.stderr.write(f"truepull scan: {note}\n")
    if args.png and not args.json:
        sys.stderr.write(f"truepull scan: wrote {args.png}\n")
    return not_reached_exit("scan", result.reached)
