"""`truepull reduce SCENE`: G from the scene's [measurement], every correction itemised, with the
uncertainty budget (GUM linear propagation and Monte Carlo). A scene with several [[measurement]]
tables is reduced by each method, side by side with their differences (method_comparison.py);
`--method NAME` reduces one. With several, the JSON's top-level keys are the first method's, and
"methods" holds every method's object, "comparison" each against the first."""

from __future__ import annotations

import math
from pathlib import Path

from truepull.cli import notation
from truepull.cli.output import fmt, not_reached_exit, format_table, print_json
from truepull.geometry.errors import InputError
from truepull.geometry.quantities import parse_scalar
from truepull.geometry.scene import load_scene

HELP = "G from the measurement, corrections itemised, uncertainty budget"
G_UNIT = "m^3 kg^-1 s^-2"


def add_arguments(parser) -> None:
    parser.add_argument("scene", metavar="SCENE", help="scene file (TOML) with a [measurement] table")
    from truepull.cli import options

    options.add_rtol(parser, what="relative tolerance of the engine for the reduction and the GUM sensitivities")
    options.add_rtol(parser, 1e-6, "looser relative tolerance of the engine inside the Monte Carlo", "--mc-rtol")
    parser.add_argument("--samples", type=int, default=None,
                        help="Monte Carlo draws, fixed (default: adaptive, JCGM 101:2008 7.9, until u and the 95 %% "
                             "interval are stable to two significant digits; 0 skips the Monte Carlo)")
    parser.add_argument("--full-model", action="store_true",
                        help="every Monte Carlo draw through the full model (slow; for a cluster) instead of "
                             "the checked second-order surrogate")
    parser.add_argument("--check-draws", type=int, default=50,
                        help="full-model draws that check the surrogate (default: 50)")
    parser.add_argument("--seed", type=int, default=0, help="seed of the Monte Carlo draws (default: 0)")
    options.add_parallel(parser)
    parser.add_argument("--fiber-q", metavar="Q",
                        help="fiber quality factor for the anelasticity correction of time-of-swing, "
                             "e.g. 2500 or '2500 +- 300' (replaces the scene's fiber_q)")
    parser.add_argument("--method", default=None,
                        help="reduce only the measurement by this method (deflection, swing, acceleration, servo) "
                             "when the scene has several [[measurement]] tables")
    options.add_groups(parser)
    parser.add_argument("--no-budget", action="store_true", help="skip the uncertainty budget")
    options.add_quiet(parser)
    parser.add_argument("--no-progress", action="store_true", help="the same as --quiet (kept for scripts)")
    from truepull.cli.fit import add_data_arguments

    add_data_arguments(parser, as_option=True)


def _show_progress(args) -> bool:
    from truepull.cli.options import show_progress

    return show_progress(args)


def _fiber_q(raw):
    if raw is None:
        return None
    return parse_scalar(raw, "dimensionless", "", None, "--fiber-q", positive=True)


def reduce_data(args) -> dict:
    """The whole result for parsed command-line arguments, by truepull.api.reduce (see reduction_data).
    With --data the run is fitted with the scene (truepull.cli.fit.fitted_scene_text) and its
    measurement reduced."""
    from truepull.api import reduce
    from truepull.cli.fit import DATA_OPTIONS

    run_options = {k: getattr(args, k) for k in DATA_OPTIONS} if getattr(args, "data", None) else {}
    return reduce(args.scene, rtol=args.rtol, mc_rtol=args.mc_rtol, samples=args.samples, seed=args.seed,
                  check_draws=args.check_draws, full_model=args.full_model, workers=args.workers,
                  scheduler=args.scheduler, fiber_q=args.fiber_q, test=args.test, source=args.source,
                  budget=not args.no_budget, progress=_show_progress(args), data=getattr(args, "data", None),
                  method=getattr(args, "method", None), **run_options).data


