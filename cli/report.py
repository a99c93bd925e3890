"""`truepull report [SCENE] [--out DIR]`: the whole job in one go, into one folder.

Check, compare at every position, a turn scan, the bias ranking, the reduction with its budget (when
the scene has a [measurement]) and the fit of a recorded run (--data); figures (torque versus turn,
the 3-D view, the fit, the budget as a bar chart), a Markdown report with tables and one JSON of
everything. With no SCENE, the built-in demo. The folder is built beside its target and renamed into
place, so it is written whole or not at all; a non-empty existing folder is replaced only with
--force, and only when it holds an earlier truepull report.

Each section calls the Python API of its verb. A section whose module is not part of this build is
listed as not available, with the reason, rather than left out silently.
"""

from __future__ import annotations

import argparse
import contextlib
import hashlib
import io
import json
import math
import os
import re
import shutil
import sys
import tempfile
import time
from dataclasses import dataclass, field
from datetime import datetime, timezone
from pathlib import Path

import numpy as np

from truepull.cli.output import (EXIT_NOT_REACHED, dumps, fmt, folder_mode, make_parents, not_reached_exit, print_json,
                                 save_figure_atomic, to_jsonable, write_atomic)
from truepull.geometry.errors import InputError
from truepull.geometry.scene import load_scene

HELP = "the whole job into a folder of Markdown, JSON and figures"
DEFAULT_OUT = "truepull-report"
SURVEY_RTOL = 1e-6
SCAN_STEPS = 24
MARKER = "report.json"

CAUTIONS = (
    "Lead is toxic. Wear gloves when handling lead masses, keep food and drink away, wash your hands "
    "afterwards, and use sealed or painted masses.",
    "Heavy masses crush and tip. Move them with rated lifting gear and fix them on secured mounts and "
    "turntables; keep hands and feet out from under them.",
    "Laser optical levers: use low-power lasers only and never let the beam, or its reflection from the "
    "mirror, reach anyone's eye.",
    "Machining lead or tungsten alloys makes toxic dust and chips: use local extraction or wet methods, "
    "collect the chips, and follow the lab's rules for these metals.",
    "Turntables pinch: guard them, and never reach into a moving mount.",
    "Vacuum cans can implode: use cans rated for vacuum, shield their windows, and let air in slowly.",
    "A loaded fiber can snap, dropping the pendulum; keep the case closed and stand clear.",
    "Local codes, your laboratory's safety rules and licensed practice come first.",
)

FIGURES = {
    "scan": ("torque_vs_turn.png", "torque versus turn"),
    "view": ("view.png", "3-D view"),
    "fit": ("fit.png", "fit of the recorded run"),
    "budget": ("budget.png", "uncertainty budget"),
    "bias": ("bias.png", "sensitivity ranking"),
}


def add_arguments(parser) -> None:
    parser.add_argument("scene", metavar="SCENE", nargs="?",
                        help="scene file (TOML); default: the built-in demo")
    parser.add_argument("--out", metavar="DIR", default=DEFAULT_OUT,
                        help=f"folder to write (default: {DEFAULT_OUT}); must not exist or be empty")
    parser.add_argument("--force", action="store_true",
                        help="replace DIR when it holds an earlier truepull report")
    parser.add_argument("--data", metavar="CSV",
                        help="recorded run to fit (columns time, angle, position as for `truepull fit`)")
    parser.add_argument("--data-time-unit", default="s", help="unit of the run's time column (default: s)")
    parser.add_argument("--data-angle-unit", default="rad", help="unit of the run's angle column (default: rad)")
    from truepull.cli import options

    options.add_rtol(parser, what="relative tolerance of the engine for compare and the reduction")
    options.add_rtol(parser, SURVEY_RTOL, "relative tolerance of the engine for the turn scan, the bias ranking "
                                          "and the 3-D view's field", "--survey-rtol")
    parser.add_argument("--turn", metavar="START:STOP:STEP",
                        help="turn scan in degrees, STOP included when it falls on the grid, e.g. --turn=-60:60:5 "
                             "(default: across the positions' turns)")
    parser.add_argument("--samples", type=int, default=None,
                        help="Monte Carlo draws of the budget beside the GUM linear one, fixed (default: adaptive, "
                             "JCGM 101:2008 7.9, through the checked surrogate, as for reduce; 0 for the GUM "
                             "budget only)")
    parser.add_argument("--check-draws", type=int, default=50,
                        help="full-model draws that check the Monte Carlo's surrogate (default: 50)")
    options.add_parallel(parser)
    options.add_quiet(parser)
    options.add_groups(parser)
    parser.add_argument("--no-view", action="store_true", help="skip the 3-D picture")
    parser.add_argument("--no-bias", action="store_true", help="skip the bias ranking")


# ------------------------------------------------------------------------------------------------
# sections


@dataclass
class Section:
    """One part of the report: its JSON data, its Markdown text, the figure files it wrote and
    whether its computation reached the tolerance (None where no tolerance applies)."""

    name: str
    title: str
    data: dict = field(default_factory=dict)
    markdown: str = ""
    figures: list[str] = field(default_factory=list)
    reached: bool | None = None
    available: bool = True
    reason: str = ""
    seconds: float = 0.0

    def to_json(self) -> dict:
        out = {"available": self.available, "seconds": self.seconds}
        if not self.available:
            out["reason"] = self.reason
        out["reached"] = self.reached
        out["figures"] = list(self.figures)
        out.update(self.data)
        return out


class PieceMissing(Exception):
    """A module that a section needs is not part of this build."""


def _need(module: str):
    """Import a truepull module a section depends on; PieceMissing when it is not there."""
    import importlib

    try:
        return importlib.import_module(module)
    except ModuleNotFoundError as exc:
        if exc.name and exc.name.startswith("truepull"):
            raise PieceMissing(f"{exc.name} is not part of this build") from None
        raise


def relative_path(path, start) -> str:
    """`path` relative to the folder `start` (POSIX separators), or its bare name where none exists
    (another drive)."""
    try:
        return Path(os.path.relpath(os.path.abspath(path), os.path.abspath(start))).as_posix()
    except ValueError:
        return Path(path).name


