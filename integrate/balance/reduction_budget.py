"""The uncertainty budget of a reduced G: every stated `+-` of the scene through the whole model.

Inputs (SI, standard uncertainties k = 1, only those the scene states with a nonzero u): each body's
parameters of the pendulum and attractor groups as bias names them (geometry.bodies.body_parameters:
at.x, at.y, at.z, size keys, density or mass) and its rotate.angle; the turn and shift of each
measured position; the frame's pivot (where the fiber hangs relative to the drawn parts: moving it
moves the torque arm, the moment of inertia's axis and, since the positions turn about the frame
axis, the turntable's axis too); the measured angles, periods, decrement, amplitudes and fiber Q.

The model G(x) rebuilds the scene with the input values (bodies.spec_with + build_body, positions
replaced), recomputes the moment of inertia and the exact torque curves at the nominal reduction's
equilibrium samples (budget_nodes), and solves the exact reduction (reduction.final_G); for the
acceleration and servo methods it recomputes their geometry (the torque harmonic and the inertia, or
the torques at the held angle) and their formula (acceleration_method.py, servo_method.py). Their
measured inputs: the harmonic's amplitude, the servo torques or voltages and torque_per_volt2. It is a top-level
function of (context, x), the context holding the scene text, so it can run in worker processes and
on a Dask cluster. Curves are cached per geometry, so stepping a measured value costs no engine work.

- GUM (JCGM 100:2008): sensitivities by Richardson central differences with steps of u/10, the
  engine at the reduction's tolerance; the model's relative noise given to the derivative error
  bound is the reduction's own numerical error estimate relative to G.
- Monte Carlo (JCGM 101:2008): normal inputs, seeded. A full-model draw costs an engine run (about
  0.1 s per core on the demo), while the adaptive procedure of JCGM 101 7.9.4 needs 10^5 to 10^6
  draws for two significant digits of u and of the interval's ends. So by default the draws go
  through a second-order Taylor surrogate of G(x) (uncertainty.quadratic_surrogate: the GUM's
  gradient, the diagonal second derivatives from the same stencil, the mixed ones among the
  leading inputs), checked at `check_draws` independent draws through the full model with the
  engine at a looser tolerance (default 1e-6; G's numerical error is then about that size relative,
  far below the uncertainties a budget is for): the surrogate's largest and rms error there are
  reported and folded into bounds on u and on the interval. full_model=True sends every draw
  through the full model instead. Every full-model evaluation (GUM stencil, mixed derivatives,
  check draws, full-model draws) runs through executor.map_parallel, locally or on Dask.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, replace
from functools import lru_cache, partial

import numpy as np

from truepull.geometry.bodies import body_parameters, build_body, spec_with
from truepull.geometry.errors import InputError
from truepull.geometry.quantities import Measured
from truepull.integrate.balance.reduction import (NODE_GAP, Reduction, StepUndefined, final_G, measurement_values,
                                          observations, pendulum_inertia, per_unit_g)
from truepull.integrate.balance.torque_curve import sample_curve
from truepull.integrate.balance.uncertainty import (INTERVAL_KIND, SHORTEST_KIND, Input, block_size, budget_table,
                                           gum_linear, monte_carlo, surrogate_monte_carlo)

MC_RTOL = 1e-6
# significant digits of u(G) to which the adaptive Monte Carlo makes u and the interval stable
MC_DIGITS = 2
# full-model draws that check the surrogate
CHECK_DRAWS = 50
# the most full-model draws an adaptive run with full_model=True makes
FULL_MODEL_MAX_DRAWS = 1_000_000
STEP_FRACTION = 0.1

# units of the measured inputs by their budget name's second part
MEASURED_UNITS = {"angle": "rad", "period": "s", "amplitude": "rad", "acceleration": "rad/s^2", "torque": "N m",
                  "voltage": "V", "torque_per_volt2": "N m/V^2"}
# methods whose model is their own module's geometry_terms and g_from_terms
OWN_MODEL_METHODS = ("acceleration", "servo")

_UNITS = {"at": "m", "density": "kg/m^3", "mass": "kg", "rotate": "rad", "turn": "rad", "shift": "m",
          "density_gradient": "kg/m^4", "expansion": "1/K"}


@dataclass(frozen=True)
class InputRef:
    """One uncertain input: its budget name, what it changes (kind "body", "rotate", "turn", "shift" or
    "measurement"), the body or position it belongs to, the parameter, value and u (SI), unit."""

    name: str
    kind: str
    target: str
    param: str
    value: float
    u: float
    unit: str
    direction: tuple[float, ...] | None = None
    """kind "form": the change of the body's fit coefficients per unit of the input (form_modes.FormMode)"""


