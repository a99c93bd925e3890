"""`truepull fit DATA.csv`: fit a recorded angle-time run per position segment.

Reads a CSV file with a header row, converts time, angle (or light-spot position on an optical-lever
scale) to SI, fits each contiguous run of one position label (see truepull.integrate.balance.fitting), and
prints a table, JSON, a picture, or a copy of a scene with its [measurement] table filled in.
"""

from __future__ import annotations

import argparse
import csv
import math
import sys
from pathlib import Path

import numpy as np

from truepull.cli.output import fmt, format_table, print_json, save_figure_atomic, write_atomic
from truepull.cli.scene_text import replace_table, toml_key, toml_string
from truepull.geometry.errors import InputError
from truepull.geometry.quantities import parse_scalar, si_factor
from truepull.integrate.balance.fitting import SegmentFit, fit_record, spot_to_angle
from truepull.integrate.balance.run_fit import MAX_DRIFT_ORDER, RunFit, fit_run

TERMS_RTOL = 1e-6          # engine tolerance for the second-order terms of the equation of motion
HELP = "fit a recorded angle-time run: period, decrement, equilibrium per position"


def add_data_arguments(parser, *, as_option: bool = False) -> None:
    """The run's file, columns, units and the run fit's drift order (shared by fit, reduce and report).
    `as_option`: the file is `--data RUN.csv` instead of the positional DATA."""
    if as_option:
        parser.add_argument("--data", metavar="RUN.csv", help="recorded run (CSV with a header row) to fit "
                                                              "and reduce with the scene")
    else:
        parser.add_argument("data", metavar="DATA", help="CSV file with a header row")
    parser.add_argument("--time-column", default="time", help="column of times (default: time)")
    parser.add_argument("--angle-column", default="angle", help="column of pendulum angles (default: angle)")
    parser.add_argument("--spot-column", help="column of light-spot positions on an optical-lever scale, "
                                              "instead of angles (needs --lever-distance)")
    parser.add_argument("--lever-distance", metavar="D",
                        help="mirror-to-scale distance for --spot-column, in --length-unit or with its own "
                             "unit, e.g. '2.5 m'")
    parser.add_argument("--position-column",
                        help="column naming the position of each row (default: 'position' when present)")
    parser.add_argument("--time-unit", default="s", help="unit of the time column (default: s)")
    parser.add_argument("--angle-unit", default="rad", help="unit of the angle column, also used in the "
                                                            "table and picture (default: rad)")
    parser.add_argument("--length-unit", default="m", help="unit of the spot column and the lever "
                                                           "distance (default: m)")
    parser.add_argument("--drift-order", type=int, metavar="N",
                        help="order of the run fit's drift polynomial (default: chosen by BIC, 0 to "
                             f"{MAX_DRIFT_ORDER})")


DATA_OPTIONS = ("time_column", "angle_column", "spot_column", "lever_distance", "position_column", "time_unit",
                "angle_unit", "length_unit", "drift_order")
"""The run's options (add_data_arguments) by their Python names, as truepull.api.fit and reduce take them."""


def add_arguments(parser) -> None:
    add_data_arguments(parser)
    parser.add_argument("--png", metavar="FILE", help="picture of data, fit and residuals per segment")
    parser.add_argument("--into", metavar="SCENE", help="scene whose [measurement] table to fill in "
                                                        "(read only; see --out)")
    parser.add_argument("--out", metavar="NEW_SCENE", help="new scene file to write with --into")
    parser.add_argument("--force", action="store_true", help="replace NEW_SCENE if it exists")
    parser.add_argument("--method", choices=("deflection", "swing"),
                        help="measurement method written with --into (default: deflection)")


# ---------------------------------------------------------------- reading the CSV

CELL_LIMIT = 1e100  # largest magnitude _read_columns accepts in a cell (its inverse: the smallest nonzero)