@dataclass
class Context:
    """What every section reads: the scene, where it came from, the options and the folder."""

    scene: object
    scene_path: str
    scene_text: str
    args: argparse.Namespace
    folder: Path
    comparisons: list = field(default_factory=list)
    fitted: tuple | None = None          # (scene, scene text, run fit) with the recorded run's [measurement]
    reduced: dict = field(default_factory=dict)   # section name -> reduce data

    @property
    def scene_shown(self) -> str:
        """The scene's path as the report states it: relative to the report folder (so the report names
        no folder of the machine it ran on), or the file name when no relative path exists."""
        return relative_path(self.scene_path, Path(self.args.out))

    @property
    def lf(self) -> float:
        return self.scene.length_factor

    @property
    def lu(self) -> str:
        return self.scene.length_unit


def _md_table(headers, rows, align=None) -> str:
    align = align or ("l" + "r" * (len(headers) - 1))
    marks = {"l": ":--", "r": "--:", "c": ":-:"}
    lines = ["| " + " | ".join(str(h) for h in headers) + " |",
             "|" + "|".join(marks[a] for a in align) + "|"]
    for r in rows:
        lines.append("| " + " | ".join(str(c).replace("|", "\\|") for c in r) + " |")
    return "\n".join(lines)


def _vec(v, factor=1.0, digits=6) -> str:
    return "(" + ", ".join(fmt(float(x) / factor, digits) for x in np.asarray(v, float)) + ")"


def _rel(err, value) -> float | None:
    return float(abs(err) / abs(value)) if value else None


# --- check ---------------------------------------------------------------------------------------

def section_check(ctx: Context) -> Section:
    from truepull.cli.check import check_data

    s = Section("check", "Bodies and mass properties")
    data = check_data(ctx.scene)
    s.data = to_jsonable(data)
    lf, lu = ctx.lf, ctx.lu
    rows = []
    for b, d in zip(ctx.scene.bodies, data["bodies"]):
        kind = d["shape"] + (" (hole)" if b.is_hole else "")
        principal = np.linalg.eigvalsh(np.asarray(d["inertia_com"])) / lf**2
        rows.append([d["name"], d["group"], kind, fmt(d["mass"] * 1e3), fmt(d["volume"] / lf**3),
                     _vec(d["com"], lf), " ".join(fmt(x, 5) for x in principal)])
    parts = [_md_table(["body", "group", "shape", "mass (g)", f"volume ({lu}^3)", f"centre of mass ({lu})",
                        f"principal moments (kg {lu}^2)"], rows, "lllrrll")
             + "\n\nColumns: the body; its group; its shape; its mass; its volume; its centre of mass; the principal "
             "moments of inertia about its centre of mass."]
    grows = [[name, fmt(g["mass"] * 1e3), _vec(g["com"], lf), fmt(g["inertia_axis"] / lf**2)]
             for name, g in data["groups"].items()]
    parts.append(_md_table(["group", "net mass (g)", f"centre of mass ({lu})",
                            f"moment of inertia about the fiber axis (kg {lu}^2)"], grows, "lrlr")
                 + "\n\nColumns: the group; its mass with holes subtracted; its centre of mass; its moment of "
                 "inertia about the fiber axis through the pivot.")
    if ctx.scene.positions:
        prow = [[p.name, p.group, fmt(p.turn.value / ctx.scene.angle_factor), ctx.scene.angle_unit,
                 _vec([c.value for c in p.shift], lf)] for p in ctx.scene.positions]
        parts.append(_md_table(["position", "group", "turn", "unit", f"shift ({lu})"], prow, "llrll")
                     + "\n\nColumns: the position; the group it moves; its turn about the frame axis and the "
                     "turn's unit; its shift.")
    if data["warnings"]:
        parts.append("Warnings:\n\n" + "\n".join(f"- {w}" for w in data["warnings"]))
    else:
        parts.append("No warnings.")
    s.markdown = "\n\n".join(parts)
    return s


# --- compare -------------------------------------------------------------------------------------

def torque_scale(c) -> float:
    """Size of the torque about the axis against which its error is read: the total, or the sum of
    the pairs' sizes where they cancel (a symmetric position has a total near zero)."""
    return max(abs(c.exact.torque_axis), sum(abs(p.torque_axis(c.axis)) for p in c.pairs))


def section_compare(ctx: Context) -> Section:
    from truepull.cli.output import guarded_ratio
    from truepull.integrate.interaction import compare_positions

    s = Section("compare", "Exact interaction beside the point-mass model")
    comps = compare_positions(ctx.scene, ctx.args.test, ctx.args.source, rtol=ctx.args.rtol)
    ctx.comparisons = comps
    results = [c.to_json() for c in comps]
    worst = [x for c in comps for x in (_rel(c.error.torque_axis, torque_scale(c)),
                                        _rel(c.error.stiffness_axis, c.exact.stiffness_axis)) if x is not None]
    s.reached = all(c.reached for c in comps)
    s.data = {"rtol": ctx.args.rtol, "largest_relative_error": max(worst) if worst else None, "results": results}
    head = ["position", "torque exact (N m)", "torque point (N m)", "exact/point", "error (N m)",
            "stiffness exact (N m/rad)", "stiffness point (N m/rad)", "exact/point", "|force| (N)", "reached"]
    rows = []
    for c in comps:
        rows.append([c.position or "as drawn", fmt(c.exact.torque_axis, 10), fmt(c.point.torque_axis, 10),
                     fmt(guarded_ratio(c.exact.torque_axis, c.point.torque_axis, c.error.torque_axis), 8),
                     fmt(c.error.torque_axis, 2), fmt(c.exact.stiffness_axis, 8), fmt(c.point.stiffness_axis, 8),
                     fmt(guarded_ratio(c.exact.stiffness_axis, c.point.stiffness_axis, c.error.stiffness_axis), 8),
                     fmt(float(np.linalg.norm(c.exact.force)), 8), "yes" if c.reached else "NO"])
    parts = [f"Test group `{comps[0].test}`, source group `{comps[0].source}`; torque about the fiber axis, "
             f"stiffness -d(torque)/d(turn of the test group); requested tolerance {ctx.args.rtol:g}.",
             _md_table(head, rows, "l" + "r" * 8 + "l")
             + "\n\nColumns: the position; the exact torque about the fiber axis, the point-mass model's, their "
             "ratio and the exact torque's estimated error; the same for the stiffness (no error column); the "
             "exact force's magnitude; whether the tolerance was reached."]
    for c in comps:
        total = c.exact.torque_axis
        # a share of a total that cancels (a symmetric position) says nothing
        shares = abs(total) > 1e-6 * torque_scale(c)
        prow = []
        for p in c.pairs:
            t = p.torque_axis(c.axis)
            share = f"{100 * t / total:.3g} %" if shares else "-"
            prow.append([p.test, p.source, fmt(t, 8), share, p.method])
        where = f"position {c.position}" if c.position else "the scene as drawn"
        parts.append(f"Pairs at {where}:\n\n" + _md_table(["test body", "source body", "torque (N m)", "share",
                                                           "method"], prow, "llrrl")
                     + ("\n\nColumns: the body pulled; the body pulling; the exact torque about the fiber axis; "
                        "its share of the total; how the engine computed it." if c is comps[0] else ""))
        for n in c.notes:
            parts.append(f"Note ({where}): {n}")
    s.markdown = "\n\n".join(parts)
    return s


