"""The Python interface: every verb of `truepull` as a function returning a result object.

SI units in and out (m, kg, s, rad; turns of a scan in degrees, as the command takes them); each
result's `.to_json()` is the verb's `--json` object, `.table()` a list of dicts for
`pandas.DataFrame`. The command-line verbs call these same functions, so both give the same numbers.
Bad input raises `truepull.InputError` (its `one_line()` is the message the command prints).

Examples
--------
>>> import truepull
>>> scene = truepull.load_scene(truepull.demo_path())            # doctest: +SKIP
>>> c = truepull.compare(scene)                                   # doctest: +SKIP
>>> c.exact_torque_axis / c.point_torque_axis                     # doctest: +SKIP
"""

from __future__ import annotations

import argparse
import weakref
from pathlib import Path

import numpy as np

from truepull.results import (BiasResult, CheckResult, CompareResult, CorrectionTable, FieldResult,
                                      FitResult, ReduceResult, ScanResult)
from truepull.geometry.errors import InputError

__all__ = ["load_scene", "scene_from_text", "build_scene", "scene_toml", "demo_path", "demo_run_path",
           "check", "compare", "scan", "field", "reduce", "fit", "bias",
           "CheckResult", "CompareResult", "CorrectionTable", "ScanResult", "FieldResult", "ReduceResult",
           "FitResult", "BiasResult", "InputError"]

_TEXTS: "weakref.WeakKeyDictionary" = weakref.WeakKeyDictionary()
"""The TOML text of scenes made from text or Python objects (the budget re-reads a scene's text)."""


# ------------------------------------------------------------------------------------------------
# scenes


def load_scene(path) -> object:
    """Read and validate a scene file.

    Parameters
    ----------
    path : str or os.PathLike
        The scene file (TOML); mesh files are found relative to it.

    Returns
    -------
    truepull.geometry.scene.Scene
        The scene in SI (bodies, groups, frame, positions, measurement).

    Raises
    ------
    InputError
        The file is missing or not a valid scene (the message names the key).
    """
    from truepull.geometry.scene import load_scene as _load

    return _load(path)


def scene_from_text(text: str, base_dir=None, name: str = "<text>") -> object:
    """A scene from TOML text, as in a scene file.

    Parameters
    ----------
    text : str
        The scene file's text.
    base_dir : str or os.PathLike, optional
        Where relative mesh paths start (default: the current folder).
    name : str
        What messages call the scene.

    Returns
    -------
    truepull.geometry.scene.Scene
    """
    from truepull.geometry.scene import load_scene_text

    scene = load_scene_text(text, name, None if base_dir is None else str(Path(base_dir).resolve()))
    _TEXTS[scene] = text
    return scene


def scene_toml(bodies, *, positions=(), frame=None, units=None, title=None, G=None, measurement=None) -> str:
    """The TOML text of a scene given as Python objects (see build_scene)."""
    from truepull.scene_building import scene_text

    return scene_text(bodies, positions=positions, frame=frame, units=units, title=title, G=G,
                      measurement=measurement)


def build_scene(bodies, *, positions=(), frame=None, units=None, title=None, G=None, measurement=None,
                base_dir=None) -> object:
    """A scene from Python objects, with the keys of the scene file.

    Parameters
    ----------
    bodies : list of dict
        One dict per `[[body]]`, e.g. ``{"name": "m1", "group": "attractor", "shape": "sphere",
        "radius": 0.05, "density": 11340, "at": [0.1, 0, 0]}``; values may be strings with units and
        uncertainties (``"25.4 +- 0.01 mm"``), numbers or numpy values.
    positions : list of dict, optional
        One dict per `[[position]]` (name, group, turn, shift).
    frame, units, measurement : dict, optional
        The `[frame]`, `[units]` and `[measurement]` tables.
    title : str, optional
        `[scene] title`.
    G : float or str, optional
        `[scene] G` (default CODATA 2018).
    base_dir : str or os.PathLike, optional
        Where relative mesh paths start.

    Returns
    -------
    truepull.geometry.scene.Scene
        Validated exactly as a scene file is (the same messages on bad input).
    """
    text = scene_toml(bodies, positions=positions, frame=frame, units=units, title=title, G=G,
                      measurement=measurement)
    return scene_from_text(text, base_dir, "<python scene>")