def reduction_data(scene_path, *, rtol: float = 1e-9, mc_rtol: float = 1e-6, samples: int | None = None,
                   seed: int = 0, check_draws: int = 50, full_model: bool = False, workers: int | None = None,
                   scheduler=None, fiber_q: str | None = None, test: str = "pendulum",
                   source: str = "attractor", budget: bool = True, progress: bool = False,
                   text: str | None = None, method: str | None = None) -> dict:
    """The reduction of the scene file at `scene_path` and its budget as plain values: the
    `reduce --json` object (also for other verbs, such as the report). `text` replaces the file's
    text (e.g. the scene with a fitted [measurement]), relative paths still from the file's folder.
    `method` picks one of several [[measurement]] tables; without it, every one is reduced (the first
    method's keys at the top, "methods" and "comparison" beside them)."""
    from truepull.integrate.balance.method_comparison import comparisons

    kw = dict(rtol=rtol, mc_rtol=mc_rtol, samples=samples, seed=seed, check_draws=check_draws, full_model=full_model,
              workers=workers, scheduler=scheduler, fiber_q=fiber_q, test=test, source=source, budget=budget,
              progress=progress, text=text)
    scene = _load(scene_path, text)
    if method is not None:
        return _one_method(scene_path, scene.with_measurement(method.strip().lower()), **kw)
    if len(scene.measurements) <= 1:
        return _one_method(scene_path, scene, **kw)
    results = [_one_method(scene_path, scene.with_measurement(m.method), **kw) for m in scene.measurements]
    return {**results[0], "methods": results, "comparison": comparisons(results)}


def _load(scene_path, text):
    if text is None:
        return load_scene(scene_path)
    from truepull.geometry.scene import load_scene_text

    return load_scene_text(text, str(scene_path), str(Path(scene_path).resolve().parent))


def _one_method(scene_path, scene, *, rtol, mc_rtol, samples, seed, check_draws, full_model, workers, scheduler,
                fiber_q, test, source, budget, progress, text) -> dict:
    """The `reduce --json` object of the scene's (chosen) measurement."""
    from truepull.integrate.balance.reduction import reduce_measurement
    from truepull.integrate.balance.reduction_budget import reduction_budget

    q = _fiber_q(fiber_q)
    if samples is not None and (isinstance(samples, bool) or not isinstance(samples, int) or samples < 0):
        raise InputError(None, "--samples", f"must be 0 or more, got {samples}")
    if isinstance(check_draws, bool) or not isinstance(check_draws, int) or check_draws < 2:
        raise InputError(None, "--check-draws", f"must be 2 or more, got {check_draws}")
    reduction = reduce_measurement(scene, test=test, source=source, rtol=rtol, fiber_q=q)
    data = reduction.to_json()
    data["scene"] = scene.path
    data["title"] = scene.title
    if not budget:
        data.update({"u_G": None, "budget": [], "monte_carlo": None, "budget_notes": ["budget skipped"]})
    else:
        if text is None:
            text = Path(scene_path).read_text(encoding="utf-8")
        result = reduction_budget(scene, reduction, text, test=test, source=source, fiber_q=q, samples=samples,
                                  seed=seed, mc_rtol=mc_rtol, check_draws=check_draws, full_model=full_model,
                                  workers=workers, scheduler=scheduler,
                                  progress=progress)
        data.update(result.to_json(reduction.G))
    order = ["G", "u_G", "G_point", "corrections", "budget"]
    return {**{k: data[k] for k in order}, **{k: v for k, v in data.items() if k not in order}}


def _ppm(x):
    return "-" if x is None else f"{x:+.3f}"


def g_line(data: dict) -> str:
    """G in concise notation with its GUM u (k = 1) and u in ppm, or G alone without a budget."""
    G, u = data["G"], data["u_G"]
    if u is None:
        return f"G = {G:.9g} {G_UNIT}"
    return f"G = {notation.with_unit(G, u, G_UNIT)}, GUM (JCGM 100:2008), k = 1"