# --- scan ----------------------------------------------------------------------------------------

def default_turns(scene) -> tuple[str, tuple[float, ...]]:
    """(moving group, turn values in degrees): across the turns of the first moving group's
    positions in SCAN_STEPS steps, or a whole turn in 15-degree steps."""
    group = scene.positions[0].group if scene.positions else "attractor"
    turns = [math.degrees(p.turn.value) for p in scene.positions if p.group == group]
    lo, hi = (min(turns), max(turns)) if turns else (0.0, 0.0)
    if hi - lo < 1e-9:
        return group, tuple(float(v) for v in np.arange(-180.0, 180.0 + 1e-9, 15.0))
    return group, tuple(float(v) for v in np.linspace(lo, hi, SCAN_STEPS + 1))


def section_scan(ctx: Context) -> Section:
    scans = _need("truepull.integrate.scans")
    from truepull.cli.scan import csv_text, position_marks, write_png

    s = Section("scan", "Torque versus turn")
    scene = ctx.scene
    group, shown = default_turns(scene)
    if ctx.args.turn:
        shown = scans.parse_range(ctx.args.turn, "--turn", scene.path)
    if group not in scene.groups():
        s.available, s.reason = False, f"no group '{group}' to turn"
        return s
    sweep = scans.Sweep("turn", tuple(math.radians(v) for v in shown), group)
    result = scans.scan(scene, sweep, test=ctx.args.test, source=ctx.args.source, rtol=ctx.args.survey_rtol, workers=ctx.args.workers, scheduler=getattr(ctx.args, "scheduler", None),
                        scene_path=ctx.scene_path, progress=False)
    png, caption = FIGURES["scan"]
    write_png(str(ctx.folder / png), result, shown, "deg", f"{scene.title or Path(scene.path).name}: turn of {group}",
              position_marks(scene, sweep))
    write_atomic(ctx.folder / "scan.csv", csv_text(result, shown))
    s.figures = [png, "scan.csv"]
    s.reached = bool(result.reached)
    rows = [dict(r.to_json(), value=float(v)) for v, r in zip(shown, result.rows)]
    s.data = {"group": group, "unit": "deg", "method": result.method, "degree": result.degree,
              "rtol": ctx.args.survey_rtol, "notes": list(result.notes), "rows": rows}
    exact = np.array([r.exact_torque_axis for r in result.rows], float)
    finite = np.isfinite(exact)
    parts = [f"Turn of `{group}` about the fiber axis from {fmt(shown[0])} to {fmt(shown[-1])} deg, "
             f"{len(shown)} values, by {result.method} integration at tolerance {ctx.args.survey_rtol:g}; "
             f"the table is in `scan.csv`.", f"![{caption}]({png})"]
    if finite.any():
        k = int(np.nanargmax(np.abs(np.where(finite, exact, np.nan))))
        r = result.rows[k]
        ratio = r.exact_torque_axis / r.point_torque_axis if r.point_torque_axis else float("nan")
        parts.append(f"Largest torque {fmt(r.exact_torque_axis, 8)} N m at {fmt(shown[k])} deg "
                     f"(point model {fmt(r.point_torque_axis, 8)} N m, exact/point {fmt(ratio, 8)}).")
    if result.series is not None:
        parts += _harmonics_parts(result.series, group, s.data)
    parts += [f"Note: {n}" for n in result.notes]
    s.markdown = "\n\n".join(parts)
    return s


HARMONICS_SHOWN = 8


def _harmonics_parts(series, group: str, data: dict) -> list[str]:
    """The torque's leading Fourier harmonics in the turn, from the scan's multipole series."""
    from truepull.cli.moments import harmonics_json, leading_harmonics

    data["torque_harmonics"] = harmonics_json(series)
    rows = leading_harmonics(series, 1e-6, HARMONICS_SHOWN)
    if not rows:
        return []
    return [f"The torque as a Fourier series in the turn phi of `{group}` from the scene as drawn, "
            f"tau(phi) = sum of C_m cos(m phi) + S_m sin(m phi), from the multipole moments up to degree "
            f"{series.L} (the higher degrees add at most {fmt(series.bounds.torque, 2)} N m at any turn); the "
            f"leading harmonics, above a millionth of the largest:",
            _md_table(["m", "C_m (N m)", "S_m (N m)", "amplitude (N m)", "error (N m)"], rows, "rrrrr")
            + "\n\nColumns: the harmonic's order m; its cosine and sine coefficients; sqrt(C_m^2 + S_m^2); the "
            "bound on their error. The series comes from the inner moments q_lm of the pendulum and the outer "
            "moments Q_lm of the attractor about the pivot, in the torsion-balance multipole formalism (D'Urso and "
            "Adelberger, Phys. Rev. D 55, 7970 (1997); Adelberger, Collins and Hoyle, Class. Quantum Grav. 23, "
            "125 (2006)), with orthonormal Y_lm in the Condon-Shortley phase; the order m of a moment is the order "
            "of the torque harmonic it feeds."]