def demo_path() -> Path:
    """The built-in demo scene file (an invented torsion balance)."""
    from truepull.shapes import demo_path as _demo

    return Path(_demo())


def demo_run_path() -> Path:
    """The built-in demo's invented recorded run (CSV)."""
    from truepull.shapes import demo_run_path as _run

    return Path(_run())


def _scene(scene):
    """A Scene from a Scene or a path."""
    if isinstance(scene, (str, Path)):
        return load_scene(scene)
    return scene


# ------------------------------------------------------------------------------------------------
# verbs


def check(scene, overlaps: bool = True) -> CheckResult:
    """Mass properties, group totals, warnings and the stated uncertainties of a scene (`check`).

    Parameters
    ----------
    scene : Scene or path
    overlaps : bool
        Search for overlapping and touching bodies (the slow part of large scenes).

    Returns
    -------
    CheckResult
    """
    from truepull.geometry.audit import all_group_totals, scene_warnings
    from truepull.geometry.stated import stated_uncertainties

    scene = _scene(scene)
    bodies = [{"name": b.name, "group": b.group, "shape": b.shape.kind, "mass": b.mass, "volume": b.volume,
               "com": b.com, "inertia_com": b.inertia_com} for b in scene.bodies]
    groups = {name: {"mass": t.mass, "com": t.com, "inertia_axis": t.inertia_axis}
              for name, t in all_group_totals(scene).items()}
    notes = []
    for b, d in zip(scene.bodies, bodies):
        if b.has_gradient:
            d["uniform_mass"] = b.uniform_mass
            d["density_gradient"] = (b.placement.rotation @ b.gradient).tolist()
            stated = "stated mass" if b.spec is not None and b.spec.mass is not None else "density times volume"
            notes.append(f"'{b.name}' has a density gradient: its {stated} ({b.uniform_mass:.6g} kg) is the mass of "
                         f"the uniform part; the mass, centre of mass and inertia shown include the linear part")
    for b in scene.bodies:
        spec = b.spec
        if spec is not None and spec.temperature is not None and spec.expansion is None:
            notes.append(f"'{b.name}' has no expansion coefficient (no material, no expansion key): it is not "
                         f"scaled to the temperature {spec.temperature.value:g} degC")
    from truepull.geometry.measured_form import measured_form_notes

    notes += measured_form_notes(scene)
    return CheckResult(scene, bodies, groups, scene_warnings(scene, overlaps=overlaps), stated_uncertainties(scene),
                       notes)


def compare(scene, test: str = "pendulum", source: str = "attractor", position: str | None = None,
            rtol: float = 1e-9) -> CompareResult:
    """Exact force, torque and stiffness of `test` from `source` beside the point-mass model (`compare`).

    Parameters
    ----------
    scene : Scene or path
    test, source : str
        The group that feels the pull and the group that pulls.
    position : str, optional
        Only this [[position]] (default: every position, or the scene as drawn when it has none).
    rtol : float
        Relative tolerance of the engine.

    Returns
    -------
    CompareResult
        One entry per position; `.corrections()` gives the exact / point factors.
    """
    from truepull.integrate.interaction import compare_positions

    scene = _scene(scene)
    if position is not None:
        scene.get_position(position)
    return CompareResult(tuple(compare_positions(scene, test, source, rtol, position)))


def sweep_of(scene, turn=None, shift=None, group: str = "attractor"):
    """(integrate.scans.Sweep in SI, values as shown, unit) from `scan`'s turn or shift.

    turn : "START:STOP:STEP" (degrees, or with a unit, e.g. "0:1:0.1 rad") or a sequence of degrees.
    shift : "x|y|z:START:STOP:STEP" (the scene's length unit, or with a unit, "x:0:2:0.5 mm") or a
    pair (direction, sequence of metres).
    """
    from truepull.cli.options import sweep_range
    from truepull.integrate.scans import Sweep

    if (turn is None) == (shift is None):
        raise InputError(scene.path, "--turn", "give one of a turn or a shift")
    if turn is not None:
        if isinstance(turn, str):
            si, shown = sweep_range(turn, "angle", "deg", "--turn", scene.path)
        else:
            shown = tuple(float(v) for v in np.atleast_1d(turn))
            si = tuple(float(np.radians(v)) for v in shown)
        return Sweep("turn", si, group), shown, "deg"
    if isinstance(shift, str):
        direction, _, rest = shift.partition(":")
        direction = direction.strip().lower()
        if direction not in ("x", "y", "z"):
            raise InputError(scene.path, "--shift", f"expected x|y|z:START:STOP:STEP, got '{shift}'")
        si, shown = sweep_range(rest, "length", scene.length_unit, "--shift", scene.path)
    else:
        direction, values = shift
        direction = str(direction).lower()
        if direction not in ("x", "y", "z"):
            raise InputError(scene.path, "--shift", f"a shift goes along x, y or z, got '{direction}'")
        si = shown = tuple(float(v) for v in np.atleast_1d(values))
    return Sweep("shift", si, group, direction), shown, "m"


