"""What moves the result: the sensitivity of the torque (and of G) to every body parameter, and
what-if changes (offset a body, flatten a sphere, put a void in a body).

Sensitivities d(torque_axis)/d(parameter), per SI unit of the parameter, for each body of the test
and source groups and each of its parameters (`body_parameters`: at.x, at.y, at.z, the size keys,
density or mass), and for the turn of each moving group:
- placement and size: central differences of the engine, Richardson-extrapolated over steps h and
  2h (`differences.derivatives`, which also bounds the error). Only the pairs of the changed body
  are recomputed (the others do not depend on it). The step is chosen against the engine tolerance:
  with engine errors of e times the torque (e: the engine's own estimate for the body's pairs, at
  most rtol; exact pairs such as point masses and spheres carry only rounding), the extrapolated
  difference has truncation error ~ (h/l)^4 and noise ~ e l/h, balanced at h = e^(1/5) l, where l is the body's size
  (the smaller of its bounding radius and its gap to the other group, and for a size the size itself),
  and the step is halved until the displaced bodies do not overlap;
- density and mass: exact, since the torque is linear in them: d tau / d rho = tau_b / rho, with
  tau_b the torque of the body's own pairs;
- the turn of each position (parameter "turn[NAME]", body = the group it turns; "turn" of the
  source group when the scene has no positions): exact, d tau / d phi = K for the source group (the
  stiffness the engine returns: the torque depends on the difference of the two groups' turns) and
  -K for the test group, at that position (zero for the torque at another position). The G column
  of a turn is left empty for a swing measurement (it would need the stiffness' own derivative).
ppm of torque per stated uncertainty: 1e6 * d * u / tau.

G, when the scene has a measurement, to first order (the "first-order G model"):
- deflection: G = kappa (theta_1 - theta_2) / (Gamma_1 - Gamma_2) with kappa = I omega^2, so
  d ln G = d ln I - d(tau_1 - tau_2) / (tau_1 - tau_2) over the first two measured positions;
- swing: G = I (omega_1^2 - omega_2^2) / (k_1 - k_2), so d ln G = d ln I - d(K_1 - K_2)/(K_1 - K_2);
- acceleration: G = alpha_m I / |T_m|, T_m the m-th Fourier amplitude of the torque over a turn of
  the signal group, from the torque at N = 16 m (at least 32) equally spaced turns:
  d ln G = d ln I - Re(conj(F) dF) / |F|^2, F = sum_k tau_k exp(-i m phi_k) (the turn of the start
  leaves |T_m| alone: its G column is 0);
- servo: G = -s, s the weighted slope of the measured servo torques y_i on the torques tau_i at the
  servo positions (y held fixed; no inertia): d ln G = sum w dtau y_c / Sxy - 2 sum w tau_c dtau / Sxx
  (c: less the weighted mean), which for two positions is -d(tau_A - tau_B) / (tau_A - tau_B);
with I the pendulum's moment of inertia about the frame axis through the pivot. For one position
the torque alone: d ln G = -d tau / tau. The full reduction (`reduction.reduce_measurement`) can
replace the model for what-ifs (`what_if(..., full_reduction=True)`): G is then reduced for the
scene before and after the change.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import partial

import numpy as np

from truepull.geometry.bodies import Body, body_parameters, build_body, spec_with
from truepull.geometry.errors import InputError
from truepull.geometry.placement import Placement
from truepull.integrate.differences import OFFSETS, derivatives
from truepull.integrate.executor import map_parallel
from truepull.integrate.scene_cache import scene_from

MIN_STEP_FACTOR = 1e-4
MAX_STEP_FACTOR = 0.05
STEP_HALVINGS = 12
NOISE_FLOOR = 1e-15
"""Smallest relative engine error assumed when choosing steps (exact pairs carry a rounding estimate)."""


def step_factor(rtol: float) -> float:
    """h / l = rtol^(1/5), within [1e-4, 0.05] (module docstring)."""
    return float(min(MAX_STEP_FACTOR, max(MIN_STEP_FACTOR, rtol ** 0.2)))


# ------------------------------------------------------------------------------------------------
# results


@dataclass(frozen=True)
class SensitivityRow:
    """d(torque_axis)/d(parameter) (N m per SI unit), its error bound, the step used (SI), the stated
    uncertainty u (SI or None), the torque change in ppm per u, and the G columns (None without a
    measurement): d_G (G per SI unit), G_ppm (per u) and its error bound."""

    body: str
    parameter: str
    value: float
    d_torque_axis: float
    d_error: float
    step: float | None
    u: float | None
    torque_ppm: float | None
    d_G: float | None
    G_ppm: float | None
    method: str
    reached: bool = True
    G_ppm_error: float | None = None
    """bound on G_ppm's error from the torque (or stiffness) derivatives' errors, ppm per u"""

    def to_json(self) -> dict:
        return {"body": self.body, "parameter": self.parameter, "value": self.value,
                "d_torque_axis": self.d_torque_axis, "u": self.u, "torque_ppm": self.torque_ppm,
                "d_G": self.d_G, "G_ppm": self.G_ppm, "error_G_ppm": self.G_ppm_error, "d_error": self.d_error,
                "error_d_torque_axis": self.d_error, "step": self.step,
                "method": self.method, "reached": self.reached}


@dataclass(frozen=True)
class WhatIfResult:
    """A change to the scene and what it does: torque about the axis before and after (N m) at the
    reported position, the change in ppm of the torque, and of G (None without a measurement)."""

    kind: str
    body: str
    description: str
    torque_before: float
    torque_after: float
    torque_ppm: float
    G_ppm: float | None
    error_torque: float
    G_method: str | None = None
    reached: bool = True
    G_ppm_error: float | None = None
    """bound on G_ppm's error from the engine's errors before and after (the reductions' numerical errors
    on the full-reduction route)"""

    @property
    def d_torque_axis(self) -> float:
        return self.torque_after - self.torque_before

    def to_json(self) -> dict:
        return {"kind": self.kind, "body": self.body, "description": self.description,
                "torque_before": self.torque_before, "torque_after": self.torque_after,
                "d_torque_axis": self.d_torque_axis, "torque_ppm": self.torque_ppm, "G_ppm": self.G_ppm,
                "error_G_ppm": self.G_ppm_error, "error_torque": self.error_torque, "error_torque_axis": self.error_torque,
                "G_method": self.G_method, "reached": self.reached}


@dataclass(frozen=True)
class BiasResult:
    """Ranked rows (largest |ppm| first, then largest |d * step|), the torque they refer to (N m) at
    `position`, the G model used (None without a measurement) and notes. `torque_reached`: whether the
    engine reached the tolerance for the torques of the scene itself (at every position used); each
    row says the same for the evaluations it was made from."""

    rows: tuple[SensitivityRow, ...]
    torque_axis: float
    torque_error: float
    position: str | None
    G: float
    G_model: str | None
    rtol: float
    step_factor: float
    notes: tuple[str, ...] = field(default_factory=tuple)
    torque_reached: bool = True

    @property
    def not_reached(self) -> tuple[str, ...]:
        """What missed the tolerance: "torque" for the scene's own torque, "BODY PARAMETER" per row."""
        return (("torque",) if not self.torque_reached else ()) + \
            tuple(f"{r.body} {r.parameter}" for r in self.rows if not r.reached)

    @property
    def reached(self) -> bool:
        return not self.not_reached

    def to_json(self) -> dict:
        return {"rows": [r.to_json() for r in self.rows], "torque_axis": self.torque_axis,
                "torque_error": self.torque_error, "error_torque_axis": self.torque_error,
                "position": self.position, "G": self.G,
                "G_model": self.G_model, "rtol": self.rtol, "step_factor": self.step_factor,
                "notes": list(self.notes), "reached": self.reached, "not_reached": list(self.not_reached)}