def mc_lines(data: dict) -> list[str]:
    """The Monte Carlo in words: how, how many draws, whether stable, both intervals, the surrogate."""
    mc = data.get("monte_carlo")
    if not mc:
        return []
    u = mc["u_G"]
    how = "adaptive, JCGM 101:2008 7.9.4" if mc["adaptive"] else "fixed number of draws"
    state = (f"stable to {mc['digits']} significant digits of u (delta = {mc['delta']:.2g})" if mc["stable"] else
             f"NOT stable to {mc['digits']} significant digits of u (twice the block tolerances reach "
             f"{2 * max(mc['tolerance'][k] for k in ('mean', 'u', 'low', 'high')):.2g}, delta {mc['delta']:.2g})")
    via = "the full model" if mc["model"] == "full" else "a checked second-order surrogate"
    out = [f"Monte Carlo ({how}): {mc['draws']:,} draws in {mc['blocks']} blocks through {via}, {state}",
           f"  u = {u:.2g} {G_UNIT} ({notation.ppm(u, mc['mean'])} ppm; block tolerance s_u = "
           f"{mc['tolerance']['u']:.2g}), mean {notation.rounded(mc['mean'], u)}"]
    lo, hi = mc["interval_95"]
    slo, shi = mc["shortest_95"]
    out.append(f"  95 % interval, {mc['interval_kind']}: [{notation.rounded(lo, u)}, {notation.rounded(hi, u)}]; "
               f"{mc['shortest_kind']}: [{notation.rounded(slo, u)}, {notation.rounded(shi, u)}]"
               + ("" if mc["shortest_stable"] else " (its ends not stable to delta)"))
    sur = mc.get("surrogate")
    if sur:
        G = data["G"]
        out.append(f"  surrogate: {sur['kind']}, {len(sur['mixed_pairs'])} mixed derivatives ({sur['evaluations']} "
                   f"extra model evaluations{'; built again with more after a first check found it off' if sur.get('refined') else ''}"
                   f"); checked at {sur['check_draws']} full-model draws (engine rtol "
                   f"{sur['check_rtol']:g}, {sur['seconds_per_full_draw']:.2g} s wall a draw): error max "
                   f"{sur['max_error']:.2g} ({sur['max_error_ppm']:.2g} ppm), rms {sur['rms_error']:.2g} "
                   f"({sur['rms_error_ppm']:.2g} ppm), "
                   + ("negligible (2 x max <= delta)" if sur["negligible"] else "NOT negligible (2 x max > delta)"))
        blo, bhi = sur["interval_95_bound"]
        out.append(f"  with the surrogate's error folded in: u <= {sur['u_G_bound']:.3g} "
                   f"({notation.ppm(sur['u_G_bound'], G)} ppm), 95 % interval within "
                   f"[{notation.rounded(blo, u)}, {notation.rounded(bhi, u)}]")
    else:
        out.append(f"  every draw through the full model (engine rtol {mc['rtol']:g})")
    return out


def point_formula_lines(data: dict) -> list[str]:
    """The point-mass formula the baseline uses, with the numbers that went into it."""
    t = data.get("point_terms")
    if not t or data["G_point"] is None:
        return []
    ip, T, pos = t["inertia_point"], t["periods"], t["positions"]
    if t["method"] == "acceleration":
        m = t["harmonic"]
        return [f"G_point = alpha_{m} I_p / |T_{m},point|",
                f"        = {t['acceleration']:.9g} rad/s^2 x {ip:.9g} kg m^2 / {t['amplitude_point']:.9g} kg^2 m^-1",
                f"        = {data['G_point']:.9g} {G_UNIT}",
                f"  (alpha_{m}: the measured amplitude of harmonic {m} of the angular acceleration; I_p: the pendulum's "
                f"bodies as points; T_{m},point: harmonic {m} of the torque per unit G in the relative turn, every "
                "body a point, every pair)"]
    if t["method"] == "servo":
        tau, gam = t["servo_torque"], t["torques_per_G"]
        if len(pos) == 2:
            return [f"G_point = -(tau_{pos[0]} - tau_{pos[1]}) / (Gamma_{pos[0]} - Gamma_{pos[1]})",
                    f"        = -({tau[0]:.9g} - ({tau[1]:.9g})) N m / ({gam[0]:.9g} - ({gam[1]:.9g})) kg^2 m^-1",
                    f"        = {data['G_point']:.9g} {G_UNIT}",
                    "  (tau: the servo torques; Gamma: torque per unit G of each attractor body on its nearest "
                    "pendulum body, as points, at the held angle)"]
        return [f"G_point = -s, s the weighted least-squares slope of the servo torques against Gamma = "
                f"{data['G_point']:.9g} {G_UNIT}"]
    if t["method"] == "deflection":
        phi, gam = t["angles"], t["torques_per_G"]
        if len(pos) == 2:
            value = ip * (2 * math.pi / T[0]) ** 2 * (phi[0] - phi[1]) / (gam[0] - gam[1])
            return [f"G_point = I_p (2 pi / T)^2 (phi_{pos[0]} - phi_{pos[1]}) / (Gamma_{pos[0]} - Gamma_{pos[1]})",
                    f"        = {ip:.9g} kg m^2 x (2 pi / {T[0]:.9g} s)^2 x ({phi[0]:.9g} - ({phi[1]:.9g})) rad",
                    f"          / ({gam[0]:.9g} - ({gam[1]:.9g})) kg^2 m^-1",
                    f"        = {value:.9g} {G_UNIT}",
                    "  (I_p: the pendulum's bodies as points; T: the free period; phi: the measured angles; Gamma: "
                    "torque per unit G of each attractor body on its nearest pendulum body, as points, as drawn; "
                    "for two balls on a light beam, 2 pi^2 L b^2 theta / (M T^2))"]
        slope = data["G_point"] / (ip * (2 * math.pi / T[0]) ** 2)
        return ["G_point = I_p (2 pi / T)^2 s, s the least-squares slope of the angles against Gamma",
                f"        = {ip:.9g} kg m^2 x (2 pi / {T[0]:.9g} s)^2 x {slope:.9g} kg^-2 m rad = {data['G_point']:.9g}",
                "  (angles " + ", ".join(f"{p} {a:.9g} rad" for p, a in zip(pos, phi)) + "; Gamma "
                + ", ".join(f"{p} {g:.9g}" for p, g in zip(pos, gam)) + " kg^2 m^-1)"]
    k = t["stiffness_per_G"]
    if len(pos) == 2:
        value = ip * ((2 * math.pi / T[0]) ** 2 - (2 * math.pi / T[1]) ** 2) / (k[0] - k[1])
        return [f"G_point = I_p ((2 pi / T_{pos[0]})^2 - (2 pi / T_{pos[1]})^2) / (k_{pos[0]} - k_{pos[1]})",
                f"        = {ip:.9g} kg m^2 x ((2 pi / {T[0]:.9g} s)^2 - (2 pi / {T[1]:.9g} s)^2)",
                f"          / ({k[0]:.9g} - ({k[1]:.9g})) kg^2 m^-1 rad^-1",
                f"        = {value:.9g} {G_UNIT}",
                "  (I_p: the pendulum's bodies as points; T: the measured periods; k: gravitational stiffness per "
                "unit G of each attractor body on its nearest pendulum body, as points, as drawn)"]
    return ["G_point = I_p (omega_i^2 - omega_j^2) / (k_i - k_j) by least squares over "
            + ", ".join(f"{p} (T {tt:.9g} s, k {kk:.9g})" for p, tt, kk in zip(pos, T, k))
            + f", I_p {ip:.9g} kg m^2 = {data['G_point']:.9g}"]