def _read_columns(path: str, wanted: list[str], labels_column: str | None, labels_required: bool):
    """Columns `wanted` as float arrays, column `labels_column` as strings (None when it is absent and
    not required), and the file line number of each data row. Blank lines and lines starting with '#'
    are skipped; the first remaining line is the header."""
    p = Path(path)
    if not p.is_file():
        raise InputError(path, None, "data file not found" if not p.exists() else "not a file")
    try:
        text = p.read_bytes().decode("utf-8-sig")
    except UnicodeDecodeError:
        raise InputError(path, None, "not a text (UTF-8) file") from None
    except OSError as exc:
        raise InputError(path, None, f"cannot read the file ({exc.strerror})") from None
    lines = [(i + 1, ln) for i, ln in enumerate(text.splitlines()) if ln.strip() and not ln.lstrip().startswith("#")]
    if not lines:
        raise InputError(path, None, "the file is empty (a header row and data rows are needed)")
    try:
        dialect = csv.Sniffer().sniff(lines[0][1], delimiters=",;\t")
    except csv.Error:
        dialect = csv.excel
    reader = csv.reader([ln for _, ln in lines], dialect)
    try:
        rows = list(reader)
    except csv.Error as exc:  # a cell over the csv module's field limit, a NUL byte, a stray quote
        line_no = lines[min(reader.line_num, len(lines)) - 1][0]
        raise InputError(path, None, f"line {line_no}: not readable as CSV ({exc})") from None
    header = [h.strip() for h in rows[0]]
    present = ", ".join(h for h in header if h) or "none"
    optional = labels_column if labels_column in header or labels_required else None
    index = {}
    for name in wanted + ([optional] if optional else []):
        if name not in header:
            raise InputError(path, name, f"no column named '{name}' (columns present: {present})")
        if header.count(name) > 1:
            raise InputError(path, name, f"more than one column is named '{name}'")
        index[name] = header.index(name)
    if len(rows) < 2:
        raise InputError(path, None, "no data rows below the header")
    numbers = {name: np.empty(len(rows) - 1) for name in wanted}
    labels = [] if optional else None
    line_numbers = np.array([n for n, _ in lines[1:]])
    for k, (row, line_no) in enumerate(zip(rows[1:], line_numbers)):
        for name, col in index.items():
            if col >= len(row):
                raise InputError(path, name, f"line {line_no}: no value in column '{name}' (the row has "
                                             f"{len(row)} cells, the header {len(header)})")
            cell = row[col].strip()
            if name == optional:
                if not cell:
                    raise InputError(path, name, f"line {line_no}: empty position label")
                labels.append(cell)
                continue
            if not cell:
                raise InputError(path, name, f"line {line_no}: empty cell in column '{name}'")
            shown = cell if len(cell) <= 40 else cell[:37] + "..."
            try:
                numbers[name][k] = float(cell)
            except ValueError:
                raise InputError(path, name, f"line {line_no}: '{shown}' in column '{name}' is not a number") from None
            value = abs(numbers[name][k])
            if not np.isfinite(value):
                raise InputError(path, name, f"line {line_no}: '{shown}' in column '{name}' is not a finite number")
            # the fits form sums of products of up to three values: beyond 1e100 (or below 1e-100 but not 0)
            # they would overflow or lose all precision; no recorded time or angle is anywhere near
            if value > CELL_LIMIT or 0 < value < 1 / CELL_LIMIT:
                raise InputError(path, name, f"line {line_no}: '{shown}' in column '{name}' is out of range "
                                             f"(magnitudes from {1 / CELL_LIMIT:g} to {CELL_LIMIT:g}, or 0)")
    return numbers, labels, line_numbers


def _angle_factor(unit: str) -> float:
    return si_factor(unit, "angle", None, "--angle-unit")