# ------------------------------------------------------------------------------------------------
# the model: torque (and stiffness) of one body's pairs at the needed positions


def _position_move(scene, position):
    """(group moved, placement) of a position, or (None, None)."""
    if position is None:
        return None, None
    pos = scene.get_position(position) if isinstance(position, str) else position
    return pos.group, pos.placement(scene.frame)


def placed(scene, body: Body, position) -> Body:
    """A body as drawn, moved as `position` moves its group."""
    group, move = _position_move(scene, position)
    return body.moved(move) if group == body.group else body


def body_tolerances(scene, body: Body, position, test: str, source: str, rtol: float) -> np.ndarray | None:
    """Absolute tolerances of the (drawn) `body`'s pairs with the other group at `position`, as the whole
    scene sets them (`interaction.pair_tolerances` of both groups): shape (1, n_source, 8) for a test
    body, (n_test, 1, 8) for a source body, None for a body of neither group. Each pair's tolerance is
    thus held to the scene's totals, as in `compare`, not to the body's own share (which may cancel by
    symmetry, e.g. a beam centred on the axis, and would ask for needless digits)."""
    from truepull.integrate.interaction import pair_tolerances

    if body.group not in (test, source):
        return None
    sc = scene.at_position(position) if position is not None else scene
    tb, sb = sc.group(test), sc.group(source)
    tols = pair_tolerances(tb, sb, sc.frame.pivot, sc.frame.axis, sc.G.value, rtol)
    if body.group == test:
        i = [b.name for b in tb].index(body.name)
        return tols[i:i + 1]
    j = [b.name for b in sb].index(body.name)
    return tols[:, j:j + 1]


def body_pairs(scene, body: Body, position, test: str, source: str, rtol: float,
               tols: np.ndarray | None = None) -> tuple[np.ndarray, bool]:
    """([torque_axis, K, err_torque, err_K], reached) of the pairs of the (drawn) `body` with the other
    group, at `position`; zeros (and reached) for a body of neither group. `tols`: the pairs' absolute
    tolerances (default `body_tolerances` of `body` itself)."""
    from truepull.integrate.interaction import interaction_totals

    if body.group not in (test, source):
        return np.zeros(4), True
    sc = scene.at_position(position) if position is not None else scene
    b = placed(scene, body, position)
    if body.group == test:
        tb, sb = [b], [x for x in sc.group(source)]
    else:
        tb, sb = [x for x in sc.group(test)], [b]
    if tols is None:
        tols = body_tolerances(scene, body, position, test, source, rtol)
    e = sc.frame.axis
    v, err, _, reached = interaction_totals(tb, sb, sc.frame.pivot, e, sc.G.value, rtol, tols=tols)
    return np.array([v[3:6] @ e, v[6], err[3:6] @ np.abs(e), err[6]]), bool(reached)


