"""`truepull bias SCENE`: how the torque (and G) move with each body's placement, size and density.

A ranked table of d(torque about the axis)/d(parameter) per SI unit of the parameter, the stated
uncertainty u in the scene, ppm of torque per u, and, when the scene has a [measurement], the
change of G (first-order model, see truepull.integrate.balance.sensitivity). What-if options:
  --offset BODY:dx,dy,dz           move a body (scene length unit, world axes)
  --flatten BODY:f[:ax,ay,az]      replace a sphere by an ellipsoid of equal mass, flattening f, its
                                   polar axis along (ax, ay, az) (default: the frame axis)
  --void BODY:radius:dx,dy,dz      an off-centre spherical void of that radius (scene length unit) at
                                   that offset from the body's reference point (world axes)
  --measured-form BODY             a fitted measured form (geometry/measured_form.py) against the ideal
                                   sphere of its mass and centre of mass
Each may be given more than once.
Exit 3 (after the whole output) when the engine missed the tolerance for any value shown: the scene's
torque, a row (its difference stencil or its pairs) or a what-if; the text, the JSON (`reached`,
`not_reached`) and the warning on stderr name which.
"""

from __future__ import annotations

import sys

import numpy as np

from truepull.cli.options import show_progress
from truepull.cli.output import fmt, format_table, not_reached_exit, print_json, save_figure_atomic
from truepull.geometry.errors import InputError
from truepull.geometry.scene import load_scene
from truepull.integrate.balance.sensitivity import (flatten_what_if, gradient_what_if, measured_form_what_if,
                                                    offset_what_if, void_what_if)

HELP = "sensitivity of torque and G to each body's placement, size and density"


def add_arguments(parser) -> None:
    from truepull.cli import options

    options.add_scene(parser)
    options.add_position(parser, default="the first measured position, else the first position, else the scene "
                                         "as drawn", what="the [[position]] whose torque is reported")
    options.add_groups(parser)
    options.add_rtol(parser)
    parser.add_argument("--body", action="append", metavar="NAME", help="only this body (repeatable)")
    parser.add_argument("--offset", action="append", default=[], metavar="BODY:dx,dy,dz",
                        help="what if BODY were moved by (dx, dy, dz), in the scene's length unit or with a unit, "
                             "e.g. 'bob:0.1,0,0 mm'")
    parser.add_argument("--flatten", action="append", default=[], metavar="BODY:f[:ax,ay,az]",
                        help="what if sphere BODY were an ellipsoid of equal mass with flattening f")
    parser.add_argument("--void", action="append", default=[], metavar="BODY:radius:dx,dy,dz",
                        help="what if BODY had a spherical void of that radius at that offset, in the scene's "
                             "length unit or with units, e.g. 'bob:1 mm:0.5,0,0 mm'")
    parser.add_argument("--gradient", action="append", default=[], metavar="GROUP:REL",
                        help="what if each body of GROUP had a density gradient along z of REL of its density "
                             "across its bounding diameter (e.g. attractor:1e-4)")
    parser.add_argument("--measured-form", action="append", default=[], metavar="BODY",
                        help="what the measured form of BODY (a mesh body fitted from a CSV) does beside the ideal "
                             "sphere of its mass and centre of mass")
    parser.add_argument("--full-reduction", action="store_true",
                        help="what-ifs: reduce G in full before and after (slower) instead of the first-order "
                             "model")
    parser.add_argument("--no-table", action="store_true", help="only the what-ifs, no sensitivity table")
    parser.add_argument("--png", metavar="FILE", help="bar chart of the ranked sensitivities (ppm per stated u) "
                                                      "and the what-ifs")
    options.add_parallel(parser)
    options.add_quiet(parser)


def _numbers(text: str, n: int, key: str, file) -> list[float]:
    parts = [p.strip() for p in text.split(",")]
    if len(parts) != n:
        raise InputError(file, key, f"expected {n} comma-separated numbers, got '{text}'")
    try:
        values = [float(p) for p in parts]
    except ValueError:
        raise InputError(file, key, f"expected numbers, got '{text}'") from None
    if not all(abs(v) < float("inf") for v in values):
        raise InputError(file, key, f"numbers must be finite, got '{text}'")
    return values


def _body_name(scene, name: str, key: str) -> str:
    try:
        scene.body(name)
    except KeyError:
        known = ", ".join(b.name for b in scene.bodies)
        raise InputError(scene.path, key, f"no body named '{name}' (bodies: {known})") from None
    return name