def form_inputs(scene, method: str, nodes, test: str = "pendulum",
                source: str = "attractor") -> tuple[tuple[InputRef, ...], tuple[str, ...]]:
    """The measured forms' fit uncertainty as independent inputs (form_modes.py): one per mode, value 0,
    u the mode's rms surface displacement (m); and a note per measured body."""
    from truepull.integrate.balance.form_modes import form_modes

    bodies = form_modes(scene, method, nodes, test, source)
    refs = tuple(InputRef(f"body[{m.body}].form.mode{m.index + 1}", "form", m.body, str(m.index), 0.0, m.u, "m",
                          m.direction) for b in bodies for m in b.modes)
    return refs, tuple(_form_note(b) for b in bodies)


def uncertain_inputs(scene, test: str = "pendulum", source: str = "attractor",
                     fiber_q: Measured | None = None) -> tuple[InputRef, ...]:
    """Every input with a stated nonzero standard uncertainty that can change G."""
    refs: list[InputRef] = []
    for body in scene.bodies:
        if body.group not in (test, source) or body.spec is None:
            continue
        spec = body.spec
        for param, m in body_parameters(spec).items():
            if m is not None and m.u:
                unit = _UNITS.get(param.split(".")[0], "m")
                refs.append(InputRef(f"body[{body.name}].{param}", "body", body.name, param, m.value, m.u, unit))
        if spec.rotate_axis is not None and spec.rotate_angle.u:
            refs.append(InputRef(f"body[{body.name}].rotate.angle", "rotate", body.name, "angle",
                                 spec.rotate_angle.value, spec.rotate_angle.u, "rad"))
    thermal = [b.spec for b in scene.bodies if b.spec is not None and b.spec.temperature is not None
               and b.spec.expansion is not None]
    if thermal and thermal[0].temperature.u:  # one temperature for every part: a single input
        T = thermal[0].temperature
        refs.append(InputRef("conditions.temperature", "conditions", "", "temperature", T.value, T.u, "degC"))
    for c, u, value in zip("xyz", scene.frame.pivot_u, scene.frame.pivot):
        if u:
            refs.append(InputRef(f"frame.pivot.{c}", "frame", "", c, float(value), float(u), "m"))
    measured = measurement_values(scene, fiber_q)
    used = _measured_positions(scene)
    for pos in scene.positions:
        if pos.name not in used or pos.group not in (test, source):
            continue
        if pos.turn.u:
            refs.append(InputRef(f"position[{pos.name}].turn", "turn", pos.name, "turn", pos.turn.value,
                                 pos.turn.u, "rad"))
        for c, s in zip("xyz", pos.shift):
            if s.u:
                refs.append(InputRef(f"position[{pos.name}].shift.{c}", "shift", pos.name, c, s.value, s.u, "m"))
    for name, m in measured.items():
        if m.u:
            kind = name.split(".")[1]
            unit = MEASURED_UNITS.get(kind, "")
            refs.append(InputRef(name, "measurement", "", name, m.value, m.u, unit))
    return tuple(refs)


def _measured_positions(scene) -> set[str]:
    return set(scene.measurement.positions)