@dataclass(frozen=True)
class StencilJob:
    """What a worker needs to evaluate one perturbed body: the scene (re-loaded from `scene_path`
    when given), positions, groups, tolerance and, per body name, the pair tolerances of the body as
    drawn at each position (`body_tolerances`; the perturbed body keeps them, so that the stencil's
    values differ by the change alone and not by a changed quadrature)."""

    scene_path: str | None
    scene: object
    positions: tuple
    test: str
    source: str
    rtol: float
    tolerances: dict = field(default_factory=dict)


def stencil_value(job: StencilJob, item) -> tuple[np.ndarray, bool]:
    """((n_positions, 4) body-pair values, all reached) for one item (body name, parameter, value)."""
    name, param, value = item
    scene = scene_from(job.scene_path, job.scene)
    body = scene.body(name)
    new = build_body(spec_with(body.spec, param, value))
    tols = job.tolerances.get(name) or (None,) * len(job.positions)
    out = [body_pairs(scene, new, p, job.test, job.source, job.rtol, t) for p, t in zip(job.positions, tols)]
    return np.array([v for v, _ in out]), all(r for _, r in out)


# ------------------------------------------------------------------------------------------------
# the G model


@dataclass(frozen=True)
class GModel:
    """First-order G model of a measurement (module docstring): the positions (names, or Position
    objects for the turns of an acceleration measurement), the quantity there ("torque" or
    "stiffness"), and for an acceleration measurement the harmonic m, for a servo the measured servo
    torques (N m) and their relative weights."""

    method: str
    positions: tuple
    quantity: str  # "torque" or "stiffness"
    harmonic: int | None = None
    servo_torques: tuple = ()
    servo_weights: tuple = ()

    @property
    def uses_inertia(self) -> bool:
        return self.method != "servo" and len(self.positions) > 1

    @property
    def description(self) -> str:
        if self.method == "acceleration":
            return (f"first order (acceleration): G proportional to I / |T_{self.harmonic}|, T_{self.harmonic} "
                    f"harmonic {self.harmonic} of the torque over a turn ({len(self.positions)} equally spaced turns)")
        if self.method == "servo":
            how = ("-(servo torque difference) / (torque difference per unit G)" if len(self.positions) == 2 else
                   "-(least-squares slope of the servo torques on the torques per unit G)")
            return f"first order (servo): G = {how} over {', '.join(self.positions)}, the measured servo torques held fixed"
        if len(self.positions) == 1:
            return f"first order: G proportional to 1 / torque at {self.positions[0]}"
        what = "torque" if self.quantity == "torque" else "gravitational stiffness"
        return (f"first order ({self.method}): G proportional to I / ({what} at {self.positions[0]} - "
                f"{what} at {self.positions[1]})")

    def _harmonic(self, q) -> complex:
        """sum_k q_k exp(-i m phi_k) over the model's equally spaced turns (2/N of it is T_m)."""
        n = len(self.positions)
        return complex(np.sum(np.asarray(q, float) * np.exp(-2j * np.pi * self.harmonic * np.arange(n) / n)))

    def log_g(self, I: float, q) -> float:
        """ln G up to a constant, from the inertia (kg m^2) and the per-position quantities."""
        q = np.asarray(q, float)
        if self.method == "acceleration":
            return math.log(I) - math.log(abs(self._harmonic(q)))
        if self.method == "servo":
            from truepull.integrate.balance.servo_method import servo_fit

            return math.log(abs(servo_fit(self.servo_torques, self.servo_weights, q)[0]))
        if len(self.positions) == 1:
            return -math.log(abs(q[0]))
        return math.log(I) - math.log(abs(q[0] - q[1]))

    def log_change(self, I0, I1, q0: np.ndarray, q1: np.ndarray) -> float:
        """ln G(after) - ln G(before) from the inertia and per-position quantities before and after."""
        return self.log_g(I1, q1) - self.log_g(I0, q0)

    def dlnG(self, I0: float, q0, dI: float, dq) -> float:
        """d ln G per unit parameter, to first order, from dI (kg m^2) and dq (per model position)."""
        q0, dq = np.asarray(q0, float), np.asarray(dq, float)
        lnI = dI / I0 if self.uses_inertia else 0.0
        if self.method == "acceleration":
            F = self._harmonic(q0)
            return lnI - (F.conjugate() * self._harmonic(dq)).real / abs(F) ** 2
        if self.method == "servo":
            # G = -s, s = Sxy / Sxx the weighted slope of the servo torques y on the torques x: with y
            # fixed, d ln s = sum w dx y_c / Sxy - 2 sum w x_c dx / Sxx (c: less the weighted mean)
            w = np.asarray(self.servo_weights, float)
            y = np.asarray(self.servo_torques, float)
            xc = q0 - np.sum(w * q0) / np.sum(w)
            yc = y - np.sum(w * y) / np.sum(w)
            return float(np.sum(w * dq * yc) / np.sum(w * xc * yc) - 2.0 * np.sum(w * xc * dq) / np.sum(w * xc * xc))
        if len(self.positions) == 1:
            return -dq[0] / q0[0]
        return lnI - (dq[0] - dq[1]) / (q0[0] - q0[1])