def scan(scene, turn=None, shift=None, *, group: str = "attractor", test: str = "pendulum",
         source: str = "attractor", position: str | None = None, rtol: float = 1e-9, workers: int | None = None,
         scheduler: str | None = None, progress: bool = False, multipoles: bool = True, checks: int | None = None,
         scene_path=None) -> ScanResult:
    """Sweep a turn or a shift of `group` (`scan`).

    Parameters
    ----------
    scene : Scene or path
    turn : str or sequence of float, optional
        "START:STOP:STEP" in degrees (STOP included when it falls on the grid; a unit may follow,
        "0:1:0.1 rad"), or the turns in degrees.
    shift : str or (str, sequence of float), optional
        "x|y|z:START:STOP:STEP" in the scene's length unit (or with a unit), or (direction, metres).
    group : str
        The group that moves.
    test, source, position, rtol
        As for compare; `position` is where the sweep starts.
    workers, scheduler
        Local worker processes, or a Dask scheduler address.
    progress : bool
        Draw a progress bar on stderr.
    multipoles : bool
        Allow the multipole series for turns; `checks` values are then integrated directly to check it.

    Returns
    -------
    ScanResult
    """
    from truepull.integrate.scans import DEFAULT_CHECKS, scan as _scan

    if isinstance(scene, (str, Path)):
        scene_path = str(scene)
    scene = _scene(scene)
    checks = DEFAULT_CHECKS if checks is None else checks
    if checks < 0:
        raise InputError(scene.path, "--checks", "must be zero or more")
    sweep, shown, unit = sweep_of(scene, turn, shift, group)
    result = _scan(scene, sweep, test=test, source=source, position=position, rtol=rtol, workers=workers,
                   scheduler=scheduler, progress=progress, scene_path=scene_path, multipoles=multipoles,
                   checks=checks)
    return ScanResult(result, np.array(shown, float), unit, rtol)


def field(scene, points=None, *, line=None, source: str = "attractor", position: str | None = None,
          rtol: float = 1e-9) -> FieldResult:
    """Potential, field and gradient tensor of group `source` at points, with error estimates (`field`).

    Parameters
    ----------
    scene : Scene or path
    points : array_like, shape (N, 3), optional
        Points in metres (world axes).
    line : (start, end, n), optional
        Instead of points: n points from start to end (metres, both ends included); the points where
        the gradient along the line vanishes are found too.
    source : str
        The group whose field is computed.
    position : str, optional
        Place the apparatus at this [[position]].
    rtol : float
        Relative tolerance of the adaptive parts (closed forms ignore it).

    Returns
    -------
    FieldResult
    """
    from truepull.integrate.field_at_points import field_at_points, gradient_zeros

    scene = _scene(scene)
    if position is not None:
        scene.get_position(position)
    if not rtol > 0:
        raise InputError(None, "--rtol", f"must be greater than zero, got {rtol}")
    if (points is None) == (line is None):
        raise InputError(scene.path, "points", "give one of points or line")
    zeros = direction = None
    if line is not None:
        start, end, n = np.asarray(line[0], float), np.asarray(line[1], float), int(line[2])
        if n < 2 or np.array_equal(start, end):
            raise InputError(scene.path, "--line", "a line needs two different ends and at least 2 points")
        points = start + np.linspace(0.0, 1.0, n)[:, None] * (end - start)
    pf = field_at_points(scene, points, source, position, rtol)
    if line is not None:
        placed = scene.at_position(position) if position else scene
        direction = (end - start) / np.linalg.norm(end - start)
        s_m = np.linalg.norm(pf.points - start, axis=1)
        t_uu = np.einsum("i,nij,j->n", direction, pf.T, direction)
        zeros = gradient_zeros(placed.group(source), start, end, s_m, t_uu, pf.G, rtol)
    return FieldResult(pf, zeros, direction)