def apply_inputs(scene, refs, x) -> tuple[object, dict[str, float]]:
    """(scene with the body and position inputs set to x, {measurement name: value})."""
    specs: dict[str, object] = {}
    forms: dict[str, np.ndarray] = {}
    positions = {p.name: p for p in scene.positions}
    measured: dict[str, float] = {}
    frame = scene.frame
    for ref, value in zip(refs, x):
        value = float(value)
        if ref.kind == "frame":
            pivot = np.array(frame.pivot, float)
            pivot["xyz".index(ref.param)] = value
            frame = replace(frame, pivot=pivot)
        elif ref.kind == "body":
            spec = specs.get(ref.target, scene.body(ref.target).spec)
            specs[ref.target] = spec_with(spec, ref.param, value)
        elif ref.kind == "conditions":  # the temperature of every part
            for b in scene.bodies:
                spec = specs.get(b.name, b.spec)
                if spec is not None and spec.temperature is not None:
                    specs[b.name] = replace(spec, temperature=Measured(value, spec.temperature.u))
        elif ref.kind == "form":
            change = value * np.asarray(ref.direction, float)
            forms[ref.target] = forms[ref.target] + change if ref.target in forms else change
        elif ref.kind == "rotate":
            spec = specs.get(ref.target, scene.body(ref.target).spec)
            specs[ref.target] = replace(spec, rotate_angle=Measured(value, spec.rotate_angle.u))
        elif ref.kind == "turn":
            p = positions[ref.target]
            positions[ref.target] = replace(p, turn=Measured(value, p.turn.u))
        elif ref.kind == "shift":
            p = positions[ref.target]
            shift = list(p.shift)
            i = "xyz".index(ref.param)
            shift[i] = Measured(value, shift[i].u)
            positions[ref.target] = replace(p, shift=tuple(shift))
        else:
            measured[ref.param] = value
    for name, change in forms.items():
        spec = specs.get(name, scene.body(name).spec)
        if np.any(change):
            shape = spec.mesh
            specs[name] = replace(spec, mesh=shape.with_coefficients(shape.form.fit.coefficients + change))
    bodies = tuple(build_body(specs[b.name]) if b.name in specs else b for b in scene.bodies)
    new = replace(scene, bodies=bodies, positions=tuple(positions[p.name] for p in scene.positions), frame=frame)
    return new, measured


# ---------------------------------------------------------------------------------------------
# the model, for worker processes


@dataclass(frozen=True)
class ModelContext:
    """Everything the model needs besides x, as plain picklable, hashable values."""

    scene_text: str
    path: str
    base_dir: str | None
    test: str
    source: str
    rtol: float
    refs: tuple[InputRef, ...]
    nodes: tuple[tuple[float, ...], ...]
    state: tuple[float, ...]
    fiber_q: tuple[float, float | None] | None
    method: str | None = None
    """the measurement to reduce (by method) when the scene has several; None: the first"""


@lru_cache(maxsize=4)
def _scene(text: str, path: str, base_dir: str | None, method: str | None = None):
    from truepull.geometry.scene import load_scene_text

    scene = load_scene_text(text, path, base_dir)
    return scene if method is None else scene.with_measurement(method)


@lru_cache(maxsize=8)
def _geometry(context: ModelContext, geometry_values: tuple[float, ...]):
    """(torque curves per position, moment of inertia, scene) for one set of geometry inputs; for the
    acceleration and servo methods (their geometry terms, None, scene)."""
    scene = _scene(context.scene_text, context.path, context.base_dir, context.method)
    refs = [r for r in context.refs if r.kind != "measurement"]
    scene, _ = apply_inputs(scene, refs, geometry_values)
    method = scene.measurement.method
    if method in OWN_MODEL_METHODS:
        return _own_model(method).geometry_terms(scene, context.test, context.source, context.rtol), None, scene
    inertia, _ = pendulum_inertia(scene, context.test)
    s1 = per_unit_g(scene)
    obs_positions = _positions_in_order(scene)
    curves = tuple(sample_curve(s1, p, n, context.test, context.source, context.rtol)
                   for p, n in zip(obs_positions, context.nodes))
    return curves, inertia, scene


def _positions_in_order(scene) -> tuple[str, ...]:
    return scene.measurement.positions


def _own_model(method: str):
    """The module of a method with its own model (geometry_terms, g_from_terms)."""
    if method == "acceleration":
        from truepull.integrate.balance import acceleration_method as module
    else:
        from truepull.integrate.balance import servo_method as module
    return module