ACCELERATION_TURNS_PER_HARMONIC = 16
"""Equally spaced turns per unit of the harmonic for the acceleration G model: 16 m (at least 32, a
power of two), as the FFT route of turn_harmonics starts."""


def acceleration_turns(scene, test: str, source: str, harmonic: int) -> tuple:
    """The Position objects turning the signal group by phi_k = 2 pi k / N, N = 16 m (at least 32)."""
    from truepull.geometry.quantities import Measured
    from truepull.geometry.scene import Position
    from truepull.integrate.balance.turn_harmonics import MIN_TURNS, signal_source

    src = signal_source(test, source, scene.measurement.extra.get("group"))
    n = max(MIN_TURNS, ACCELERATION_TURNS_PER_HARMONIC * harmonic)
    n = 1 << (n - 1).bit_length()
    return tuple(Position(f"turn {k}/{n}", src, Measured(2.0 * math.pi * k / n)) for k in range(n))


def aliasing_note(model: GModel, q0) -> str:
    """How much |T_m| from the model's N turns differs from that of every other turn (N/2): the
    aliases m +- N/2 that the halving brings in bound what N leaves out (the terms decay)."""
    n = len(q0)
    full = 2.0 * abs(model._harmonic(q0)) / n
    half = 2.0 * abs(complex(np.sum(np.asarray(q0[0::2]) * np.exp(-2j * np.pi * model.harmonic * np.arange(n // 2)
                                                                  / (n // 2))))) / (n // 2)
    return (f"harmonic {model.harmonic} from {n} turns: |T| from {n // 2} of them differs by "
            f"{abs(full - half) / full:.2g} of it (the aliasing of the halved grid; that of the full grid is smaller)")


def g_model(scene, test: str = "pendulum", source: str = "attractor") -> GModel | None:
    """The first-order G model for the scene's measurement, or None without one (or for an
    acceleration measurement whose signal group is not `source`: its torque is not the pairs here)."""
    m = scene.measurement
    if m is None:
        return None
    if m.method == "acceleration":
        from truepull.integrate.balance.turn_harmonics import signal_source

        if signal_source(test, source, m.extra.get("group")) != source:
            return None
        harmonic = int(m.extra["harmonic"])
        return GModel("acceleration", acceleration_turns(scene, test, source, harmonic), "torque", harmonic)
    if m.method == "servo":
        from truepull.integrate.balance.servo_method import servo_torques

        names, tau, w = servo_torques(scene)
        return GModel("servo", tuple(names), "torque", None, tuple(float(t) for t in tau), tuple(float(x) for x in w))
    if m.method == "deflection":
        names = tuple(m.angle)[:2]
        return GModel("deflection", names, "torque")
    names = tuple(m.period)[:2] if isinstance(m.period, dict) else tuple(m.angle)[:2]
    return GModel("swing", names, "stiffness")


def pendulum_inertia(scene, test: str, position=None) -> float:
    """Moment of inertia (kg m^2) of the test group about the frame axis through the pivot."""
    sc = scene.at_position(position) if position is not None else scene
    return float(sum(b.inertia_about(sc.frame.pivot, sc.frame.axis) for b in sc.group(test)))


# ------------------------------------------------------------------------------------------------
# steps


def clearance(scene, body: Body, positions, other: str) -> float:
    """Distance (m) from the body to the nearest body of group `other` over the positions, sampled:
    exact for points and spheres (centre distance less the radius), otherwise from the body's
    quadrature nodes (a mesh: its vertices), which is at least the true gap and close to it."""
    from truepull.geometry.distance import signed_distance
    from truepull.integrate.volume_rules import body_nodes

    best = math.inf
    for p in positions:
        sc = scene.at_position(p) if p is not None else scene
        b = placed(scene, body, p)
        if b.shape.kind in ("point", "sphere", "shell"):
            nodes, less = b.com[None, :], (b.shape.radius if b.shape.kind != "point" else 0.0)
        elif b.shape.kind == "mesh":
            nodes, less = b.placement.apply(b.shape.vertices), 0.0
        else:
            nodes, less = body_nodes(b, (6, 8, 6))[0], 0.0
        for o in sc.group(other):
            if o.is_hole:
                continue
            if o.shape.kind == "point":
                d = np.linalg.norm(nodes - o.com, axis=1)
            else:
                d = signed_distance(o.shape, o.to_local(nodes))
            best = min(best, float(np.min(d)) - less)
    return best


def _clear(scene, body: Body, positions, test, source) -> bool:
    """True when `body` overlaps no body of the other group at any of the positions."""
    from truepull.geometry.overlaps import bodies_overlap

    other = source if body.group == test else test
    for p in positions:
        sc = scene.at_position(p) if p is not None else scene
        b = placed(scene, body, p)
        for o in sc.group(other):
            if o.is_hole or b.is_hole:
                continue
            if bodies_overlap(b, o) == "overlap":
                return False
    return True


def choose_step(scene, body: Body, param: str, value: float, positions, test, source, rtol,
                noise: float | None = None) -> float:
    """The difference step for one placement or size parameter (module docstring). `noise`: the
    relative error of the body's pair torques (default: rtol)."""
    factor = step_factor(rtol if noise is None else noise)
    other = source if body.group == test else test
    r = body.shape.bounding_radius()
    gap = clearance(scene, body, positions, other)
    length = min(r if r > 0 else math.inf, gap if gap > 0 else math.inf)
    if not param.startswith("at."):
        length = min(length, abs(value)) if value != 0 else length
    if not math.isfinite(length):
        length = abs(value) if value != 0 else 1e-3
    h = factor * length
    for _ in range(STEP_HALVINGS):
        ok = True
        for k in (-2.0, 2.0):
            v = value + k * h
            if not param.startswith("at.") and v <= 0:
                ok = False
                break
            try:
                trial = build_body(spec_with(body.spec, param, v))
            except (ValueError, KeyError):
                ok = False
                break
            if not _clear(scene, trial, positions, test, source):
                ok = False
                break
        if ok:
            return h
        h *= 0.5
    raise InputError(scene.path, f"body[{body.name}].{param}",
                     "no difference step keeps this body clear of the other group: it nearly touches it")


# ------------------------------------------------------------------------------------------------
# sensitivities


def default_position(scene):
    """The position bias reports by default: the first measured position, else the first position,
    else the scene as drawn (None)."""
    if scene.measurement is not None:
        return next(iter(scene.measurement.angle), None) or (scene.positions[0].name if scene.positions else None)
    return scene.positions[0].name if scene.positions else None


def sensitivities(scene, test: str = "pendulum", source: str = "attractor", position=None, rtol: float = 1e-9,
                  workers: int | None = None, scheduler=None, progress: bool = False,
                  scene_path: str | None = None, bodies=None) -> BiasResult:
    """Every sensitivity row for the scene (module docstring), ranked. `position`: the state whose torque
    is reported (default `default_position`); `bodies`: limit to these body names."""
    from truepull.integrate.interaction import compare_groups

    if not rtol > 0:
        raise InputError(scene.path, "--rtol", "the tolerance must be greater than zero")
    for name, flag in ((test, "--test"), (source, "--source")):
        if not scene.group(name):
            raise InputError(scene.path, flag, f"no bodies in group '{name}' (groups: {', '.join(scene.groups())})")
    if position is None:
        position = default_position(scene)
    if isinstance(position, str):
        scene.get_position(position)
    model = g_model(scene, test, source)
    positions = [position]
    if model is not None:
        positions += [p for p in model.positions if p not in positions]
    positions = tuple(positions)

    comps = {p: compare_groups(scene, test, source, p, rtol) for p in positions}
    c0 = comps[position]
    tau0 = c0.exact.torque_axis
    G = scene.G.value
    I0 = pendulum_inertia(scene, test, model.positions[0] if model else None)
    q_index = 1 if (model is not None and model.quantity == "stiffness") else 0

    def quantity(comp):
        return comp.exact.stiffness_axis if q_index == 1 else comp.exact.torque_axis

    q0 = np.array([quantity(comps[p]) for p in (model.positions if model else ())])

    def dlnG(dI, dq):
        """d ln G per unit parameter from dI (kg m^2) and dq (per model position)."""
        if model is None:
            return None
        return model.dlnG(I0, q0, dI, dq)

    coefficients = _lnG_coefficients(model, I0, q0)

    def dlnG_error(de):
        """Bound on d ln G's error from the errors `de` (per model position) of dq (dlnG is linear in dq)."""
        return None if model is None else float(coefficients @ np.asarray(de, float))

    chosen = [b for b in scene.bodies if b.group in (test, source) and (bodies is None or b.name in bodies)]
    if bodies is not None:
        missing = set(bodies) - {b.name for b in chosen}
        if missing:
            raise InputError(scene.path, "--body", f"no body named {', '.join(sorted(missing))} in the "
                             f"'{test}' or '{source}' group")

    # the engine's relative error on each body's pair torques sets its step (at most rtol)
    tolerances = {b.name: tuple(body_tolerances(scene, b, p, test, source, rtol) for p in positions)
                  for b in chosen}
    centres = {b.name: [body_pairs(scene, b, p, test, source, rtol, t) for p, t in zip(positions, tolerances[b.name])]
               for b in chosen}
    noise = {}
    for b in chosen:
        share = centres[b.name][0][0]
        noise[b.name] = min(rtol, max(share[2] / max(abs(share[0]), 1e-300), NOISE_FLOOR))

    # stencils for placement and size parameters, all in one parallel map
    items, plan = [], []
    for b in chosen:
        if b.spec is None:
            continue
        for param, meas in body_parameters(b.spec).items():
            if param in ("density", "mass"):
                continue
            if not param.startswith("at.") and meas.value == 0:
                continue  # a size at its lower limit (e.g. inner_radius = 0): no two-sided difference
            h = choose_step(scene, b, param, meas.value, positions, test, source, rtol, noise[b.name])
            plan.append((b, param, meas, h, len(items)))
            items += [(b.name, param, meas.value + k * h) for k in OFFSETS]
    job = StencilJob(scene_path, None if scene_path else scene, positions, test, source, rtol, tolerances)
    values = map_parallel(partial(stencil_value, job), items, workers=workers, scheduler=scheduler,
                          progress=progress, desc="sensitivities")

    rows: list[SensitivityRow] = []
    pos_i = {p: i for i, p in enumerate(positions)}
    model_i = [pos_i[p] for p in model.positions] if model else []
    for b, param, meas, h, start in plan:
        block = np.array([v for v, _ in values[start:start + len(OFFSETS)]])  # (4, n_pos, 4)
        reached = all(r for _, r in values[start:start + len(OFFSETS)])
        centre = np.array([v for v, _ in centres[b.name]])
        noise = np.max(block[:, :, 2:4], axis=0)  # engine error estimates per position
        d = np.zeros((len(positions), 2))
        de = np.zeros((len(positions), 2))
        for j in range(len(positions)):
            for qi in range(2):
                f = block[:, j, qi]
                rel = max(noise[j, qi] / max(np.max(np.abs(f)), 1e-300), 1e-15)
                dv, ev = derivatives(f[None, :], np.array([h]), centre[j, qi], rel_noise=rel)
                d[j, qi], de[j, qi] = dv[0], ev[0]
        dI = 0.0
        if model is not None and b.group == test:
            hI = h
            Ip = build_body(spec_with(b.spec, param, meas.value + hI))
            Im = build_body(spec_with(b.spec, param, meas.value - hI))
            mp0 = model.positions[0]
            dI = (placed(scene, Ip, mp0).inertia_about(scene.frame.pivot, scene.frame.axis)
                  - placed(scene, Im, mp0).inertia_about(scene.frame.pivot, scene.frame.axis)) / (2 * hI)
        lnG = dlnG(dI, d[model_i, q_index]) if model else None
        rows.append(_row(b.name, param, meas, d[0, 0], de[0, 0], h, tau0, lnG, G,
                         "central differences (Richardson, steps h and 2h)", reached,
                         dlnG_error(de[model_i, q_index]) if model else None))

    # density and mass: linear, exact
    for b in chosen:
        if b.spec is None:
            continue
        params = body_parameters(b.spec)
        key = "mass" if "mass" in params else "density"
        meas = params[key]
        if meas is None or not meas.value:
            continue
        share = np.array([v for v, _ in centres[b.name]])
        reached = all(r for _, r in centres[b.name])
        d_all = share[:, 0:2] / meas.value
        err = share[0, 2] / abs(meas.value)
        dI = 0.0
        if model is not None and b.group == test:
            dI = placed(scene, b, model.positions[0]).inertia_about(scene.frame.pivot, scene.frame.axis) / meas.value
        lnG = dlnG(dI, d_all[model_i, q_index]) if model else None
        de_all = share[:, 2:4] / abs(meas.value)
        rows.append(_row(b.name, key, meas, d_all[0, 0], err, None, tau0, lnG, G,
                         "exact: the torque is linear in the " + key, reached,
                         dlnG_error(de_all[model_i, q_index]) if model else None))

    # turns: each position that turns the test or source group about the frame axis (its own stated
    # uncertainty); without positions, the source group's turn as drawn
    from truepull.geometry.quantities import Measured

    turns = [(p.group, f"turn[{p.name}]", p.name, p.turn) for p in scene.positions
             if p.group in (test, source) and p.name in positions]
    if not scene.positions:
        turns = [(source, "turn", None, Measured(0.0, None))]
    for grp, label, pname, meas in turns:
        sign = 1.0 if grp == source else -1.0
        k = sign * comps[pname].exact.stiffness_axis
        d_here = k if pname == position else 0.0
        lnG = lnG_err = None
        if model is not None and model.method == "acceleration":
            lnG = lnG_err = 0.0  # exact: a turn of the start shifts the harmonic's phase, not its amplitude
        elif model is not None and model.quantity == "torque":
            dq = np.array([k if p == pname else 0.0 for p in model.positions])
            lnG = dlnG(0.0, dq)
            ek = comps[pname].error.stiffness_axis
            lnG_err = dlnG_error([ek if p == pname else 0.0 for p in model.positions])
        err = comps[pname].error.stiffness_axis if pname == position else 0.0
        rows.append(_row(grp, label, meas, d_here, err, None, tau0, lnG, G,
                         f"exact: d(torque)/d(turn) = {'+' if sign > 0 else '-'}stiffness at that position",
                         comps[pname].reached, lnG_err))

    notes = []
    if model is not None:
        notes.append(model.description)
        if model.method == "acceleration":
            notes.append(aliasing_note(model, q0))
    notes.append(f"difference steps h = e^(1/5) x the body's size or its gap to the other group, whichever is "
                 f"smaller, e the engine's relative error on the body's pairs (at most rtol = {rtol:g}, so at most "
                 f"{step_factor(rtol):.3g}); halved until the displaced body keeps clear")
    rows.sort(key=_rank_key)
    unreached = [p if isinstance(p, str) else "the scene as drawn" if p is None else p.name
                 for p in positions if not comps[p].reached]
    if unreached:
        notes.append(f"tolerance {rtol:g} not reached for the torque at {', '.join(unreached)}")
    return BiasResult(tuple(rows), tau0, c0.error.torque_axis, position if isinstance(position, str) else None,
                      G, model.description if model else None, rtol, step_factor(rtol), tuple(notes),
                      torque_reached=all(c.reached for c in comps.values()))


def _row(body, param, meas, d, err, h, tau0, lnG, G, method, reached=True, lnG_err=None) -> SensitivityRow:
    u = meas.u if meas is not None else None
    u = float(u) if u else None
    ppm = 1e6 * d * u / tau0 if (u is not None and tau0 != 0) else None
    dG = G * lnG if lnG is not None else None
    Gppm = 1e6 * lnG * u if (lnG is not None and u is not None) else None
    Gppm_err = 1e6 * lnG_err * u if (Gppm is not None and lnG_err is not None) else None
    return SensitivityRow(body, param, float(meas.value) if meas is not None else 0.0, float(d), float(err),
                          None if h is None else float(h), u, ppm, dG, Gppm, method, bool(reached), Gppm_err)


def _lnG_coefficients(model, I0, q0) -> np.ndarray:
    """|d ln G / d q_i| at the model's positions (dlnG is linear in dq): the weights that turn the quantities'
    errors into a bound on ln G's (empty without a model)."""
    if model is None:
        return np.zeros(0)
    n = len(model.positions)
    return np.abs(np.array([model.dlnG(I0, q0, 0.0, np.eye(n)[i]) for i in range(n)], float))


def _rank_key(r: SensitivityRow):
    ppm = r.G_ppm if r.G_ppm is not None else r.torque_ppm
    return (0 if ppm is not None else 1, -abs(ppm) if ppm is not None else 0.0, r.body, r.parameter)


# ------------------------------------------------------------------------------------------------
# what-ifs


def offset_body(scene, name: str, vector) -> Body:
    """The body moved by `vector` (m, world axes), as drawn."""
    return scene.body(name).moved(Placement.shift(np.asarray(vector, float)))


def flattened_sphere(scene, name: str, flattening: float, polar_axis=None) -> Body:
    """An ellipsoid of the sphere's mass and density with semi-axes a, a, c = a (1 - f) (oblate for
    f > 0, prolate for f < 0), a^2 c = R^3, its polar (c) axis along `polar_axis` (default: the frame
    axis), centred where the sphere is."""
    b = scene.body(name)
    key = f"body[{name}]"
    if b.shape.kind != "sphere":
        raise InputError(scene.path, key, f"only a sphere can be flattened ('{name}' is a {b.shape.kind})")
    f = float(flattening)
    if not -1.0 < f < 1.0:
        raise InputError(scene.path, "--flatten", f"the flattening must lie between -1 and 1, got {f:g}")
    axis = np.asarray(scene.frame.axis if polar_axis is None else polar_axis, float)
    if axis.shape != (3,) or not np.linalg.norm(axis) > 0:
        raise InputError(scene.path, "--flatten", "the polar axis needs three numbers, not all zero")
    R = b.shape.radius
    a = R * (1.0 - f) ** (-1.0 / 3.0)
    c = a * (1.0 - f)
    from truepull.geometry.shapes import Ellipsoid

    placement = Placement.from_scene(b.placement.translation, axis)
    return Body(b.name, b.group, Ellipsoid((a, a, c)), placement, b.density, None)


def void_sphere(scene, name: str, radius: float, offset) -> Body:
    """A void: a sphere of negative density (minus the host's) of `radius` (m) centred at the host's
    reference point plus `offset` (m, world axes), as drawn; refused unless it lies inside the host."""
    from truepull.geometry.shapes import Sphere

    host = scene.body(name)
    key = f"body[{name}]"
    if host.shape.kind == "point" or host.density == 0:
        raise InputError(scene.path, key, f"'{name}' has no volume to hold a void")
    if host.is_hole:
        raise InputError(scene.path, key, f"'{name}' is itself a hole")
    r = float(radius)
    if not r > 0:
        raise InputError(scene.path, "--void", f"the void's radius must be greater than zero, got {r:g}")
    centre = host.placement.translation + np.asarray(offset, float)
    # the void must lie inside the host: its centre and a dense set of points on its surface
    n = 2000
    k = np.arange(n) + 0.5
    z = 1.0 - 2.0 * k / n
    phi = math.pi * (1.0 + 5.0 ** 0.5) * k
    s = np.sqrt(1.0 - z * z)
    surface = centre + r * np.stack([s * np.cos(phi), s * np.sin(phi), z], axis=1)
    if not np.all(host.contains_world(np.vstack([centre[None, :], surface]))):
        raise InputError(scene.path, "--void", f"a void of radius {r:g} m at that offset does not fit inside '{name}'")
    return Body(f"{name}/void", host.group, Sphere(r), Placement.shift(centre), -abs(host.density), None)


def _state(scene, positions, test, source, rtol):
    """((per-position torque, stiffness, torque error, stiffness error), all reached) of the whole scene."""
    from truepull.integrate.interaction import compare_groups

    out, reached = [], True
    for p in positions:
        c = compare_groups(scene, test, source, p, rtol)
        out.append((c.exact.torque_axis, c.exact.stiffness_axis, c.error.torque_axis, c.error.stiffness_axis))
        reached = reached and c.reached
    return np.array(out), reached


def what_if(scene, kind: str, body: str, new_scene, description: str, test="pendulum", source="attractor",
            position=None, rtol=1e-9, full_reduction=False) -> WhatIfResult:
    """Compare `new_scene` (the scene with one change) with `scene`: torque at `position`, G by the
    first-order model (or the full reduction when `full_reduction` and the scene has a measurement)."""
    if position is None:
        position = default_position(scene)
    model = g_model(scene, test, source)
    positions = [position] + ([p for p in model.positions if p != position] if model else [])
    before, reached_before = _state(scene, positions, test, source, rtol)
    after, reached_after = _state(new_scene, positions, test, source, rtol)
    t0, t1 = before[0, 0], after[0, 0]
    ppm = 1e6 * (t1 - t0) / t0 if t0 != 0 else float("nan")
    G_ppm, G_err, how = None, None, None
    if model is not None and full_reduction:
        from truepull.integrate.balance.reduction import reduce_measurement

        r0 = reduce_measurement(scene, test=test, source=source, rtol=rtol)
        r1 = reduce_measurement(new_scene, test=test, source=source, rtol=rtol)
        G_ppm, how = 1e6 * (r1.G / r0.G - 1.0), "full reduction"
        G_err = 1e6 * abs(r1.G / r0.G) * (r0.numerical_error / abs(r0.G) + r1.numerical_error / abs(r1.G))
        reached_after = reached_after and r0.reached and r1.reached
    elif model is not None:
        idx = [positions.index(p) for p in model.positions]
        qi = 1 if model.quantity == "stiffness" else 0
        I0 = pendulum_inertia(scene, test, model.positions[0])
        I1 = pendulum_inertia(new_scene, test, model.positions[0])
        change = model.log_change(I0, I1, before[idx, qi], after[idx, qi])
        G_ppm = 1e6 * math.expm1(change)
        # ln G's error: the quantities' errors before and after through its linear coefficients
        weights = _lnG_coefficients(model, I0, before[idx, qi])
        G_err = 1e6 * math.exp(change) * float(weights @ (before[idx, 2 + qi] + after[idx, 2 + qi]))
        how = model.description
    return WhatIfResult(kind, body, description, float(t0), float(t1), float(ppm), G_ppm,
                        float(before[0, 2] + after[0, 2]), how, reached_before and reached_after, G_err)


def offset_what_if(scene, name, vector, **kw) -> WhatIfResult:
    v = np.asarray(vector, float)
    new = scene.with_body(name, offset_body(scene, name, v))
    desc = f"'{name}' offset by ({', '.join(f'{x:.6g}' for x in v)}) m"
    return what_if(scene, "offset", name, new, desc, **kw)


def flatten_what_if(scene, name, flattening, polar_axis=None, **kw) -> WhatIfResult:
    body = flattened_sphere(scene, name, flattening, polar_axis)
    new = scene.with_body(name, body)
    a, _, c = body.shape.radii
    desc = (f"sphere '{name}' as an ellipsoid of equal mass, flattening {flattening:g} "
            f"(semi-axes {a:.6g}, {a:.6g}, {c:.6g} m)")
    return what_if(scene, "flatten", name, new, desc, **kw)


def void_what_if(scene, name, radius, offset, **kw) -> WhatIfResult:
    void = void_sphere(scene, name, radius, offset)
    new = scene.with_bodies(list(scene.bodies) + [void])
    off = np.asarray(offset, float)
    desc = f"void of radius {radius:.6g} m in '{name}' at offset ({', '.join(f'{x:.6g}' for x in off)}) m"
    return what_if(scene, "void", name, new, desc, **kw)


def gradient_what_if(scene, group: str, relative: float, **kw) -> WhatIfResult:
    """Every body of `group` (not points) given a density gradient along the scene z axis of
    `relative` times its density per its bounding diameter (so its density changes by about
    `relative` of itself from bottom to top), on top of any gradient it has."""
    from dataclasses import replace

    bodies = []
    for b in scene.bodies:
        if b.group == group and b.shape.kind != "point":
            gz = float(relative) * abs(b.density) / (2.0 * b.bounding_sphere()[1])
            extra = b.placement.rotation.T @ np.array([0.0, 0.0, gz]) * (-1.0 if b.is_hole else 1.0)
            b = replace(b, gradient=extra if b.gradient is None else b.gradient + extra)
        bodies.append(b)
    desc = f"a {relative:g} relative density gradient along z in each {group} body"
    return what_if(scene, "gradient", group, scene.with_bodies(bodies), desc, **kw)


def ideal_form(scene, name: str) -> tuple[Body, str]:
    """The ideal shape of a measured-form body (geometry/measured_form.py, measured_cylinder.py, fitted) and
    its description: a uniform sphere, or cylinder of the fitted mean radius along the body's axis, of the
    body's mass, volume and density, centred at its centre of mass."""
    b = scene.body(name)
    form = getattr(b.shape, "form", None)
    if form is None:
        raise InputError(scene.path, "--measured-form", f"'{name}' is not a fitted measured form (a mesh body "
                                                        "read from a CSV of directions and radii, or of points "
                                                        "with fit_degree or form = \"cylinder\")")
    if b.has_gradient:
        raise InputError(scene.path, "--measured-form", f"'{name}' has a density gradient; the ideal shape "
                                                        "is uniform")
    shape, placement = form.ideal(b)
    return Body(b.name, b.group, shape, placement, b.density, None), form.ideal_text(shape)


def measured_form_what_if(scene, name, **kw) -> WhatIfResult:
    """What the measured form of `name` does beside its ideal shape (same mass and centre of mass):
    the scene with the ideal shape is 'before', the scene as measured 'after'."""
    ideal, text = ideal_form(scene, name)
    desc = f"measured form of '{name}' against {text}"
    return what_if(scene.with_body(name, ideal), "measured-form", name, scene, desc, **kw)