def _scene_file(scene) -> tuple[str, str | None]:
    """(path, text or None): what the reduction reads, for a Scene or a path."""
    if isinstance(scene, (str, Path)):
        return str(scene), None
    text = _TEXTS.get(scene)
    if text is None:
        if not scene.path or not Path(scene.path).is_file():
            raise InputError(scene.path, None, "the scene's file is not known: load it with load_scene")
        return scene.path, None
    return str(Path(scene.base_dir or ".") / "python-scene.toml"), text


def _verb_args(verb: str, positional: list[str], options: dict) -> argparse.Namespace:
    """The verb's parsed arguments: its own defaults, `options` (Python names) laid over them."""
    import importlib

    parser = argparse.ArgumentParser(prog=f"truepull {verb}", add_help=False)
    importlib.import_module(f"truepull.cli.{verb}").add_arguments(parser)
    args = parser.parse_args(positional)
    for key, value in options.items():
        if not hasattr(args, key):
            raise TypeError(f"{verb}() got an unexpected keyword argument '{key}'")
        setattr(args, key, value)
    args.json = True
    return args


def reduce(scene, *, rtol: float = 1e-9, mc_rtol: float = 1e-6, samples: int | None = None, seed: int = 0,
           check_draws: int = 50, full_model: bool = False, workers: int | None = None, scheduler=None,
           fiber_q: str | None = None, test: str = "pendulum", source: str = "attractor", budget: bool = True,
           progress: bool = False, data=None, method: str | None = None, **run_options) -> ReduceResult:
    """G from the scene's [measurement], each correction itemised, with its uncertainty budget (`reduce`).

    Parameters
    ----------
    scene : Scene or path
        With a [measurement] table.
    rtol, mc_rtol : float
        Engine tolerance of the reduction, and the looser one inside the Monte Carlo.
    samples : int, optional
        Monte Carlo draws, fixed (default adaptive, JCGM 101:2008 7.9; 0 skips it).
    seed, check_draws, full_model
        As `reduce --seed`, `--check-draws`, `--full-model`.
    workers, scheduler
        Where the budget runs.
    fiber_q : str, optional
        Fiber quality factor, e.g. "2500 +- 300" (replaces the scene's).
    budget : bool
        Compute the uncertainty budget.
    method : str, optional
        Reduce only the measurement by this method (deflection, swing, acceleration, servo) where the
        scene has several [[measurement]] tables, as `reduce --method`; without it, every one.
    data : path, optional
        A recorded run (CSV) to fit with the scene first, as `reduce --data`; `run_options` are the fit
        options by their Python names (time_column, angle_unit, drift_order, ...).

    Returns
    -------
    ReduceResult
    """
    from truepull.cli.reduce import reduction_data

    path, text = _scene_file(scene)
    fit = None
    if data is not None:
        from truepull.cli.fit import fitted_scene_text

        args = _verb_args("fit", [str(data)], run_options)
        if method is not None and "method" not in run_options:
            args.method = method  # the fitted [measurement] is written for the method reduced
        text, run, notes = fitted_scene_text(args, path, test=test, source=source, rtol=rtol)
        fit = {"data": str(data), "run": run.as_dict(), "notes": notes}
    elif run_options:
        raise TypeError(f"reduce() got options of a run without data: {', '.join(run_options)}")
    out = reduction_data(path, rtol=rtol, mc_rtol=mc_rtol, samples=samples, seed=seed, check_draws=check_draws,
                         full_model=full_model, workers=workers, scheduler=scheduler, fiber_q=fiber_q, test=test,
                         source=source, budget=budget, progress=progress, text=text, method=method)
    if fit is not None:
        out["fit"] = fit
    return ReduceResult(out)