def load_run(args):
    """(time s, angle rad, labels or None, line numbers, name of the angle-like column)."""
    if args.lever_distance is not None and not args.spot_column:
        raise InputError(None, "--lever-distance", "only used with --spot-column")
    if args.spot_column and args.lever_distance is None:
        raise InputError(None, "--lever-distance", "required with --spot-column (mirror-to-scale distance)")
    t_factor = si_factor(args.time_unit, "time", None, "--time-unit")
    value_column = args.spot_column or args.angle_column
    if args.time_column == value_column:
        raise InputError(None, "--time-column", f"time and angle cannot both be column '{value_column}'")
    numbers, labels, line_numbers = _read_columns(args.data, [args.time_column, value_column],
                                                  args.position_column or "position",
                                                  labels_required=args.position_column is not None)
    time = numbers[args.time_column] * t_factor
    if args.spot_column:
        length = si_factor(args.length_unit, "length", None, "--length-unit")
        distance = parse_scalar(args.lever_distance, "length", args.length_unit, None, "--lever-distance",
                                positive=True)
        if distance.u is not None:
            raise InputError(None, "--lever-distance", "give the distance without an uncertainty: it scales "
                                                       "every angle alike and is not propagated here")
        angle = spot_to_angle(numbers[value_column] * length, distance.value)
    else:
        angle = numbers[value_column] * _angle_factor(args.angle_unit)
    return time, angle, labels, line_numbers, value_column


# ---------------------------------------------------------------- formatting

def _pm(value: float, u: float, scale: float = 1.0) -> str:
    return f"{fmt(value / scale)} ± {fmt(u / scale, 2)}"


def _unit_label(unit: str) -> str:
    return unit.strip() or "1"


def table_text(fits: tuple[SegmentFit, ...], time_unit: str, angle_unit: str) -> str:
    tf = si_factor(time_unit, "time", None, "--time-unit")
    af = _angle_factor(angle_unit)
    tu, au = _unit_label(time_unit), _unit_label(angle_unit)
    headers = ["#", "position", f"from ({tu})", f"to ({tu})", "points", f"period ({tu})", "decrement",
               f"equilibrium ({au})", f"amplitude ({au})", f"drift ({au}/{tu})", f"residual rms ({au})",
               "lag-1", "Durbin-Watson"]
    rows = []
    for k, f in enumerate(fits, start=1):
        rows.append([k, f.position if f.position is not None else "-", fmt(f.t_start / tf), fmt(f.t_end / tf),
                     f.n_points, _pm(f.period, f.u_period, tf), _pm(f.decrement, f.u_decrement),
                     _pm(f.equilibrium, f.u_equilibrium, af), _pm(f.amplitude, f.u_amplitude, af),
                     _pm(f.drift, f.u_drift, af / tf), fmt(f.residual_rms / af, 3),
                     f"{f.lag1_autocorrelation:.3f}", f"{f.durbin_watson:.3f}"])
    lines = [format_table(headers, rows, "rl" + "r" * (len(headers) - 2)),
             "equilibrium and amplitude at each segment's mid time; uncertainties are standard (k = 1)"]
    for k, f in enumerate(fits, start=1):
        if f.note:
            lines.append(f"segment {k}{f' ({f.position})' if f.position else ''}: {f.note}")
    return "\n".join(lines)


