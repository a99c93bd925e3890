"""`truepull reduce SCENE`: G from the scene's [measurement], every correction itemised, with the
uncertainty budget (GUM linear propagation and Monte Carlo)."""

from __future__ import annotations

from pathlib import Path

from truepull.cli.output import fmt, not_reached_exit, format_table, print_json
from truepull.geometry.errors import InputError
from truepull.geometry.quantities import parse_scalar
from truepull.geometry.scene import load_scene

HELP = "G from the measurement, corrections itemised, uncertainty budget"
G_UNIT = "m^3 kg^-1 s^-2"


def add_arguments(parser) -> None:
    parser.add_argument("scene", metavar="SCENE", help="scene file (TOML) with a [measurement] table")
    parser.add_argument("--rtol", type=float, default=1e-9,
                        help="engine tolerance for the reduction and the GUM sensitivities (default 1e-9)")
    parser.add_argument("--mc-rtol", type=float, default=1e-6,
                        help="looser engine tolerance inside the Monte Carlo (default 1e-6)")
    parser.add_argument("--samples", type=int, default=200,
                        help="Monte Carlo draws (default 200; 0 skips the Monte Carlo)")
    parser.add_argument("--seed", type=int, default=0, help="seed of the Monte Carlo draws (default 0)")
    parser.add_argument("--workers", type=int, default=None,
                        help="local worker processes (default: one per core; 1 runs here)")
    parser.add_argument("--scheduler", metavar="ADDRESS",
                        help="run the budget on a Dask cluster, e.g. tcp://127.0.0.1:8786")
    parser.add_argument("--fiber-q", metavar="Q",
                        help="fiber quality factor for the anelasticity correction of time-of-swing, "
                             "e.g. 2500 or '2500 +- 300' (replaces the scene's fiber_q)")
    parser.add_argument("--test", default="pendulum", help="the suspended group (default pendulum)")
    parser.add_argument("--source", default="attractor", help="the source group (default attractor)")
    parser.add_argument("--no-budget", action="store_true", help="skip the uncertainty budget")
    parser.add_argument("--no-progress", action="store_true", help="no progress bar on stderr")


def _fiber_q(raw):
    if raw is None:
        return None
    return parse_scalar(raw, "dimensionless", "", None, "--fiber-q", positive=True)


def reduce_data(args) -> dict:
    """The whole result for parsed command-line arguments (see reduction_data)."""
    return reduction_data(args.scene, rtol=args.rtol, mc_rtol=args.mc_rtol, samples=args.samples, seed=args.seed,
                          workers=args.workers, scheduler=args.scheduler, fiber_q=args.fiber_q, test=args.test,
                          source=args.source, budget=not args.no_budget, progress=not args.no_progress)


def reduction_data(scene_path, *, rtol: float = 1e-9, mc_rtol: float = 1e-6, samples: int = 200, seed: int = 0,
                   workers: int | None = None, scheduler=None, fiber_q: str | None = None, test: str = "pendulum",
                   source: str = "attractor", budget: bool = True, progress: bool = False) -> dict:
    """The reduction of the scene file at `scene_path` and its budget as plain values: the
    `reduce --json` object (also for other verbs, such as the report)."""
    from truepull.integrate.reduction import reduce_measurement
    from truepull.integrate.reduction_budget import reduction_budget

    scene = load_scene(scene_path)
    q = _fiber_q(fiber_q)
    if isinstance(samples, bool) or not isinstance(samples, int) or samples < 0:
        raise InputError(None, "--samples", f"must be 0 or more, got {samples}")
    reduction = reduce_measurement(scene, test=test, source=source, rtol=rtol, fiber_q=q)
    data = reduction.to_json()
    data["scene"] = scene.path
    data["title"] = scene.title
    if not budget:
        data.update({"u_G": None, "budget": [], "monte_carlo": None, "budget_notes": ["budget skipped"]})
    else:
        text = Path(scene_path).read_text(encoding="utf-8")
        result = reduction_budget(scene, reduction, text, test=test, source=source, fiber_q=q, samples=samples,
                                  seed=seed, mc_rtol=mc_rtol, workers=workers, scheduler=scheduler,
                                  progress=progress)
        data.update(result.to_json(reduction.G))
    order = ["G", "u_G", "G_point", "corrections", "budget"]
    return {**{k: data[k] for k in order}, **{k: v for k, v in data.items() if k not in order}}


def _ppm(x):
    return "-" if x is None else f"{x:+.3f}"


def render(data: dict) -> str:
    lines = []
    title = f" - {data['title']}" if data.get("title") else ""
    lines.append(f"scene {data['scene']}{title}")
    positions = [p["position"] for p in data["positions"]]
    where = (f"angles at {', '.join(positions)}; period at {positions[0]}" if data["method"] == "deflection"
             else f"periods at {', '.join(positions)}")
    lines.append(f"method: {data['method']} ({where})")
    lines.append("")
    G, u = data["G"], data["u_G"]
    ppm = f" ({u / G * 1e6:.3g} ppm)" if u is not None else ""
    lines.append(f"G        = {G:.9g} {G_UNIT}" + (f"  +- {u:.3g}{ppm} (GUM, k = 1)" if u is not None else ""))
    mc = data.get("monte_carlo")
    if mc:
        lo, hi = mc["interval_95"]
        lines.append(f"           Monte Carlo: u = {mc['u_G']:.3g} ({mc['u_G_ppm']:.3g} ppm), mean {mc['mean']:.9g}, "
                     f"95 % interval [{lo:.9g}, {hi:.9g}], {mc['draws']} draws, engine rtol {mc['rtol']:g}")
    if data["G_point"] is not None:
        lines.append(f"G_point  = {data['G_point']:.9g} {G_UNIT}  (textbook point-mass formula)")
    lines.append(f"numerical error of G about {data['numerical_error'] / G * 1e6:.2g} ppm "
                 f"(engine rtol {data['rtol']:g}{'' if data['reached'] else ', NOT reached everywhere'})")
    lines.append("")
    rows = [[c["name"], fmt(c["factor"], 12), _ppm(c["ppm"]), "" if c["applied"] else "(no input)", c["note"]]
            for c in data["corrections"]]
    lines.append("corrections (their product takes G_point to G):")
    lines.append(format_table(["correction", "factor", "ppm", "", "note"], rows, align="lrrll"))
    lines.append("")
    prow = [[p["position"], fmt(p["equilibrium"] * 1e3, 9), fmt(p["torque_axis"], 6), fmt(p["stiffness_axis"], 6),
             "-" if p["period_ratio"] is None else fmt(p["period_ratio"], 12),
             " ".join(fmt(t * 1e3, 6) for t in p["engine_turns"])] for p in data["positions"]]
    lines.append(format_table(["position", "equilibrium mrad", "torque N m", "stiffness N m/rad",
                               "T(A)/T(0)", "engine turns mrad"], prow, align="lrrrrl"))
    lines.append(f"moment of inertia {fmt(data['inertia'], 9)} kg m^2 (points: {fmt(data['inertia_point'], 9)}); "
                 f"fiber constant {fmt(data['fiber_constant'], 9)} N m/rad")
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
    data = reduce_data(args)
    if args.json:
        print_json(data)
    else:
        print(render(data))
    return not_reached_exit("reduce", bool(data["reached"]))