def parse_what_ifs(scene, args) -> list[tuple]:
    """[(kind, body, arguments in SI)] from the what-if options."""
    from truepull.cli.options import length, length_vector

    out = []
    for text in args.offset:
        name, sep, rest = text.rpartition(":")
        if not sep or not name:
            raise InputError(scene.path, "--offset", f"expected BODY:dx,dy,dz, got '{text}'")
        v = length_vector(rest, scene, "--offset")
        out.append(("offset", _body_name(scene, name, "--offset"), (v,)))
    for text in args.flatten:
        parts = text.split(":")
        if len(parts) not in (2, 3) or not parts[0]:
            raise InputError(scene.path, "--flatten", f"expected BODY:f or BODY:f:ax,ay,az, got '{text}'")
        flat = _numbers(parts[1], 1, "--flatten", scene.path)[0]
        axis = _numbers(parts[2], 3, "--flatten", scene.path) if len(parts) == 3 else None
        out.append(("flatten", _body_name(scene, parts[0], "--flatten"), (flat, axis)))
    for text in args.void:
        parts = text.split(":")
        if len(parts) != 3 or not parts[0]:
            raise InputError(scene.path, "--void", f"expected BODY:radius:dx,dy,dz, got '{text}'")
        radius = length(parts[1], scene, "--void")
        offset = length_vector(parts[2], scene, "--void")
        out.append(("void", _body_name(scene, parts[0], "--void"), (radius, offset)))
    for text in args.gradient:
        group, sep, rest = text.rpartition(":")
        if not sep or group not in scene.groups():
            raise InputError(scene.path, "--gradient", f"expected GROUP:REL with a group of the scene "
                                                      f"({', '.join(scene.groups())}), got '{text}'")
        out.append(("gradient", group, (_numbers(rest, 1, "--gradient", scene.path)[0],)))
    for name in getattr(args, "measured_form", ()):
        out.append(("measured-form", _body_name(scene, name, "--measured-form"), ()))
    return out


def run_what_if(scene, item, **kw):
    kind, name, a = item
    if kind == "offset":
        return offset_what_if(scene, name, a[0], **kw)
    if kind == "flatten":
        return flatten_what_if(scene, name, a[0], a[1], **kw)
    if kind == "gradient":
        return gradient_what_if(scene, name, a[0], **kw)
    if kind == "measured-form":
        return measured_form_what_if(scene, name, **kw)
    return void_what_if(scene, name, a[0], a[1], **kw)


def _ppm(x) -> str:
    return "-" if x is None else f"{x:+.4g}"


def _err(x) -> str:
    return "-" if x is None else f"{x:.2g}"


def what_if_rows(what_ifs) -> list[list[str]]:
    """Table rows [change, torque before, after, torque ppm, G ppm, its error] of the what-ifs."""
    return [[w.description, fmt(w.torque_before, 10), fmt(w.torque_after, 10), _ppm(w.torque_ppm), _ppm(w.G_ppm),
             _err(w.G_ppm_error)] for w in what_ifs]


def not_reached(result, what_ifs) -> list[str]:
    """Names of the values that missed the tolerance: "torque", "BODY PARAMETER", "what-if N" (1-based)."""
    names = list(result.not_reached) if result is not None else []
    return names + [f"what-if {i + 1}" for i, w in enumerate(what_ifs) if not w.reached]


NAMES_SHOWN = 8


def named(names: list[str]) -> str:
    """At most NAMES_SHOWN names, then how many more."""
    more = len(names) - NAMES_SHOWN
    return ", ".join(names[:NAMES_SHOWN]) + (f" and {more} more" if more > 0 else "")


def render(scene, result, what_ifs) -> str:
    lines = []
    if result is not None:
        where = f"position {result.position}" if result.position else "the scene as drawn"
        lines.append(f"torque about the axis at {where}: {fmt(result.torque_axis, 10)} N m "
                     f"(+- {fmt(result.torque_error, 2)})")
        if result.G_model:
            lines.append(f"G model: {result.G_model}")
        headers = ["body", "parameter", "value (SI)", "d torque / d parameter (N m per SI unit)", "u (SI)",
                   "torque (ppm)", "d G / d parameter (per SI unit)", "G (ppm)", "+- (ppm)"]
        rows = [[r.body, r.parameter, fmt(r.value, 6), fmt(r.d_torque_axis, 6), fmt(r.u, 3) if r.u else "-",
                 _ppm(r.torque_ppm), fmt(r.d_G, 4) if r.d_G is not None else "-", _ppm(r.G_ppm), _err(r.G_ppm_error)]
                for r in result.rows]
        lines.append("")
        lines.append(format_table(headers, rows, "llrrrrrrr"))
        lines.append("")
        lines.append("values and u in SI (m, kg/m^3, kg, rad); derivatives per SI unit; ppm per stated u; "
                     "+- bounds G's ppm from the engine's errors")
        for n in result.notes:
            lines.append(f"note: {n}")
    if what_ifs:
        lines.append("")
        lines.append("what if")
        headers = ["change", "torque before (N m)", "after (N m)", "torque (ppm)", "G (ppm)", "+- (ppm)"]
        lines.append(format_table(headers, what_if_rows(what_ifs), "lrrrrr"))
    missed = not_reached(result, what_ifs)
    rtol = result.rtol if result is not None else None
    lines.append("")
    if missed:
        lines.append(f"tolerance NOT reached for: {named(missed)}; their error estimates say what was reached")
    else:
        lines.append("tolerance reached" + (f" ({rtol:g})" if rtol else "") + " for every value above")
    return "\n".join(lines)