def write_png(path: str, fits, time, angle, time_unit: str, angle_unit: str, run=None) -> None:
    """Data, fit and residuals for each segment (two rows of axes per segment, up to 3 across); with
    `run` the curve and residuals are the one fit of the whole run's."""
    from matplotlib.figure import Figure

    from truepull.cli.plot_units import power_of_ten, scaled_label

    tf = si_factor(time_unit, "time", None, "--time-unit")
    af = _angle_factor(angle_unit)
    n = len(fits)
    cols = min(n, 3)
    rows = math.ceil(n / cols)
    fig = Figure(figsize=(5.0 * cols, 4.6 * rows), layout="constrained")
    grid = fig.add_gridspec(2 * rows, cols, height_ratios=[3, 1.3] * rows)
    # one power of ten for every angle panel and one for every residual panel, so the panels compare
    inside = [(time >= f.t_start) & (time <= f.t_end) for f in fits]
    pa = power_of_ten(np.concatenate([angle[m] for m in inside]) / af) if fits else 0
    pr = power_of_ten(np.concatenate([(angle[m] - (run.evaluate if run is not None else f.evaluate)(time[m]))
                                      for f, m in zip(fits, inside)]) / af) if fits else 0
    af_top, af_res = af * 10.0**pa, af * 10.0**pr
    for k, f in enumerate(fits):
        r, c = divmod(k, cols)
        sel = (time >= f.t_start) & (time <= f.t_end)
        t, y = time[sel], angle[sel]
        top = fig.add_subplot(grid[2 * r, c])
        bottom = fig.add_subplot(grid[2 * r + 1, c], sharex=top)
        fine = np.linspace(f.t_start, f.t_end, max(400, 20 * int((f.t_end - f.t_start) / f.period + 1)))
        model = run.evaluate if run is not None else f.evaluate
        top.plot(t / tf, y / af_top, ".", ms=2.5, color="0.45", label="data")
        top.plot(fine / tf, model(fine) / af_top, "-", lw=1.0, color="C0", label="run fit" if run is not None else "fit")
        if run is not None:
            i = run.positions.index(f.position)
            top.plot(fine / tf, (run.equilibria[i] + run.drift(fine)) / af_top, "--", lw=0.8, color="C1",
                     label="equilibrium + drift")
        else:
            top.plot(fine / tf, (f.equilibrium + f.drift * (fine - f.t_mid)) / af_top, "--", lw=0.8, color="C1",
                     label="equilibrium")
        name = f"position {f.position}" if f.position is not None else "record"
        top.set_title(f"segment {k + 1}: {name}\nT = {_pm(f.period, f.u_period, tf)} {_unit_label(time_unit)}, "
                      f"decrement = {_pm(f.decrement, f.u_decrement)}", fontsize=9)
        top.set_ylabel(scaled_label("angle", _unit_label(angle_unit), pa))
        bottom.plot(t / tf, (y - model(t)) / af_res, ".", ms=2.0, color="C3")
        bottom.axhline(0.0, color="0.3", lw=0.6)
        bottom.set_ylabel(scaled_label("residual", _unit_label(angle_unit), pr))
        bottom.set_xlabel(f"time ({_unit_label(time_unit)})")
        top.tick_params(labelbottom=False)
    if fits:  # one legend above all the panels, so that it covers no data
        handles, labels = fig.axes[0].get_legend_handles_labels()
        fig.legend(handles, labels, loc="outside upper center", ncols=len(labels), fontsize=9, markerscale=3)
    save_figure_atomic(fig, path, dpi=110)


# ---------------------------------------------------------------- the measurement table

def combine(values, uncertainties) -> tuple[float, float]:
    """Inverse-variance weighted mean of repeated segments of one position; the uncertainty is
    widened by the Birge ratio when the segments scatter more than their uncertainties say
    (common practice). Zero uncertainties fall back to the plain mean and its standard error."""
    v = np.asarray(values, dtype=float)
    u = np.asarray(uncertainties, dtype=float)
    if v.size == 1:
        return float(v[0]), float(u[0])
    if not np.all(u > 0):
        return float(v.mean()), float(v.std(ddof=1) / math.sqrt(v.size))
    w = 1.0 / u ** 2
    mean = float(np.sum(w * v) / np.sum(w))
    internal = math.sqrt(1.0 / np.sum(w))
    birge = math.sqrt(float(np.sum(w * (v - mean) ** 2)) / (v.size - 1))
    return mean, internal * max(1.0, birge)


def _value_text(value: float, u: float, unit: str = "") -> str:
    """'v +- u unit' with u to 2 significant digits and v to one digit past u's last."""
    if u > 0 and math.isfinite(u):
        digits = max(1, int(math.floor(math.log10(abs(value)))) - int(math.floor(math.log10(u))) + 3) \
            if value != 0 else 3
        text = f"{value:.{digits}g} +- {u:.2g}"
    else:
        text = f"{value:.12g} +- 0"
    return f"{text} {unit}".strip()