def g_model(context: ModelContext, x) -> float:
    """G (m^3 kg^-1 s^-2) for the input values x, in the order of context.refs."""
    x = np.asarray(x, dtype=float)
    geometry = tuple(float(v) for r, v in zip(context.refs, x) if r.kind != "measurement")
    curves, inertia, scene = _geometry(context, geometry)
    measured = {r.param: float(v) for r, v in zip(context.refs, x) if r.kind == "measurement"}
    method = scene.measurement.method
    if method == "acceleration":
        from truepull.integrate.balance.acceleration_method import g_from_terms

        value = measured.get("measurement.acceleration", scene.measurement.extra["acceleration"].value)
        return float(g_from_terms(curves, value))
    if method == "servo":
        from truepull.integrate.balance.servo_method import g_from_terms

        try:
            return float(g_from_terms(scene, curves, measured))
        except StepUndefined:
            return math.nan
    q = None if context.fiber_q is None else Measured(*context.fiber_q)
    obs = observations(scene, q, measured, test=context.test)
    try:
        G, _ = final_G(obs, curves, inertia, context.state)
    except StepUndefined:
        return math.nan
    return float(G)


# ---------------------------------------------------------------------------------------------
# the budget


@dataclass(frozen=True)
class Budget:
    """u_G from the GUM (None without inputs), its rows (budget_table dicts), the Monte Carlo result
    (None when not run), with the tolerances used and notes. `surrogate` is the
    uncertainty.SurrogateMonteCarlo when the draws went through the surrogate (None when every draw
    went through the full model); `mc_seconds` the Monte Carlo's wall time, surrogate and check included."""

    u_G: float | None
    u_G_error: float | None
    rows: tuple[dict, ...]
    gum_value: float | None
    monte_carlo: object | None
    mc_rtol: float
    notes: tuple[str, ...] = ()
    surrogate: object | None = None
    mc_seconds: float | None = None
    check_seconds: float | None = None
    input_names: tuple[str, ...] = ()

    def to_json(self, G: float) -> dict:
        out = {"u_G": self.u_G, "u_G_ppm": (self.u_G / G * 1e6 if self.u_G is not None else None),
               "u_G_error": self.u_G_error,
               "budget": [{k: row[k] for k in ("input", "value", "u", "unit", "sensitivity", "sensitivity_error",
                                                 "contribution", "contribution_ppm", "share")} for row in self.rows]}
        out["monte_carlo"] = None if self.monte_carlo is None else self._mc_json(G)
        out["budget_notes"] = list(self.notes)
        return out

    def _mc_json(self, G: float) -> dict:
        mc, t = self.monte_carlo, self.monte_carlo.tolerance
        out = {
            "mean": mc.value, "u_G": mc.u, "u_G_ppm": mc.u / G * 1e6, "coverage": mc.coverage,
            "interval_95": list(mc.interval), "interval_kind": INTERVAL_KIND,
            "shortest_95": list(mc.shortest), "shortest_kind": SHORTEST_KIND,
            "draws": mc.draws, "blocks": mc.blocks, "adaptive": mc.adaptive, "max_draws": mc.max_draws,
            "digits": MC_DIGITS, "delta": mc.delta, "stable": mc.stable, "shortest_stable": mc.shortest_stable,
            "tolerance": {"mean": t.mean, "u": t.u, "low": t.low, "high": t.high,
                          "shortest_low": t.shortest_low, "shortest_high": t.shortest_high},
            "tolerance_u": t.u, "seed": mc.seed, "rtol": self.mc_rtol,
            "model": "full" if self.surrogate is None else "surrogate", "seconds": self.mc_seconds,
            "surrogate": None,
        }
        run = self.surrogate
        if run is not None:
            check = run.check
            names = self.input_names
            out["surrogate"] = {
                "kind": "second-order Taylor model of G in the inputs",
                "mixed_pairs": [[names[i], names[j]] for i, j in run.surrogate.pairs],
                "evaluations": run.evaluations, "refined": run.refined, "check_draws": check.draws, "check_rtol": self.mc_rtol,
                "max_error": check.max_error, "rms_error": check.rms_error,
                "max_error_ppm": check.max_error / G * 1e6, "rms_error_ppm": check.rms_error / G * 1e6,
                "full_mean": check.full_mean, "full_u": check.full_u, "negligible": run.negligible,
                "u_G_bound": run.u_bound, "interval_95_bound": list(run.interval_bound),
                "check_seconds": self.check_seconds,
                "seconds_per_full_draw": (self.check_seconds / check.draws if self.check_seconds else None),
            }
        return out