# --- bias ----------------------------------------------------------------------------------------

BIAS_ROWS_SHOWN = 15
REPORT_FLATTENING = 1e-3
"""The flattening of the report's what-if for each attractor sphere (an example size: 0.1 %)."""
REPORT_SPHERES = 4


def section_bias(ctx: Context) -> Section:
    sens = _need("truepull.integrate.balance.sensitivity")
    s = Section("bias", "What moves the result")
    result = sens.sensitivities(ctx.scene, ctx.args.test, ctx.args.source, rtol=ctx.args.survey_rtol, workers=ctx.args.workers, scheduler=getattr(ctx.args, "scheduler", None),
                                scene_path=ctx.scene_path, progress=False)
    s.data = result.to_json()
    where = f"position {result.position}" if result.position else "the scene as drawn"
    head = ["body", "parameter", "value (SI)", "d torque / d parameter", "u (SI)", "torque ppm", "G ppm", "+- ppm"]
    rows = [[r.body, r.parameter, fmt(r.value, 6), fmt(r.d_torque_axis, 6), fmt(r.u, 3) if r.u else "-",
             "-" if r.torque_ppm is None else f"{r.torque_ppm:+.4g}",
             "-" if r.G_ppm is None else f"{r.G_ppm:+.4g}",
             "-" if r.G_ppm_error is None else f"{r.G_ppm_error:.2g}"] for r in result.rows[:BIAS_ROWS_SHOWN]]
    parts = [f"Sensitivity of the torque about the fiber axis at {where} "
             f"({fmt(result.torque_axis, 10)} N m) to each body's placement, size and density, ranked by the "
             f"change a stated uncertainty makes (ppm per u); derivatives per SI unit, at tolerance "
             f"{ctx.args.survey_rtol:g}." + (f" G model: {result.G_model}." if result.G_model else ""),
             _md_table(head, rows, "llrrrrrr")
             + "\n\nColumns: the body; its parameter; the parameter's value; the torque's derivative with respect "
             "to it; its stated standard uncertainty; the torque's change for one u, in ppm; G's change for one u, "
             "in ppm, and a bound on that figure's error from the engine's errors."]
    if len(result.rows) > BIAS_ROWS_SHOWN:
        parts.append(f"The {BIAS_ROWS_SHOWN} largest of {len(result.rows)} rows; all are in report.json.")
    from truepull.cli.bias import what_if_rows, write_png as bias_png

    spheres = [b for b in ctx.scene.group(ctx.args.source) if b.shape.kind == "sphere"][:REPORT_SPHERES]
    what_ifs = [sens.flatten_what_if(ctx.scene, b.name, REPORT_FLATTENING, test=ctx.args.test, source=ctx.args.source,
                                     position=result.position, rtol=ctx.args.survey_rtol) for b in spheres]
    if what_ifs:
        s.data["what_if"] = [w.to_json() for w in what_ifs]
        parts.append(f"What if a sphere is not round: each {ctx.args.source} sphere as an ellipsoid of equal mass and "
                     f"density, flattened by {REPORT_FLATTENING:g} along the fiber axis (semi-axes a, a, a (1 - f)), "
                     f"the others unchanged (torque at {where}; G by {what_ifs[0].G_method or NO_G_MODEL}).")
        parts.append(_md_table(["change", "torque before (N m)", "after (N m)", "torque ppm", "G ppm", "+- ppm"],
                               what_if_rows(what_ifs), "lrrrrr")
                     + "\n\nColumns: the change made; the torque before and after it; the torque's change in ppm; "
                     "G's change in ppm, and a bound on its error from the engine's errors.")
    if what_ifs or any(r.torque_ppm is not None for r in result.rows):
        png, caption = FIGURES["bias"]
        bias_png(ctx.folder / png, result, what_ifs, ctx.scene.title or "")
        s.figures.append(png)
        parts.append(f"![{caption}]({png})")
    parts += [f"Note: {n}" for n in result.notes]
    s.markdown = "\n\n".join(parts)
    return s


NO_G_MODEL = "no first-order model: no measurement, or the acceleration or servo method"

# --- reduce --------------------------------------------------------------------------------------