def measurement_block(fits, method: str | None, data_name: str, keep: dict,
                      run: RunFit | None = None) -> tuple[str, list[str]]:
    """The [measurement] table text for fits with named positions, and notes for the user. With `run`
    (the one fit of the whole run) the angles, periods and decrement are the run fit's, and the angles'
    correlation is written as angle_correlation; without it, repeated segments are combined by the
    Birge-widened weighted mean (the per-segment fallback)."""
    by_name: dict[str, list[SegmentFit]] = {}
    for f in fits:
        by_name.setdefault(f.position, []).append(f)
    names = list(run.positions) if run is not None else list(by_name)
    method = method or "deflection"
    notes = []

    def combined(name, field):
        if run is not None and field in ("equilibrium", "period", "decrement"):
            i = run.positions.index(name)
            if field == "equilibrium":
                return float(run.equilibria[i]), float(run.u_equilibria[i])
            return float(getattr(run, field)[i]), float(getattr(run, "u_" + field)[i])
        segs = by_name[name]
        return combine([getattr(s, field) for s in segs], [getattr(s, "u_" + field) for s in segs])

    def inline(field, unit):
        items = ", ".join(f"{toml_key(n)} = {toml_string(_value_text(*combined(n, field), unit))}" for n in names)
        return "{ " + items + " }"

    source = "one fit of the whole run" if run is not None else "per-segment fits"
    lines = ["[measurement]", f"# from truepull fit of {data_name} ({source})", f"method = {toml_string(method)}"]
    first = names[0]
    if method == "deflection":
        lines.append(f"angle = {inline('equilibrium', 'rad')}")
        if run is not None and len(names) > 1:
            r = run.correlation
            rows = ", ".join("[" + ", ".join(f"{r[i, j]:.6f}" if i != j else "1" for j in range(len(names))) + "]"
                             for i in range(len(names)))
            lines.append(f"angle_correlation = [{rows}]   # in the order of angle's keys")
        lines.append(f"period = {toml_string(_value_text(*combined(first, 'period'), 's'))}")
    else:
        lines.append(f"period = {inline('period', 's')}")
        lines.append(f"amplitude = {inline('amplitude', 'rad')}")
    dec, u_dec = combined(first, "decrement")
    if dec >= 0:
        lines.append(f"decrement = {toml_string(_value_text(dec, u_dec))}")
    else:
        notes.append(f"decrement at {first} came out negative ({dec:.3g} +- {u_dec:.2g}); not written")
    for key, raw in keep.items():
        lines.append(f"{key} = {toml_string(raw) if isinstance(raw, str) else repr(raw)}")
    repeated = [n for n in names if len(by_name.get(n, ())) > 1]
    if repeated and run is None:
        notes.append("positions seen in more than one segment (" + ", ".join(repeated) + ") were combined by "
                     "the weighted mean, widened by the Birge ratio when they scatter")
    elif repeated and method == "swing":
        notes.append("the amplitudes of repeated positions are the Birge-widened weighted mean of the segments'")
    return "\n".join(lines) + "\n", notes


def rebase_paths(text: str, data: dict, scene_dir: Path, out_dir: Path) -> str:
    """The scene text with each body's relative mesh `file` re-based from `scene_dir` to `out_dir`, so
    that the new scene loads from where it is written."""
    import os
    import re

    bodies = data.get("body", [])
    files = {b["file"] for b in bodies if isinstance(b, dict) and isinstance(b.get("file"), str)}
    for old in sorted(files):
        if Path(old).is_absolute():
            continue
        new = Path(os.path.relpath(scene_dir.resolve() / old, out_dir.resolve())).as_posix()
        if new == old:
            continue
        pattern = re.compile(r"(\bfile\s*=\s*)(\"" + re.escape(old) + r"\"|'" + re.escape(old) + r"')")
        text = pattern.sub(lambda m: m.group(1) + toml_string(new), text)
    return text