def input_correlations(scene, refs) -> np.ndarray | None:
    """The inputs' correlation matrix (JCGM 100:2008 r_ij) from the [measurement]'s angle_correlation
    (in the order of angle's keys); None when the scene states none (all independent)."""
    m = scene.measurement
    rows = m.extra.get("angle_correlation") if m is not None else None
    if rows is None:
        return None
    keys = list(m.angle)
    where = {f"measurement.angle.{k}": i for i, k in enumerate(keys)}
    r = np.eye(len(refs))
    idx = [(n, where[ref.name]) for n, ref in enumerate(refs) if ref.name in where]
    for a, i in idx:
        for b, j in idx:
            if a != b:
                r[a, b] = rows[i][j]
    return r


def budget_nodes(scene, reduction: Reduction, fiber_q=None) -> tuple[tuple[float, ...], ...]:
    """The turns at which the budget model samples each torque curve: the reduction's samples at the
    equilibrium (and, for a swing of amplitude A, at the equilibrium -+ A), without the pose as drawn
    when the pendulum hangs elsewhere. The model moves the equilibrium only by the small changes of the
    inputs, over which the curve through these samples is exact to far below the uncertainties (its
    error is second order in the move). The acceleration and servo methods sample no curves (their
    own models): their reduction's nodes are returned as they are."""
    if reduction.method in OWN_MODEL_METHODS:
        return reduction.nodes
    obs = observations(scene, None if fiber_q is None else Measured(*fiber_q))
    out = []
    for i, (nodes, theta) in enumerate(zip(reduction.nodes, reduction.equilibrium)):
        reach = float(obs.amplitudes[i]) if obs.amplitudes is not None else 0.0
        keep = tuple(t for t in nodes if abs(t - theta) <= reach * (1 + 1e-9) + NODE_GAP)
        out.append(keep or nodes)
    return tuple(out)