def _method_line(data: dict) -> str:
    positions = [p["position"] for p in data["positions"]]
    if data["method"] == "deflection":
        where = f"angles at {', '.join(positions)}; period at {positions[0]}"
    elif data["method"] == "swing":
        where = f"periods at {', '.join(positions)}"
    elif data["method"] == "servo":
        where = f"servo torques at {', '.join(positions)}, pendulum held as drawn"
    else:
        t = data["method_terms"]
        where = f"harmonic {t['harmonic']} of the angular acceleration in the turn of '{t['signal_group']}'"
    return f"method: {data['method']} ({where})"


def method_lines(data: dict) -> list[str]:
    """What a method measures at its positions (or in its harmonics), as table lines."""
    t = data.get("method_terms")
    if data["method"] == "acceleration":
        rows = [[str(h["harmonic"]), fmt(h["amplitude"], 9), fmt(h["amplitude_point"], 9),
                 f"{math.degrees(h['phase']):.4f}"] for h in t["harmonics"]]
        return [format_table(["harmonic", "|T_n| per unit G (kg^2 m^-1)", "point model", "phase (deg)"], rows, align="rrrr"),
                f"|T_{t['harmonic']}| = {t['amplitude']:.12g} +- {t['amplitude_error']:.2g} kg^2 m^-1 ({t['route']})"]
    prow = [[p["position"], fmt(p["equilibrium"] * 1e3, 9), fmt(p["torque_axis"], 6), fmt(p["stiffness_axis"], 6),
             "-" if p["period_ratio"] is None else fmt(p["period_ratio"], 12),
             " ".join(fmt(x * 1e3, 6) for x in p["engine_turns"])] for p in data["positions"]]
    if data["method"] == "servo":
        rows = [[p["position"], fmt(tau, 9), fmt(g, 9), fmt(p["torque_axis"], 9)]
                for p, tau, g in zip(data["positions"], t["servo_torque"], t["gamma_per_G"])]
        return [format_table(["position", "servo torque (N m)", "Gamma per unit G (kg^2 m^-1)", "G Gamma (N m)"], rows, align="lrrr"),
                f"common torque offset {t['offset_torque']:.6g} N m (cancels)"]
    return [format_table(["position", "equilibrium (mrad)", "torque (N m)", "stiffness (N m/rad)",
                          "T(A)/T(0)", "engine turns (mrad)"], prow, align="lrrrrl")]