def _read_scene_toml(path: str):
    import tomllib

    scene = Path(path)
    if not scene.is_file():
        raise InputError(path, None, "scene file not found" if not scene.exists() else "not a file")
    try:
        text = scene.read_bytes().decode("utf-8")
    except UnicodeDecodeError:
        raise InputError(path, None, "not a text (UTF-8) file") from None
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InputError(path, None, f"not valid TOML: {exc}") from None
    return text, data


def measured_scene_text(scene_path: str, args, fits, run, out_dir: Path) -> tuple[str, list[str]]:
    """The scene's text with its [measurement] replaced by the fit's (mesh paths re-based to
    `out_dir`), and notes. Checks that the run's positions are the scene's."""
    text, data = _read_scene_toml(scene_path)
    named = [f for f in fits if f.position is not None]
    names = list(dict.fromkeys(f.position for f in named))
    if len(names) < 2:
        raise InputError(args.data, args.position_column or "position",
                         f"a measurement needs fits at two or more positions (found {len(names)}); "
                         f"label each row with its position")
    raw_positions = data.get("position", [])
    known = [p.get("name") for p in raw_positions if isinstance(p, dict)] if isinstance(raw_positions, list) else []
    for name in names:
        if name not in known:
            raise InputError(args.data, args.position_column or "position",
                             f"position '{name}' is not a [[position]] of {scene_path} "
                             f"(positions there: {', '.join(map(str, known)) or 'none'})")
    old = data.get("measurement", {})
    if isinstance(old, list):
        # replacing them all by one [measurement] would drop the other methods' tables without a word
        raise InputError(scene_path, "measurement",
                         f"the scene has {len(old)} [[measurement]] tables; --into fills a single [measurement] "
                         f"table: give it a scene with one (or none) and reduce the others from their own file")
    keep = {k: old[k] for k in ("fiber_q",) if isinstance(old, dict) and isinstance(old.get(k), (str, int, float))}
    block, notes = measurement_block(tuple(named), getattr(args, "method", None), Path(args.data).name, keep, run)
    new_text = replace_table(text, "measurement", block, file=scene_path)
    return rebase_paths(new_text, data, Path(scene_path).parent, out_dir), notes


def fit_with_scene(args, scene_path: str, time, angle, labels, line_numbers, value_column, *,
                   test: str = "pendulum", source: str = "attractor", rtol: float = 1e-9):
    """(segment fits, run fit, notes): the run fitted with the second-order equation of motion whose
    terms come from the scene's torque curves (the equilibria located by a first, linear fit and its
    reduction)."""
    from truepull.geometry.scene import load_scene_text
    from truepull.integrate.balance.reduction import reduce_measurement
    from truepull.integrate.balance.swing_terms import anharmonic_terms_from_scene

    fits, linear = fit_data(time, angle, labels, line_numbers, value_column, args)
    if linear is None:
        return fits, None, []
    base = Path(scene_path).resolve().parent
    # the equilibria are located by a deflection reduction of the linear fit's angles, whatever the
    # method written; the second-order terms are themselves corrections of a few tens of ppm, so a
    # loose engine tolerance (TERMS_RTOL) places the equilibria and the curvature closely enough
    as_deflection = argparse.Namespace(**{**vars(args), "method": "deflection"})
    text, _ = measured_scene_text(scene_path, as_deflection, fits, linear, base)
    loose = max(rtol, TERMS_RTOL)
    try:
        scene = load_scene_text(text, scene_path, str(base))
        reduction = reduce_measurement(scene, test=test, source=source, rtol=loose)
        amp = max(s["amplitude_at_start"] for s in linear.segments)
        terms = anharmonic_terms_from_scene(scene, reduction, amp, test=test, source=source, rtol=loose)
    except InputError as exc:
        return fits, linear, [f"the second-order equation of motion is not used (the equilibria could not be "
                              f"located from the scene: {exc.reason}); "
                              f"the linear model's amplitude offset is not modelled"]
    run = fit_run(time, angle, labels, drift_order=args.drift_order, anharmonic=terms, file=args.data,
                  time_key=args.time_column, angle_key=value_column, line_numbers=line_numbers, fits=fits)
    notes = ["linear-model equilibria differ from the second-order ones by "
             + ", ".join(f"{p}: {fmt(float(linear.equilibria[i] - run.equilibria[i]), 3)} rad"
                         for i, p in enumerate(run.positions))]
    return fits, run, notes