def reduction_budget(scene, reduction: Reduction, scene_text: str, *, test: str = "pendulum",
                     source: str = "attractor", fiber_q: Measured | None = None, samples: int | None = None,
                     seed: int | None = 0, mc_rtol: float = MC_RTOL, check_draws: int = CHECK_DRAWS,
                     full_model: bool = False, workers: int | None = None, scheduler=None,
                     progress: bool = False) -> Budget:
    """The GUM budget and the Monte Carlo propagation for a reduction of `scene`, whose TOML text is
    `scene_text`. samples None: adaptive (JCGM 101:2008 7.9.4, u and the interval's ends stable to
    MC_DIGITS significant digits); samples N > 0: N draws, their stability judged; 0: no Monte
    Carlo. The draws go through the checked surrogate unless full_model."""
    if samples is not None and (isinstance(samples, bool) or not isinstance(samples, int) or samples < 0):
        raise InputError(scene.path, "--samples", f"must be a whole number of at least 0, got {samples!r}")
    if not mc_rtol > 0:
        raise InputError(scene.path, "--mc-rtol", "the tolerance must be greater than zero")
    q = None if fiber_q is None else (fiber_q.value, fiber_q.u)
    nodes = budget_nodes(scene, reduction, q)
    form_refs, form_notes = form_inputs(scene, reduction.method, nodes, test, source)
    refs = uncertain_inputs(scene, test, source, fiber_q) + form_refs
    notes = list(form_notes)
    if not refs:
        return Budget(None, None, (), None, None, mc_rtol,
                      ("the scene states no uncertainties (write values as '12.7 +- 0.01'), so there is no budget",))
    others = [b.name for b in scene.bodies if b.group not in (test, source) and b.spec is not None
              and any(m is not None and m.u for m in body_parameters(b.spec).values())]
    if others:
        notes.append(f"uncertainties of bodies outside the {test} and {source} groups do not change G: "
                     f"{', '.join(others)}")
    chosen = scene.measurement.method if len(scene.measurements) > 1 else None
    context = ModelContext(scene_text, scene.path or "-", scene.base_dir, test, source, reduction.rtol, refs,
                           nodes, reduction.state, q, chosen)
    inputs = [Input(r.name, r.value, r.u, r.unit) for r in refs]
    steps = [STEP_FRACTION * r.u for r in refs]
    rel_noise = max(reduction.numerical_error / abs(reduction.G), 1e-14)
    correlations = input_correlations(scene, refs)
    gum = gum_linear(partial(g_model, context), inputs, steps=steps, rel_noise=rel_noise, workers=workers,
                     scheduler=scheduler, progress=progress, correlations=correlations)
    rows = tuple(budget_table(gum, y_scale=reduction.G))
    if abs(gum.value - reduction.G) > 10 * reduction.numerical_error + 1e-12 * abs(reduction.G):
        notes.append(f"the budget model's G differs from the reduction's by {(gum.value / reduction.G - 1) * 1e6:.3g} ppm")
    mc = run = None
    mc_seconds = check_seconds = None
    if samples != 0:
        mc_context = replace(context, rtol=mc_rtol)
        start = time.perf_counter()
        if full_model:
            m = block_size(0.95)
            first = 10 * m if samples is None else samples
            mc = monte_carlo(partial(g_model, mc_context), inputs, samples=first, seed=seed, blocks=10,
                             adaptive=samples is None, digits=MC_DIGITS, step_blocks=1 if samples is None else None,
                             max_samples=FULL_MODEL_MAX_DRAWS if samples is None else None, correlations=correlations,
                             workers=workers, scheduler=scheduler, progress=progress)
        else:
            run = surrogate_monte_carlo(partial(g_model, context), inputs, gum, samples=samples,
                                        check_model=partial(g_model, mc_context), check_draws=check_draws,
                                        seed=seed, digits=MC_DIGITS, rel_noise=rel_noise, correlations=correlations,
                                        workers=workers,
                                        scheduler=scheduler, progress=progress)
            mc = run.mc
            check_seconds = run.check_seconds
        mc_seconds = time.perf_counter() - start
        notes.extend(_mc_notes(mc, run))
    return Budget(gum.u_c, gum.u_c_error, rows, gum.value, mc, mc_rtol, tuple(notes), run, mc_seconds,
                  check_seconds, tuple(r.name for r in refs))


def _form_note(b) -> str:
    k = len(b.modes)
    if k == 0:
        return (f"the measured form of '{b.body}' has a fit without uncertainty (its {b.coefficients} coefficients' "
                "covariance vanishes, as for points exactly on the surface): it adds nothing to the budget")
    return (f"the measured form of '{b.body}' enters as {k} independent modes (form.mode1..{k}) of its {b.coefficients} "
            "fitted coefficients' covariance, carrying the fit's first-order effect on the torques, stiffnesses, "
            "moment of inertia and volume the reduction uses (layer integrals over the fitted surface; at most "
            f"{b.lost:.1g} of the form's variance in G estimated outside them); each is a surface displacement "
            "whose u is its rms over the surface")


def _mc_notes(mc, run) -> list[str]:
    out = []
    if not mc.stable:
        what = ("the most draws allowed" if mc.adaptive else f"the {mc.draws} draws asked for")
        out.append(f"the Monte Carlo is NOT stable to {MC_DIGITS} significant digits of u after {what} "
                   f"(twice its block tolerance {2 * mc.tolerance.rule():.2g} exceeds delta {mc.delta:.2g}; "
                   "JCGM 101:2008 7.9.4)")
    if run is not None and not run.negligible:
        out.append(f"the surrogate differs from the full model by up to {run.check.max_error:.2g} at its check draws, "
                   f"more than half the Monte Carlo's tolerance delta {mc.delta:.2g}: use the bounds "
                   "(u + rms error, interval widened by the largest error) or --full-model")
    return out