def section_reduce(ctx: Context, scene=None, scene_text: str | None = None, name: str = "reduce",
                   title: str = "G from the measurement") -> Section:
    """The reduction of `scene` (default: the report's scene) whose TOML text is `scene_text`."""
    red = _need("truepull.integrate.balance.reduction")
    bud = _need("truepull.integrate.balance.reduction_budget")
    s = Section(name, title)
    scene = scene if scene is not None else ctx.scene
    scene_text = scene_text if scene_text is not None else ctx.scene_text
    reduction = red.reduce_measurement(scene, test=ctx.args.test, source=ctx.args.source, rtol=ctx.args.rtol)
    data = reduction.to_json()
    ctx.reduced[name] = data
    budget = bud.reduction_budget(scene, reduction, scene_text, test=ctx.args.test, source=ctx.args.source,
                                  samples=ctx.args.samples, check_draws=ctx.args.check_draws,
                                  workers=ctx.args.workers, scheduler=getattr(ctx.args, "scheduler", None), progress=False)
    data.update(budget.to_json(reduction.G))
    s.data = data
    s.reached = bool(reduction.reached)
    G, u = data["G"], data["u_G"]
    unit = "m^3 kg^-1 s^-2"
    from truepull.cli import reduce as reduce_cli

    parts = [f"**{reduce_cli.g_line(data)}**; all digits: G = {G:.9g}" + (f" ± {u:.3g}" if u else "")
             + f"; method {data['method']}; numerical error about {data['numerical_error'] / G * 1e6:.2g} ppm "
             f"at engine tolerance {data['rtol']:g}" + ("" if data["reached"] else " (NOT reached everywhere)") + "."]
    mc_text = reduce_cli.mc_lines(data)
    if mc_text:
        parts.append("\n".join(["- " + mc_text[0]] + ["- " + line.strip() for line in mc_text[1:]]))
    if data["G_point"] is not None:
        parts.append(f"Point-mass value (textbook formula): G_point = {data['G_point']:.9g} {unit}. "
                     "The corrections below take it to G; their product is exact.")
        formula = reduce_cli.point_formula_lines(data)
        if formula:
            parts.append("```\n" + "\n".join(formula[:-1]) + "\n```\n\n" + formula[-1].strip())
    crow = [[c["name"], fmt(c["factor"], 12), f"{c['ppm']:+.3f}", "yes" if c["applied"] else "no input", c["note"]]
            for c in data["corrections"]]
    parts.append(_md_table(["correction", "factor", "ppm", "applied", "note"], crow, "lrrll")
                 + "\n\nColumns: the refinement switched on; the factor it multiplies G by; that factor - 1 in ppm; "
                 "whether its input is in the scene; how it was computed.")
    parts.extend(method_tables(data))
    parts.append(reduce_cli.inertia_line(data)[0].upper() + reduce_cli.inertia_line(data)[1:] + ".")
    if data["budget"]:
        brow = [[b["input"], fmt(b["value"], 9), fmt(b["u"], 3), b["unit"], fmt(b["sensitivity"], 4),
                 f"{b['contribution_ppm']:.3g}", f"{b['share'] * 100:.1f} %"]
                for b in sorted(data["budget"], key=lambda b: -b["contribution"])]
        parts.append("Uncertainty budget (JCGM 100, linear propagation):\n\n" +
                     _md_table(["input", "value", "u", "unit", "sensitivity", "ppm of G", "share"], brow, "lrrlrrr")
                     + "\n\nColumns: the input quantity; its value and standard uncertainty u (k = 1) in SI; "
                     "the unit of both; the sensitivity dG/dx (m^3 kg^-1 s^-2 per unit of the input); the "
                     "contribution |dG/dx| u in ppm of G; its share of u(G)^2.")
        png, caption = FIGURES["budget"]
        if name.startswith("reduce_") and name != "reduce_run":  # one of several methods: a figure each
            png, caption = f"budget-{name.removeprefix('reduce_')}.png", f"{caption} ({data['method']})"
        budget_png(ctx.folder / png, data["budget"], G, u)
        s.figures.append(png)
        parts.append(f"![{caption}]({png})")
    parts += [f"Note: {n}" for n in list(data.get("notes", [])) + list(data.get("budget_notes", []))]
    s.markdown = "\n\n".join(parts)
    return s


def method_tables(data: dict) -> list[str]:
    """Markdown of what the method measured: per position (deflection, swing, servo) or per harmonic
    of the turn (acceleration)."""
    t = data.get("method_terms")
    if data["method"] == "acceleration":
        rows = [[str(h["harmonic"]), fmt(h["amplitude"], 9), fmt(h["amplitude_point"], 9),
                 f"{math.degrees(h['phase']):.4f}"] for h in t["harmonics"]]
        return [_md_table(["harmonic n", "abs(T_n) per unit G (kg^2 m^-1)", "point model", "phase (deg)"], rows, "rrrr")
                + f"\n\nColumns: the harmonic of the relative turn of '{t['signal_group']}'; the amplitude of that harmonic "
                "of the axial torque per unit G; the same for every body a point; its phase. The measured harmonic "
                f"{t['harmonic']}: abs(T) = {t['amplitude']:.12g} ± {t['amplitude_error']:.2g} ({t['route']})."]
    if data["method"] == "servo":
        rows = [[p["position"], fmt(tau, 9), fmt(g, 9), fmt(p["torque_axis"], 9)]
                for p, tau, g in zip(data["positions"], t["servo_torque"], t["gamma_per_G"])]
        return [_md_table(["position", "servo torque (N m)", "Gamma per unit G", "G Gamma (N m)"], rows, "lrrr")
                + "\n\nColumns: the measured position; the servo's torque on the pendulum (given, or c V^2); the "
                "attractor's exact axial torque per unit G at the held angle; the same times G. The common offset "
                f"{t['offset_torque']:.6g} N m cancels."]
    prow = [[p["position"], fmt(p["equilibrium"] * 1e3, 9), fmt(p["torque_axis"], 6), fmt(p["stiffness_axis"], 6)]
            for p in data["positions"]]
    return [_md_table(["position", "equilibrium (mrad)", "torque (N m)", "stiffness (N m/rad)"], prow, "lrrr")
            + "\n\nColumns: the measured position; the solved turn of the pendulum from the fiber's rest angle; "
            "the attractor's torque about the fiber axis there; its gravitational stiffness "
            "-d(torque)/d(turn) there."]


def section_methods(ctx: Context) -> Section:
    """Every [[measurement]] of the scene reduced by its method, side by side (with their
    differences in combined standard uncertainties), each one's reduction below."""
    from truepull.cli import reduce as reduce_cli
    from truepull.integrate.balance.method_comparison import comparisons

    s = Section("reduce", "G by each method")
    results, parts, reached = [], [], True
    for m in ctx.scene.measurements:
        one = section_reduce(ctx, ctx.scene.with_measurement(m.method), ctx.scene_text, f"reduce_{m.method}",
                             f"G by {m.method}")
        results.append(one.data)
        reached = reached and bool(one.reached)
        s.figures.extend(one.figures)
        parts.append(f"### {one.title}\n\n" + one.markdown)
    data = {**results[0], "methods": results, "comparison": comparisons(results)}
    rows = [[r["method"], f"{r['G']:.9g}", "-" if r["u_G"] is None else f"{r['u_G']:.3g}"] for r in results]
    head = [_md_table(["method", "G (m^3 kg^-1 s^-2)", "u(G)"], rows, "lrr")]
    head += ["- " + line for line in reduce_cli.comparison_lines(data)[2:]]
    s.data, s.reached = data, reached
    s.markdown = "\n\n".join(head + parts)
    return s


TOTAL_LABEL = "total u(G)"
"""The budget figure's top bar: the combined standard uncertainty itself, not a sum of the bars."""