def fitted_scene_text(args, scene_path: str, *, test: str = "pendulum", source: str = "attractor",
                      rtol: float = 1e-9) -> tuple[str, RunFit, list[str]]:
    """(scene text with the fitted [measurement], run fit, notes) for `reduce SCENE --data RUN` and the
    report: the run in args.data fitted with the scene's second-order equation of motion."""
    time, angle, labels, line_numbers, value_column = load_run(args)
    if labels is None:
        raise InputError(args.data, args.position_column or "position",
                         "a measurement needs a position label per row (no position column)")
    fits, run, notes = fit_with_scene(args, scene_path, time, angle, labels, line_numbers, value_column,
                                      test=test, source=source, rtol=rtol)
    text, more = measured_scene_text(scene_path, args, fits, run, Path(scene_path).resolve().parent)
    return text, run, notes + more


def fit_data(time, angle, labels, line_numbers, value_column, args, anharmonic=None):
    """(segment fits, run fit or None): the run fit needs position labels."""
    fits = fit_record(time, angle, labels, file=args.data, time_key=args.time_column, angle_key=value_column,
                      line_numbers=line_numbers)
    if labels is None:
        return fits, None
    run = fit_run(time, angle, labels, drift_order=args.drift_order, anharmonic=anharmonic, file=args.data,
                  time_key=args.time_column, angle_key=value_column, line_numbers=line_numbers, fits=fits)
    return fits, run


def write_into(args, fits, run=None) -> tuple[str, list[str]]:
    from truepull.geometry.scene import load_scene_text

    if not args.out:
        raise InputError(None, "--out", "--into needs --out NEW_SCENE (the scene itself is never overwritten)")
    scene, out = Path(args.into), Path(args.out)
    if not scene.is_file():
        raise InputError(args.into, None, "scene file not found" if not scene.exists() else "not a file")
    if out.resolve() == scene.resolve() or (out.exists() and out.samefile(scene)):
        raise InputError(args.out, "--out", "must not be the --into scene: the input is never overwritten")
    if out.exists() and not args.force:
        raise InputError(args.out, "--out", "already exists; add --force to replace it")
    if not out.resolve().parent.is_dir():
        raise InputError(args.out, "--out", f"folder {out.resolve().parent} does not exist")
    new_text, notes = measured_scene_text(args.into, args, fits, run, out.resolve().parent)
    load_scene_text(new_text, str(out), str(out.resolve().parent))   # the new scene must load from there
    write_atomic(out, new_text.encode("utf-8"))
    return str(out), notes