def inertia_line(data: dict) -> str:
    fiber = ("" if data["fiber_constant"] is None else f"; fiber constant {fmt(data['fiber_constant'], 9)} N m/rad")
    return f"moment of inertia {fmt(data['inertia'], 9)} kg m^2 (points: {fmt(data['inertia_point'], 9)})" + fiber


def comparison_lines(data: dict) -> list[str]:
    """The methods side by side and each one's difference from the first."""
    if not data.get("comparison"):
        return []
    rows = [[r["method"], f"{r['G']:.9g}", "-" if r["u_G"] is None else f"{r['u_G']:.3g}",
             "-" if r["u_G"] is None else f"{r['u_G'] / r['G'] * 1e6:.3g}"] for r in data["methods"]]
    out = ["methods side by side:", format_table(["method", f"G ({G_UNIT})", "u(G)", "u (ppm)"], rows, align="lrrr")]
    for c in data["comparison"]:
        a, b = c["methods"]
        line = f"{a} - {b}: {c['difference']:.3g} ({c['difference_ppm']:+.3g} ppm)"
        if c["u_difference"] is not None:
            z = c["in_combined_u"]
            line += (f" = {z:+.2f} u_c, u_c(difference) = {c['u_difference']:.3g} with the shared inputs "
                     f"correlated ({len(c['shared_inputs'])} shared); {c['in_combined_u_independent']:+.2f} u_c "
                     "if the budgets were independent")
        out.append(line)
    return out


def render(data: dict) -> str:
    if data.get("methods"):
        parts = ["\n".join(comparison_lines(data))]
        parts += [render_one(r) for r in data["methods"]]
        return ("\n\n" + "=" * 78 + "\n").join(parts)
    return render_one(data)


def render_one(data: dict) -> str:
    lines = []
    title = f" - {data['title']}" if data.get("title") else ""
    lines.append(f"scene {data['scene']}{title}")
    lines.append(_method_line(data))
    lines.append("")
    G, u = data["G"], data["u_G"]
    lines.append(g_line(data))
    lines.append(f"G        = {G:.9g} {G_UNIT}" + (f"  +- {u:.3g} (GUM, k = 1), all digits" if u is not None else ""))
    lines.extend(mc_lines(data))
    lines.append("")
    if data["G_point"] is not None:
        lines.append(f"G_point  = {data['G_point']:.9g} {G_UNIT}  (textbook point-mass formula)")
        lines.extend(point_formula_lines(data))
    lines.append(f"numerical error of G about {data['numerical_error'] / G * 1e6:.2g} ppm "
                 f"(engine rtol {data['rtol']:g}{'' if data['reached'] else ', NOT reached everywhere'})")
    lines.append("")
    rows = [[c["name"], fmt(c["factor"], 12), _ppm(c["ppm"]), "" if c["applied"] else "(no input)", c["note"]]
            for c in data["corrections"]]
    lines.append("corrections (their product takes G_point to G):")
    lines.append(format_table(["correction", "factor", "ppm", "", "note"], rows, align="lrrll"))
    lines.append("")
    lines.extend(method_lines(data))
    lines.append(inertia_line(data))
    if data["budget"]:
        lines.append("")
        lines.append("uncertainty budget (GUM):")
        brow = [[b["input"], fmt(b["value"], 9), fmt(b["u"], 3), b["unit"], fmt(b["sensitivity"], 4),
                 f"{b['contribution_ppm']:.3g}", f"{b['share'] * 100:.1f} %"]
                for b in sorted(data["budget"], key=lambda b: -b["contribution"])]
        lines.append(format_table(["input", "value", "u", "unit", "sensitivity", "ppm of G", "share"], brow,
                                  align="lrrlrrr"))
    notes = list(data.get("notes", [])) + list(data.get("budget_notes", []))
    if notes:
        lines.append("")
        lines.extend(f"note: {n}" for n in notes)
    return "\n".join(lines)


def run(args) -> int:
    from truepull.geometry.quantities import units

    units()
    data = reduce_data(args)
    if args.json:
        print_json(data)
    else:
        print(render(data))
    reached = all(r["reached"] for r in data.get("methods", [data]))
    return not_reached_exit("reduce", bool(reached))