def budget_png(path, rows, G: float, u: float | None = None, top: int = 20) -> None:
    """Horizontal bars: each input's contribution to u(G) in ppm of G, largest at the top, and above
    them, in its own colour, the combined u(G) (the budget's total, which adds the contributions in
    quadrature with their correlations, so it is less than their sum); the title gives G in concise
    notation when u is known."""
    from matplotlib.figure import Figure

    from truepull.cli.notation import concise, ppm

    rows = sorted(rows, key=lambda b: -b["contribution"])[:top][::-1]
    names = [b["input"] for b in rows]
    values = [b["contribution_ppm"] for b in rows]
    colours = ["C0"] * len(rows)
    if u:
        names.append(TOTAL_LABEL)
        values.append(abs(u / G) * 1e6)
        colours.append("C3")
    fig = Figure(figsize=(8, 1.1 + 0.32 * max(len(names), 1)), layout="constrained")
    ax = fig.subplots()
    y = np.arange(len(names), dtype=float)
    if u:
        y[-1] += 0.5  # a gap between the inputs and their total
    ax.barh(y, values, color=colours)
    ax.set_yticks(y, names, fontsize=8)
    if u:
        ax.get_yticklabels()[-1].set_fontweight("bold")
        ax.text(values[-1], y[-1], f" {ppm(u, G)} ppm", va="center", fontsize=8)
        ax.set_xlim(0, values[-1] * 1.15)
    ax.set_xlabel("contribution to u(G) (ppm of G)")
    shown = f"{concise(G, u)} m^3 kg^-1 s^-2 ({ppm(u, G)} ppm)" if u else f"{G:.7g} m^3 kg^-1 s^-2"
    ax.set_title(f"uncertainty budget of G = {shown}", fontsize=10)
    ax.grid(True, axis="x", alpha=0.3)
    save_figure_atomic(fig, path, dpi=110)


# --- fit -----------------------------------------------------------------------------------------

def section_fit(ctx: Context) -> Section:
    from truepull.cli import fit as fit_cli

    s = Section("fit", "Fit of the recorded run")
    parser = argparse.ArgumentParser()
    fit_cli.add_arguments(parser)
    fargs = parser.parse_args([str(ctx.args.data), "--time-unit", ctx.args.data_time_unit,
                               "--angle-unit", ctx.args.data_angle_unit])
    t, angle, labels, lines, column = fit_cli.load_run(fargs)
    names = set(labels) if labels is not None else set()
    known = {p.name for p in ctx.scene.positions}
    notes = []
    if len(names) >= 2 and names <= known:
        text, run, notes = fit_cli.fitted_scene_text(fargs, ctx.scene_path, test=ctx.args.test,
                                                     source=ctx.args.source, rtol=ctx.args.rtol)
        from truepull.geometry.scene import load_scene_text
        from truepull.integrate.balance.fitting import fit_record

        fits = fit_record(t, angle, labels, file=fargs.data, time_key=fargs.time_column, angle_key=column,
                          line_numbers=lines)

        fitted_scene = load_scene_text(text, ctx.scene_path, str(Path(ctx.scene_path).resolve().parent))
        ctx.fitted = (fitted_scene, text, run)
    else:
        fits, run = fit_cli.fit_data(t, angle, labels, lines, column, fargs)
        text = None
    png, caption = FIGURES["fit"]
    fit_cli.write_png(str(ctx.folder / png), fits, t, angle, fargs.time_unit, fargs.angle_unit, run)
    s.figures = [png]
    s.data = {"data": relative_path(ctx.args.data, Path(ctx.args.out)), "segments": [f.as_dict() for f in fits]}
    if run is not None:
        s.data["run"] = run.as_dict()
    rows = [[k, f.position or "-", fmt(f.t_start), fmt(f.t_end), f.n_points, f"{fmt(f.period)} ± {fmt(f.u_period, 2)}",
             f"{fmt(f.decrement)} ± {fmt(f.u_decrement, 2)}", f"{fmt(f.equilibrium)} ± {fmt(f.u_equilibrium, 2)}",
             fmt(f.residual_rms, 3)] for k, f in enumerate(fits, start=1)]
    parts = [f"`{Path(ctx.args.data).name}`: first each segment alone (a damped sinusoid with drift and offset; "
             "the starting values), then one fit of the whole run (SI: s, rad; standard uncertainties).",
             _md_table(["#", "position", "from (s)", "to (s)", "points", "period (s)", "decrement",
                        "equilibrium (rad)", "residual rms (rad)"], rows, "rlrrrrrrr")]
    if run is not None:
        parts.append("```\n" + fit_cli.run_text(run, "s", "rad") + "\n```")
    parts.append(f"![{caption}]({png})")
    parts += [f"Note (segment {k}): {f.note}" for k, f in enumerate(fits, start=1) if f.note]
    if text is not None:
        import re

        block = re.search(r"^\[measurement\].*?(?=^\[|\Z)", text, re.S | re.M).group(0).rstrip() + "\n"
        s.data["measurement_block"] = block
        parts.append("The `[measurement]` table from this fit (`truepull fit --into` writes it into a new scene; "
                     "`truepull reduce SCENE --data RUN` reduces it directly):\n\n```toml\n" + block + "```")
    parts += [f"Note: {n}" for n in notes]
    s.markdown = "\n\n".join(parts)
    return s


def section_reduce_run(ctx: Context) -> Section:
    """G from the recorded run's fitted [measurement]; beside the scene's stated one when both exist."""
    if ctx.fitted is None:
        raise PieceMissing("the run's positions are not the scene's, so its fit is not reduced")
    scene, text, _ = ctx.fitted
    s = section_reduce(ctx, scene, text, "reduce_run", "G from the recorded run")
    stated = ctx.reduced.get("reduce")
    if stated is not None and stated.get("u_G") and s.data.get("u_G"):
        d = s.data["G"] - stated["G"]
        uc = math.hypot(s.data["u_G"], stated["u_G"])
        s.data["stated_comparison"] = {"G_stated": stated["G"], "u_G_stated": stated["u_G"], "difference": d,
                                       "in_combined_u": d / uc}
        s.markdown += (f"\n\nThe scene's stated `[measurement]` gives G = {stated['G']:.9g} ± {stated['u_G']:.3g}; "
                       f"the run's G differs by {d:.3g} m^3 kg^-1 s^-2, {d / uc:.2f} combined standard "
                       f"uncertainties (sqrt(u1^2 + u2^2), as if independent).")
    return s