def run_text(run: RunFit, time_unit: str, angle_unit: str) -> str:
    """The one fit of the whole run as text: model, equilibria with covariance, periods, drift, residuals."""
    tf = si_factor(time_unit, "time", None, "--time-unit")
    af = _angle_factor(angle_unit)
    tu, au = _unit_label(time_unit), _unit_label(angle_unit)
    lines = ["one fit of the whole run:",
             f"  model: drift of the zero a Legendre polynomial of order {run.drift_order} in time, zero at the "
             f"run's start ({'chosen by BIC, the lowest wins' if run.drift_criterion == 'BIC' else 'given'}); "
             f"equation of motion: {run.eom_order}; {run.n_points} points, {run.n_parameters} parameters"]
    if run.bic:
        lines.append("  BIC by drift order: " + ", ".join(f"{k}: {v:.1f}" for k, v in run.bic.items()))
    headers = ["position", f"equilibrium ({au})", f"period ({tu})", "decrement", "segments"]
    rows = []
    for i, p in enumerate(run.positions):
        rows.append([p, _pm(run.equilibria[i], run.u_equilibria[i], af), _pm(run.period[i], run.u_period[i], tf),
                     _pm(run.decrement[i], run.u_decrement[i]), sum(s["position"] == p for s in run.segments)])
    lines.append(format_table(headers, rows, "lrrrr"))
    lines.append("  equilibria at the run's start (the drift's zero); correlation matrix of the equilibria:")
    for i, p in enumerate(run.positions):
        lines.append(f"    {p}: " + "  ".join(f"{run.correlation[i, j]: .4f}" for j in range(len(run.positions))))
    if len(run.positions) >= 2:
        c = run.covariance
        d = run.equilibria[0] - run.equilibria[1]
        u = math.sqrt(max(c[0, 0] + c[1, 1] - 2 * c[0, 1], 0.0))
        lines.append(f"  difference {run.positions[0]} - {run.positions[1]}: {_pm(d, u, af)} {au}")
    lines.append("  drift: Legendre coefficients " + ", ".join(_pm(c, u, af) for c, u in
                 zip(run.drift_coefficients, run.u_drift_coefficients)) + f" {au}; it spans "
                 f"{fmt(run.drift_span / af, 3)} {au} over the run")
    lines.append(f"  residuals: rms {fmt(run.residual_rms / af, 3)} {au}, lag-1 autocorrelation "
                 f"{run.lag1_autocorrelation:.3f}, Durbin-Watson {run.durbin_watson:.3f}; "
                 + ("covariance multiplied by the AR(1) factor (1 + r)/(1 - r) = "
                    f"{run.inflation:.3g}" if run.inflation != 1 else "no significant correlation "
                    "(|r| <= 3/sqrt(n)): no inflation"))
    if run.anharmonic_offset:
        d = run.equilibria[0] - run.equilibria[1] if len(run.positions) > 1 else float("nan")
        lines.append("  second-order model (Lindstedt-Poincare): mean-angle offset of the swing "
                     + ", ".join(f"{p}: {fmt(v / af, 3)} {au}" for p, v in run.anharmonic_offset.items()))
        if len(run.positions) > 1:
            off = run.anharmonic_offset
            ppm = (off[run.positions[0]] - off[run.positions[1]]) / d * 1e6
            nxt = (run.anharmonic_next_order[run.positions[0]] + run.anharmonic_next_order[run.positions[1]]) / abs(d) * 1e6
            lines.append(f"    = {ppm:.3g} ppm of the {run.positions[0]} - {run.positions[1]} difference; "
                         f"the neglected next order is estimated below {nxt:.2g} ppm")
    else:
        lines.append("  linear model: the swing's amplitude-dependent offset of the mean angle is not modelled "
                     "(give the scene with --into, or use reduce SCENE --data, to model it)")
    lines.extend("  " + n for n in run.notes)
    return "\n".join(lines)


# ---------------------------------------------------------------- the verb

def run(args) -> int:
    from truepull.api import fit

    if (args.out or args.method or args.force) and not args.into:
        raise InputError(None, "--into", "--out, --method and --force go with --into SCENE")
    result = fit(args.data, into=args.into, out=args.out, force=args.force, method=args.method,
                 png=args.png, **{k: getattr(args, k) for k in DATA_OPTIONS})
    fits, whole, written, notes = list(result.segments), result.run, result.written, result.notes
    if args.json:
        payload = {"segments": [f.as_dict() for f in fits]}
        if whole is not None:
            payload["run"] = whole.as_dict()
        if written:
            payload["written"] = written
        print_json(payload)
        for note in notes:
            sys.stderr.write(f"truepull fit: {note}\n")
        return 0
    print("per-segment fits (starting values for the run fit):")
    print(table_text(fits, args.time_unit, args.angle_unit))
    if whole is not None:
        print(run_text(whole, args.time_unit, args.angle_unit))
    for note in notes:
        print(note)
    if written:
        print(f"wrote {written} with its [measurement] table from this fit")
    if args.png:
        print(f"wrote {args.png}")
    return 0