def fit(data, *, into=None, out=None, force: bool = False, method: str | None = None, **options) -> FitResult:
    """Fit a recorded angle-time run per position segment and as one run (`fit`).

    Parameters
    ----------
    data : path
        CSV file with a header row.
    into, out : path, optional
        Fill the [measurement] table of scene `into` and write the new scene to `out` (never `into`).
    force : bool
        Replace `out` if it exists.
    method : {"deflection", "swing"}, optional
        The measurement method written with `into`.
    **options
        The fit options by their Python names: time_column, angle_column, spot_column,
        lever_distance, position_column, time_unit, angle_unit, length_unit, drift_order, and png
        (a picture of data, fit and residuals written to that file).

    Returns
    -------
    FitResult
    """
    from truepull.cli import fit as fit_cli
    from truepull.geometry.quantities import units

    args = _verb_args("fit", [str(data)], {**options, "into": into, "out": out, "force": force, "method": method})
    if (args.out or args.method or args.force) and not args.into:
        raise InputError(None, "--into", "out, method and force go with into (a scene)")
    units()
    time, angle, labels, line_numbers, value_column = fit_cli.load_run(args)
    notes = []
    if args.into and labels is not None:
        fits, whole, notes = fit_cli.fit_with_scene(args, args.into, time, angle, labels, line_numbers, value_column)
    else:
        fits, whole = fit_cli.fit_data(time, angle, labels, line_numbers, value_column, args)
    written = None
    if args.into:
        written, more = fit_cli.write_into(args, fits, whole)
        notes += more
    if args.png:
        fit_cli.write_png(args.png, fits, time, angle, args.time_unit, args.angle_unit, whole)
    return FitResult(tuple(fits), whole, written, notes)


def bias(scene, *, test: str = "pendulum", source: str = "attractor", position: str | None = None,
         rtol: float = 1e-9, bodies=None, offset=(), flatten=(), void=(), gradient=(), changes=(),
         full_reduction: bool = False, table: bool = True, workers: int | None = None, scheduler=None,
         progress: bool = False, scene_path=None) -> BiasResult:
    """Sensitivity of the torque (and of G, with a measurement) to each body parameter, and what-ifs (`bias`).

    Parameters
    ----------
    scene : Scene or path
    test, source, rtol
        As for compare.
    position : str, optional
        The position whose torque is reported (default: the first measured position, else the first
        position, else the scene as drawn).
    bodies : list of str, optional
        Only these bodies.
    offset : list of (body, (dx, dy, dz))
        What if the body were moved by that vector (m).
    flatten : list of (body, f) or (body, f, polar_axis)
        What if the sphere were an ellipsoid of equal mass with flattening f.
    void : list of (body, radius, (dx, dy, dz))
        What if the body had a spherical void of that radius (m) at that offset (m).
    gradient : list of (group, relative)
        What if each body of the group had a density gradient along z of `relative` of its density
        across its bounding diameter.
    changes : list of (kind, name, arguments)
        More what-ifs as `bias` parses its options (truepull.cli.bias.parse_what_ifs), after the above.
    full_reduction : bool
        What-ifs through a full reduction of G instead of the first-order model.
    table : bool
        Compute the ranked sensitivity table.
    scene_path : str, optional
        The scene's file, for workers to re-load it (default: `scene` when it is a path).

    Returns
    -------
    BiasResult
    """
    from truepull.cli.bias import run_what_if
    from truepull.integrate.balance.sensitivity import default_position, sensitivities

    if isinstance(scene, (str, Path)):
        scene_path = str(scene)
    scene = _scene(scene)
    for group in (offset, flatten, void):
        for item in group:
            name = item[0]
            if name not in [b.name for b in scene.bodies]:
                raise InputError(scene.path, "body", f"no body named '{name}' (bodies: "
                                 f"{', '.join(b.name for b in scene.bodies)})")
    position = position if position is not None else default_position(scene)
    if position is not None:
        scene.get_position(position)
    result = None
    if table:
        result = sensitivities(scene, test, source, position, rtol, workers=workers, scheduler=scheduler,
                               progress=progress, scene_path=scene_path, bodies=bodies)
    for name, _ in gradient:
        if name not in scene.groups():
            raise InputError(scene.path, "group", f"no group named '{name}' (groups: {', '.join(scene.groups())})")
    items = ([("offset", name, (list(v),)) for name, v in offset]
             + [("flatten", it[0], (it[1], it[2] if len(it) > 2 else None)) for it in flatten]
             + [("void", name, (r, list(v))) for name, r, v in void]
             + [("gradient", name, (rel,)) for name, rel in gradient] + list(changes))
    kw = dict(test=test, source=source, position=position, rtol=rtol, full_reduction=full_reduction)
    return BiasResult(result, [run_what_if(scene, it, **kw) for it in items])