# --- view ----------------------------------------------------------------------------------------

def section_view(ctx: Context) -> Section:
    view = _need("truepull.cli.view")
    s = Section("view", "3-D view")
    png, caption = FIGURES["view"]
    parser = argparse.ArgumentParser()
    view.add_arguments(parser)
    argv = [ctx.scene_path, "--png", str(ctx.folder / png), "--rtol", repr(ctx.args.survey_rtol),
            "--test", ctx.args.test, "--source", ctx.args.source]
    position = ctx.scene.positions[0].name if ctx.scene.positions else None
    if position:
        argv += ["--position", position]
    vargs = parser.parse_args(argv)
    vargs.json = True
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = view.run(vargs)
    if code not in (0, EXIT_NOT_REACHED) or not (ctx.folder / png).is_file():
        why = " ".join(err.getvalue().split()) or f"truepull view ended with code {code}"
        s.available, s.reason = False, f"the 3-D picture could not be drawn here: {why}"
        return s
    s.data = json.loads(out.getvalue())
    s.data["files"] = {"png": png}
    s.data["scene"] = ctx.scene_shown
    s.figures = [png]
    where = f" at position {position}" if position else ""
    s.markdown = (f"The bodies{where} in their group colours, the field of `{ctx.args.source}` on a plane through "
                  f"the centre of mass of `{ctx.args.test}`, and the net force and torque on it (engine tolerance "
                  f"{ctx.args.survey_rtol:g}).\n\n![{caption}]({png})")
    return s


# ------------------------------------------------------------------------------------------------
# the folder, written whole or not at all


def _is_inside(path: Path, folder: Path) -> bool:
    try:
        path.resolve().relative_to(folder.resolve())
        return True
    except ValueError:
        return False


def check_target(out: Path, force: bool, inputs) -> None:
    """Refuse a target we must not replace (InputError naming --out)."""
    if out.exists() and not out.is_dir():
        raise InputError(str(out), "--out", "exists and is not a folder")
    for p in inputs:
        if p and _is_inside(Path(p), out):
            raise InputError(str(out), "--out", f"the input {p} lies inside it; choose another folder")
    if out.is_dir() and any(out.iterdir()):
        if not force:
            raise InputError(str(out), "--out", "already exists and is not empty; add --force to replace it")
        marker = out / MARKER
        try:
            ok = json.loads(marker.read_text()).get("tool", {}).get("name") == "truepull"
        except (OSError, ValueError, AttributeError):
            ok = False
        if not ok:
            raise InputError(str(out), "--out", "holds files that are not a truepull report; not replacing it, "
                                                "even with --force")


TMP_INFIX = ".tmp-"
"""A report is built in `.NAME.tmp-XXXXXXXX` beside its target (mkdtemp's 8 random characters)."""

STALE_AFTER = 15 * 60.0
"""Seconds after which a leftover build folder of ours (a killed run's) is removed by the next report."""

_STALE_NAME = re.compile(r"^\..+\.(tmp|old)-[A-Za-z0-9_]{8}$")


def clean_stale_folders(parent: Path, older_than: float = STALE_AFTER) -> list[Path]:
    """Remove hidden build folders `.NAME.tmp-XXXXXXXX` / `.NAME.old-XXXXXXXX` (our exact naming) in
    `parent` untouched for more than `older_than` seconds: what a killed report leaves behind.
    Folders of a run still going are younger and kept; anything else is never touched."""
    removed = []
    now = time.time()
    try:
        entries = list(os.scandir(parent))
    except OSError:
        return removed
    for e in entries:
        if not _STALE_NAME.match(e.name):
            continue
        try:
            if not e.is_dir(follow_symlinks=False) or now - e.stat(follow_symlinks=False).st_mtime <= older_than:
                continue
        except OSError:
            continue
        shutil.rmtree(e.path, ignore_errors=True)
        removed.append(Path(e.path))
    return removed


def replace_folder(tmp: Path, out: Path) -> None:
    """Move the finished folder `tmp` into place at `out` (replacing an earlier report there)."""
    if out.is_dir() and any(out.iterdir()):
        old = Path(tempfile.mkdtemp(prefix=f".{out.name}.old-", dir=out.parent))
        os.rmdir(old)
        os.rename(out, old)
        try:
            os.rename(tmp, out)
        except BaseException:
            os.rename(old, out)
            raise
        shutil.rmtree(old, ignore_errors=True)
    else:
        os.replace(tmp, out)  # out absent, or an empty folder


# ------------------------------------------------------------------------------------------------
# the verb


def _version() -> str:
    try:
        from importlib.metadata import version

        return version("truepull")
    except Exception:
        return "unknown"


def _validate(args) -> None:
    for key, value in (("--rtol", args.rtol), ("--survey-rtol", args.survey_rtol)):
        if not (value > 0 and math.isfinite(value)):
            raise InputError(None, key, "the tolerance must be a finite number greater than zero")
    if args.samples is not None and args.samples < 0:
        raise InputError(None, "--samples", f"must be 0 or more, got {args.samples}")
    if args.check_draws < 2:
        raise InputError(None, "--check-draws", f"must be 2 or more, got {args.check_draws}")
    if args.workers is not None and args.workers < 1:
        raise InputError(None, "--workers", "must be 1 or more")
    if args.data is not None and not Path(args.data).is_file():
        raise InputError(args.data, "--data", "data file not found" if not Path(args.data).exists() else "not a file")


def plan(scene, args) -> list:
    """The sections to run, in report order."""
    steps = [section_check, section_compare, section_scan]
    if not args.no_bias:
        steps.append(section_bias)
    if args.data:
        steps.append(section_fit)
    if len(scene.measurements) > 1:
        steps.append(section_methods)
    elif scene.measurement is not None:
        steps.append(section_reduce)
    if args.data:
        steps.append(section_reduce_run)
    if not args.no_view:
        steps.append(section_view)
    return steps