PNG_ROWS = 20


LABEL_WIDTH = 38
"""Bar labels longer than this many characters are wrapped onto more lines, never cut."""


def wrapped(label: str, width: int = LABEL_WIDTH) -> str:
    """The label on lines of at most `width` characters (words kept whole), every word kept."""
    import textwrap

    return "\n".join(textwrap.wrap(label, width, break_long_words=False, break_on_hyphens=False)) or label


def _bars(ax, y, torque, G, labels):
    """Torque bars (and G bars beside them when any G value is known) at heights y, labelled; the
    legend sits outside the axes, right of the bars, so that it covers none of them."""
    has_G = any(g is not None for g in G)
    h = 0.4 if has_G else 0.7
    ax.barh(y + (h / 2 if has_G else 0), torque, h, label="torque", color="C0")
    if has_G:
        ax.barh(y - h / 2, [g or 0.0 for g in G], h, label="G", color="C1")
        ax.legend(fontsize=8, loc="upper left", bbox_to_anchor=(1.01, 1.0), borderaxespad=0.0)
    ax.set_yticks(y, [wrapped(t) for t in labels], fontsize=8)
    ax.grid(True, axis="x", alpha=0.3)


def write_png(path, result, what_ifs, title: str = "") -> None:
    """Horizontal bars: the ppm of torque (and of G) that each parameter's stated u makes, largest at
    the top (at most PNG_ROWS); a second panel for the what-ifs when there are any."""
    from matplotlib.figure import Figure

    ranking = result is not None or not what_ifs
    rows = [r for r in (result.rows if result is not None else ()) if r.torque_ppm is not None][:PNG_ROWS][::-1]
    lines = sum(wrapped(w.description).count("\n") + 1 for w in what_ifs)
    heights = ([0.9 + 0.3 * max(len(rows), 2)] if ranking else []) + \
              ([0.9 + 0.3 * max(len(what_ifs), 2) + 0.15 * lines] if what_ifs else [])
    fig = Figure(figsize=(8.5, sum(heights) + 0.4), layout="constrained")
    axes = list(fig.subplots(len(heights), 1, height_ratios=heights, squeeze=False)[:, 0])
    if ranking:
        ax = axes.pop(0)
        _bars(ax, np.arange(len(rows)), [abs(r.torque_ppm) for r in rows],
              [None if r.G_ppm is None else abs(r.G_ppm) for r in rows], [f"{r.body} {r.parameter}" for r in rows])
        ax.set_xlabel("|change| per stated standard uncertainty (ppm), first order")
        where = f"position {result.position}" if result is not None and result.position else "the scene as drawn"
        ax.set_title((f"{title}: " if title else "") + f"sensitivity at {where}" +
                     ("" if rows else " (no uncertainties stated)"), fontsize=10)
    if what_ifs:
        ax = axes.pop(0)
        _bars(ax, np.arange(len(what_ifs))[::-1], [w.torque_ppm for w in what_ifs], [w.G_ppm for w in what_ifs],
              [w.description for w in what_ifs])
        ax.axvline(0.0, color="k", lw=0.8)
        ax.set_xlabel("change of torque and of G (ppm)")
        ax.set_title("what if", fontsize=10)
    save_figure_atomic(fig, path, dpi=110)


def run(args) -> int:
    from truepull.api import bias

    scene = load_scene(args.scene)
    items = parse_what_ifs(scene, args)
    found = bias(scene, test=args.test, source=args.source, position=args.position, rtol=args.rtol, bodies=args.body,
                 changes=items, full_reduction=args.full_reduction, table=not args.no_table, workers=args.workers,
                 scheduler=args.scheduler, progress=show_progress(args), scene_path=args.scene)
    result, what_ifs = found.result, found.what_ifs
    if args.png:
        write_png(args.png, result, what_ifs, scene.title or "")
    missed = not_reached(result, what_ifs)
    if args.json:
        data = result.to_json() if result is not None else {"rows": []}
        data["what_if"] = [w.to_json() for w in what_ifs]
        data["reached"], data["not_reached"] = not missed, missed
        print_json(data)
    else:
        print(render(scene, result, what_ifs))
        if args.png:
            sys.stderr.write(f"truepull bias: wrote {args.png}\n")
    return not_reached_exit("bias", not missed, f"for {named(missed)}" if missed else "")