def _progress(msg: str, quiet: bool = False) -> None:
    if quiet:
        return
    sys.stderr.write(f"truepull report: {msg}\n")
    sys.stderr.flush()


def build(ctx: Context) -> list[Section]:
    sections = []
    for step in plan(ctx.scene, ctx.args):
        start = time.perf_counter()
        name = step.__name__.removeprefix("section_")
        _progress(f"{name} ...", getattr(ctx.args, "quiet", False))
        try:
            s = step(ctx)
        except PieceMissing as exc:
            s = Section(name, name, available=False, reason=str(exc))
        s.seconds = round(time.perf_counter() - start, 3)
        _progress(f"{name} done in {s.seconds:.1f} s" + ("" if s.available else f" (not available: {s.reason})"),
                  getattr(ctx.args, "quiet", False))
        sections.append(s)
    return sections


def summary(ctx: Context, sections: list[Section], started: float) -> dict:
    reached = [s.reached for s in sections if s.reached is not None]
    missing = [{"section": s.name, "reason": s.reason} for s in sections if not s.available]
    if ctx.scene.measurement is None:
        missing.append({"section": "reduce", "reason": "the scene has no [measurement] table"})
    if not ctx.args.data:
        missing.append({"section": "fit", "reason": "no recorded run given (--data CSV)"})
    return {
        "tool": {"name": "truepull", "version": _version()},
        "created": datetime.now(timezone.utc).isoformat(timespec="seconds"),
        "scene": {"path": ctx.scene_shown, "title": ctx.scene.title,
                  "sha256": hashlib.sha256(ctx.scene_text.encode("utf-8")).hexdigest()},
        "rtol": ctx.args.rtol, "survey_rtol": ctx.args.survey_rtol,
        "tolerance_reached": all(reached) if reached else None,
        "seconds": round(time.perf_counter() - started, 3),
        "not_included": missing,
        "sections": {s.name: s.to_json() for s in sections},
        "cautions": list(CAUTIONS),
    }


def markdown(ctx: Context, sections: list[Section], info: dict) -> str:
    scene = ctx.scene
    reached = info["tolerance_reached"]
    lines = [f"# truepull report: {scene.title or Path(ctx.scene_path).name}", "",
             f"- scene: `{ctx.scene_shown}` (sha256 {info['scene']['sha256'][:16]}...)",
             f"- tool: truepull {info['tool']['version']}; written {info['created']} in {info['seconds']:.1f} s",
             f"- engine tolerance: {ctx.args.rtol:g} for compare and the reduction, {ctx.args.survey_rtol:g} for the "
             f"scan, the bias ranking and the 3-D field; reached: "
             + ("yes, everywhere" if reached else "NO, see the sections marked" if reached is False else "-"),
             ]
    worst = info["sections"].get("compare", {}).get("largest_relative_error")
    if worst is not None:
        lines.append(f"- largest estimated relative error of the torque and stiffness in compare: {worst:.2g} "
                     "(a torque that cancels by symmetry is read against the sum of its pairs' sizes)")
    lines += ["- units: SI in the tables unless a column says otherwise; lengths of the scene in "
             f"{scene.length_unit}", "",
             "Safety first: see the cautions at the end of this report.", ""]
    if info["not_included"]:
        lines += ["Not included:", ""]
        lines += [f"- {m['section']}: {m['reason']}" for m in info["not_included"]]
        lines.append("")
    for s in sections:
        if not s.available:
            continue
        flag = "" if s.reached is not False else " (tolerance NOT reached)"
        lines += [f"## {s.title}{flag}", "", s.markdown, ""]
    lines += ["## Cautions", ""] + [f"- {c}" for c in CAUTIONS] + [""]
    lines += ["Files: `report.json` holds every number above and more (SI units)."
              + ("" if not any(s.figures for s in sections) else " Figures: "
                 + ", ".join(f"`{f}`" for s in sections for f in s.figures) + "."), ""]
    return "\n".join(lines)


def run(args) -> int:
    _validate(args)
    if args.scene is None:
        from truepull.shapes import demo_path

        scene_path = str(demo_path())
        if args.data is None:
            from truepull.shapes import demo_run_path

            args.data = str(demo_run_path())   # the built-in demo includes its invented run
    else:
        scene_path = args.scene
    scene = load_scene(scene_path)
    scene_text = Path(scene_path).read_text(encoding="utf-8")
    out = Path(args.out)
    check_target(out, args.force, [scene_path, args.data])
    make_parents(out)
    clean_stale_folders(out.parent)
    started = time.perf_counter()
    try:
        tmp = Path(tempfile.mkdtemp(prefix=f".{out.name}{TMP_INFIX}", dir=out.parent))
        os.chmod(tmp, folder_mode())
    except OSError as exc:
        raise InputError(None, None, f"cannot write the report folder '{out}': {exc.strerror or exc}; "
                         "choose a writable place with free space") from None
    try:
        ctx = Context(scene, scene_path, scene_text, args, tmp)
        sections = build(ctx)
        info = summary(ctx, sections, started)
        files = sorted(p.name for p in tmp.iterdir()) + ["report.md", MARKER]
        info["files"] = sorted(set(files))
        write_atomic(tmp / "report.md", markdown(ctx, sections, info))
        write_atomic(tmp / MARKER, dumps(info))
        check_target(out, args.force, [])  # nothing new appeared there meanwhile
        replace_folder(tmp, out)
    except BaseException as exc:
        shutil.rmtree(tmp, ignore_errors=True)
        if isinstance(exc, OSError):
            raise InputError(None, None, f"cannot write the report folder '{out}': {exc.strerror or exc}; "
                             "choose a writable place with free space") from None
        raise
    if args.json:
        print_json(dict(info, out=str(out)))
    else:
        print(f"wrote {out}/: {', '.join(info['files'])}")
        print(f"tolerance reached: {'yes' if info['tolerance_reached'] else 'no' if info['tolerance_reached'] is False else '-'}")
        for m in info["not_included"]:
            print(f"not included: {m['section']}: {m['reason']}")
    return not_reached_exit("report", info["tolerance_reached"])
