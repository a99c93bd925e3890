"""G from a torsion-balance measurement: the point-mass value, each correction as a named factor, and
the exact value. The Python API behind `truepull reduce`:

    result = reduce_measurement(scene)            # scene with a [measurement] table
    result.G, result.G_point, result.corrections  # product of the factors takes G_point to G

SI throughout: G in m^3 kg^-1 s^-2, angles rad, periods s, torques N m, stiffness N m/rad, moment of
inertia kg m^2. Torques are on the pendulum (group `test`) about the frame axis; theta is a
right-handed turn of the pendulum about that axis from the pose the scene draws, where the fiber is
untwisted (its rest angle). The engine is used per unit G.

Physics (the published relations the steps use):
- moment of inertia I of the whole pendulum about the frame axis through the pivot, from geometry;
- damping: omega0^2 = omega_d^2 (1 + (delta / 2 pi)^2), omega_d = 2 pi / T (oscillator.py);
- deflection: the free period at the first position gives kappa + G k(theta_1) = I omega0^2 (the
  fiber's constant plus the attractor's gravitational stiffness there), and at every position i the
  fiber balances the gravitational torque, kappa theta_i = G Gamma(theta_i), with the exact torque
  curve Gamma of the pendulum turned to theta_i. Measured angles share an unknown zero c,
  phi_i = theta_i + c; G and c are solved by Gauss-Newton (exactly determined for two positions,
  least squares, weighted by the stated angle uncertainties, for more);
- swing (time-of-swing): I omega0_i^2 = kappa + G k(theta_i) at each position, so
  G = I (omega_near^2 - omega_far^2) / (k_near - k_far) (least squares for more positions), with
  k the exact stiffness where the pendulum hangs (theta_i from the same equilibrium as above);
  finite amplitude: omega0 from the measured frequency and the period ratio T(A)/T(0) of the
  nonlinear oscillator on the whole torque curve, by the energy integral (oscillator.period_ratio);
  anelasticity with a fiber Q: the constant-loss-angle fiber constant kappa(omega) (oscillator.py),
  which removes the bias of about 1/(pi Q) that Kuroda (1995) described.

Exact (not linearised) equilibrium: the engine's torque and stiffness at a few turned poses per
position (the pose as drawn, theta = 0, and the equilibrium, plus theta_i -+ A for a swing of
amplitude A), joined by their Hermite interpolant (torque_curve.py), so the curve is exact in value
and slope at the samples and good to the fourth order in the turn between them. The equilibrium is
solved on that curve (Gauss-Newton for deflection, Newton for each swing position, both with the
curve's own derivatives); the samples are then re-placed at the solved angles and the solve repeated
(at most three rounds, until G moves by less than 1e-3 of the engine tolerance), so the final
samples sit at the solution, where the curve is the engine's own value. The last change of G
between rounds is part of the stated numerical error, with the engine's error estimates carried
through the linearised formula and the rounding of the measured values.

G_point (the point-mass value, the baseline of the corrections) is the textbook two-ball reduction:
every body a point of its mass at its centre of mass, each attractor body (holes left out) pulling
only on the pendulum body nearest to it, the moment of inertia of the pendulum's bodies as points at
their centres of mass, the free period taken as the fiber's own, no damping, torques and stiffness as
drawn (linearised). For two balls on a light beam this is G = 2 pi^2 L b^2 theta / (M T^2). From there
each correction switches on one refinement, in this order, so the factors telescope exactly:
pull of every attractor body on every pendulum body (points), exact torque (or stiffness) of the
real shapes, exact moment of inertia, damping, gravitational stiffness at the period position
(deflection), exact (not linearised) equilibrium, finite amplitude (swing), fiber anelasticity (swing).
The first factor is the textbook far-mass correction; the value with every pair as points (what
`truepull compare` calls the point model) is also reported, as G_point_all_pairs.

The acceleration-feedback and servo methods have their own modules (acceleration_method.py,
servo_method.py); reduce_measurement hands them the scene and they return the same Reduction.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np
from numpy.polynomial import Polynomial

from truepull.geometry.errors import InputError
from truepull.geometry.quantities import Measured
from truepull.integrate.interaction import check_separated
from truepull.integrate.balance.oscillator import (damped_omega_squared, fiber_constant_factor, period_ratio,
                                           undamped_omega_squared)
from truepull.integrate.point_model import point_pair_values
from truepull.integrate.balance.torque_curve import (PoseSample, TorqueCurve, plan_nodes, sample_curve, sample_pose,
                                             turned_scene)

# samples of the torque curve closer than this (rad) are merged (no amplitude given)
NODE_GAP = 1e-9
# a re-placed sample that moves by less than this (rad) is not computed again
NODE_MOVE = 1e-12
# with a swing amplitude A the samples sit at theta_i and theta_i -+ A; others closer than this
# fraction of A are dropped
AMPLITUDE_GAP = 0.1
MAX_ITERATIONS = 60
# rounds of sampling the torque curves at the solved angles; stop when G changes by less than
# PLAN_RTOL times the engine tolerance (the last change is the stated error of the solve)
MAX_PLANS = 3
PLAN_RTOL = 1e-3
# an iteration has settled when its relative step is below SETTLED_TIGHT, or below SETTLED_LOOSE and no
# longer shrinking (rounding noise of the inputs sets a floor, e.g. angles measured from a far zero)
SETTLED_TIGHT = 1e-15
SETTLED_LOOSE = 1e-11

CORRECTION_NAMES = {
    "pairs": "pull of every attractor body on every pendulum body (point masses)",
    "shapes": "exact torque of the real shapes",
    "shapes_swing": "exact stiffness of the real shapes",
    "inertia": "exact moment of inertia of the whole pendulum",
    "damping": "damping (logarithmic decrement)",
    "stiffness": "gravitational stiffness at the period position",
    "equilibrium": "exact (not linearised) equilibrium",
    "amplitude": "finite amplitude",
    "anelasticity": "fiber anelasticity",
    "shapes_harmonic": "exact torque harmonic of the real shapes",
    "leakage": "leakage of other harmonics",
    "shapes_servo": "exact torque difference of the real shapes at the held angle",
}


class StepUndefined(Exception):
    """A reduction step has no defined value for these inputs (the message says why)."""


def _settled(step: float, previous: float) -> bool:
    """Whether an iteration with relative step `step` (previous step `previous`) has converged."""
    return step <= SETTLED_TIGHT or (step <= SETTLED_LOOSE and step >= 0.5 * previous)


# ---------------------------------------------------------------------------------------------
# what was measured


@dataclass(frozen=True, eq=False)
class Observations:
    """The measurement in SI. `positions` in the order of the scene's table (deflection: the first
    is where the free period was measured). `angles` (rad, any common zero) for deflection; `periods`
    (s): one value for deflection, one per position for swing. `decrement` 0 when not given.
    `amplitudes` (rad) per position for swing, or None. `weights` are relative least-squares weights
    per position (1/u^2 of the angle or of I omega^2 when every one states an uncertainty)."""

    method: str
    positions: tuple[str, ...]
    angles: np.ndarray | None
    periods: np.ndarray
    decrement: float
    amplitudes: np.ndarray | None
    fiber_q: float | None
    weights: np.ndarray
    decrement_given: bool = False


def measurement_values(scene, fiber_q: Measured | None = None) -> dict[str, Measured]:
    """Every measured value by its budget name ("measurement.angle.A", "measurement.period" or
    "measurement.period.near", "measurement.decrement", "measurement.fiber_q",
    "measurement.amplitude" or "measurement.amplitude.near"; acceleration "measurement.acceleration";
    servo "measurement.torque.A" or "measurement.voltage.A" and "measurement.torque_per_volt2"), in SI
    with its uncertainty."""
    m = _measurement(scene)
    out: dict[str, Measured] = {}
    if m.method in ("acceleration", "servo"):
        for key in ("acceleration", "torque", "voltage", "torque_per_volt2"):
            value = m.extra.get(key)
            if isinstance(value, dict):
                out.update({f"measurement.{key}.{name}": v for name, v in value.items()})
            elif value is not None:
                out[f"measurement.{key}"] = value
        return out
    if m.method == "deflection":
        for name, value in m.angle.items():
            out[f"measurement.angle.{name}"] = value
        out["measurement.period"] = m.period
    else:
        for name, value in m.period.items():
            out[f"measurement.period.{name}"] = value
        amp = m.extra.get("amplitude")
        if isinstance(amp, dict):
            for name, value in amp.items():
                out[f"measurement.amplitude.{name}"] = value
        elif amp is not None:
            out["measurement.amplitude"] = amp
    if m.decrement is not None:
        out["measurement.decrement"] = m.decrement
    q = fiber_q if fiber_q is not None else m.extra.get("fiber_q")
    if q is not None and m.method == "swing":
        out["measurement.fiber_q"] = q
    return out


def _measurement(scene):
    m = scene.measurement
    if m is None:
        raise InputError(scene.path, "measurement", "the scene has no [measurement] table; reduce needs the "
                         "method, the measured angles or periods and the positions they belong to")
    return m


def observations(scene, fiber_q: Measured | None = None, overrides: dict[str, float] | None = None,
                 test: str = "pendulum") -> Observations:
    """The scene's measurement as Observations; `overrides` replace values by budget name (see
    measurement_values); `fiber_q` (from the command line) replaces the scene's fiber_q."""
    m = _measurement(scene)
    values = measurement_values(scene, fiber_q)
    if overrides:
        values = {k: (Measured(overrides[k], v.u) if k in overrides else v) for k, v in values.items()}
    path = scene.path
    if m.method == "deflection":
        positions = tuple(m.angle)
        angles = np.array([values[f"measurement.angle.{p}"].value for p in positions])
        periods = np.array([values["measurement.period"].value])
        us = [m.angle[p].u for p in positions]
        weights = np.array([1.0 / u**2 for u in us]) if all(u for u in us) else np.ones(len(positions))
        amplitudes = None
    else:
        positions = tuple(m.period)
        angles = None
        periods = np.array([values[f"measurement.period.{p}"].value for p in positions])
        us = [m.period[p].u for p in positions]
        # u(I omega^2) is proportional to u(T) / T^3
        weights = (np.array([(p.value**3 / p.u) ** 2 for p in m.period.values()]) if all(us)
                   else np.ones(len(positions)))
        amplitudes = _amplitudes(scene, m, positions, values)
    for name in positions:
        pos = scene.get_position(name)
        if pos.group == test:
            raise InputError(path, f"position[{name}].group",
                             f"position '{name}' moves the pendulum itself; a measured position must move "
                             "the attractor (the pendulum's angle is what is measured)")
    if np.any(periods <= 0):
        raise InputError(path, "measurement.period", "periods must be greater than zero")
    decrement = values["measurement.decrement"].value if "measurement.decrement" in values else 0.0
    if decrement < 0:
        raise InputError(path, "measurement.decrement", "the logarithmic decrement must not be negative")
    q = values["measurement.fiber_q"].value if "measurement.fiber_q" in values else None
    if q is not None and not q > 0:
        raise InputError(path, "measurement.fiber_q", "the fiber quality factor must be greater than zero")
    return Observations(method=m.method, positions=positions, angles=angles, periods=periods,
                        decrement=float(decrement), amplitudes=amplitudes, fiber_q=q,
                        weights=weights / weights.max(), decrement_given="measurement.decrement" in values)


def _amplitudes(scene, m, positions, values):
    amp = m.extra.get("amplitude")
    if amp is None:
        return None
    if isinstance(amp, dict):
        missing = [p for p in positions if p not in amp]
        if missing:
            raise InputError(scene.path, "measurement.amplitude",
                             f"no amplitude for position(s) {', '.join(missing)}: give one amplitude for all "
                             "positions or one per swing position")
        out = np.array([values[f"measurement.amplitude.{p}"].value for p in positions])
    else:
        out = np.full(len(positions), values["measurement.amplitude"].value)
    if np.any(out <= 0):
        raise InputError(scene.path, "measurement.amplitude", "amplitudes must be greater than zero")
    return out


# ---------------------------------------------------------------------------------------------
# the pendulum and the pose as drawn


def pendulum_inertia(scene, test: str = "pendulum") -> tuple[float, float]:
    """(I, I_point) in kg m^2 about the frame axis through the pivot: the exact moment of inertia of
    the whole group (holes subtracted), and that of its bodies as points at their centres of mass."""
    pivot, axis = scene.frame.pivot, scene.frame.axis
    bodies = scene.group(test)
    exact = float(sum(b.inertia_about(pivot, axis) for b in bodies))
    point = 0.0
    for b in bodies:
        r = b.com - pivot
        perp = r - (r @ axis) * axis
        point += b.mass * float(perp @ perp)
    if not exact > 0:
        raise InputError(scene.path, f"group {test}", "the pendulum's moment of inertia about the frame axis "
                         f"is not positive ({exact:.6g} kg m^2)")
    return exact, float(point)


@dataclass(frozen=True)
class DrawnPose:
    """Torque and stiffness per unit G at one position with the pendulum as drawn: exact (engine),
    every body a point (`point_*`), and the textbook pairs (`nearest_*`: each attractor body on the
    pendulum body nearest to it, as points)."""

    position: str
    exact: PoseSample
    point_torque: float
    point_stiffness: float
    nearest_torque: float
    nearest_stiffness: float
    notes: tuple[str, ...] = ()


def drawn_pose(scene_per_g, position: str, test: str, source: str, rtol: float) -> DrawnPose:
    """The pose as drawn at `position`, from a scene whose G is 1 (per unit G)."""
    sc = scene_per_g.at_position(position)
    tb, sb = sc.group(test), sc.group(source)
    for name, bodies in ((test, tb), (source, sb)):
        if not bodies:
            known = ", ".join(sc.groups()) or "none"
            raise InputError(sc.path, "group", f"no bodies in group '{name}' (groups: {known})")
    notes = tuple(check_separated(tb, sb, sc.path))
    exact = sample_pose(scene_per_g, position, 0.0, test, source, rtol)
    pivot, axis = sc.frame.pivot, sc.frame.axis
    pp = point_pair_values(tb, sb, pivot, axis, 1.0)  # (n_test, n_source, 8)
    torque_of = lambda v: float(v[3:6] @ axis)  # noqa: E731
    total = pp.sum(axis=(0, 1))
    near = np.zeros(8)
    solid = [i for i, b in enumerate(tb) if b.mass > 0]
    for j, s in enumerate(sb):
        if s.mass <= 0 or not solid:
            continue
        i = min(solid, key=lambda k: float(np.linalg.norm(tb[k].com - s.com)))
        near += pp[i, j]
    return DrawnPose(position, exact, torque_of(total), float(total[6]), torque_of(near), float(near[6]), notes)


# ---------------------------------------------------------------------------------------------
# deflection


def _weighted_line(x, y, w):
    """Weighted least-squares line y = c + s x: (s, c); raises StepUndefined when x does not vary."""
    wsum = w.sum()
    xb, yb = (w @ x) / wsum, (w @ y) / wsum
    sxx = w @ (x - xb) ** 2
    if not sxx > (1e-12 * np.max(np.abs(x))) ** 2 * wsum or not np.isfinite(sxx):
        raise StepUndefined("x")
    s = (w @ ((x - xb) * (y - yb))) / sxx
    return float(s), float(yb - s * xb)


def deflection_linear(angles, weights, torques, inertia, omega2, k1=0.0) -> tuple[float, float]:
    """Linearised deflection: (G, c) with angles phi_i = c + (G / kappa) Gamma_i, the fiber's constant
    kappa = I omega^2 - G k1 (k1 = stiffness per unit G at the period position, 0 to neglect it);
    torques Gamma_i per unit G at the poses as drawn."""
    try:
        s, c = _weighted_line(np.asarray(torques, float), np.asarray(angles, float), np.asarray(weights, float))
    except StepUndefined:
        raise StepUndefined("the torque on the pendulum does not change between the measured positions") from None
    if s == 0:
        raise StepUndefined("the measured angles are the same at every position")
    denom = 1.0 + s * k1
    if not denom > 0:
        raise StepUndefined("the gravitational stiffness at the period position exceeds the fiber's")
    return s * inertia * omega2 / denom, c


def deflection_exact(angles, weights, curves, inertia, omega2, G0, c0) -> tuple[float, float, np.ndarray]:
    """Exact deflection: (G, c, theta) with I omega^2 theta_i = G (k(theta_1) theta_i + Gamma_i(theta_i))
    at every position, theta_i = phi_i - c (Gauss-Newton from G0, c0 on the torque curves)."""
    phi = np.asarray(angles, float)
    sw = np.sqrt(np.asarray(weights, float))
    iw = inertia * omega2
    G, c = float(G0), float(c0)
    previous = math.inf
    for _ in range(MAX_ITERATIONS):
        th = phi - c
        gam = np.array([cv.torque(t) for cv, t in zip(curves, th)])
        k = np.array([cv.stiffness(t) for cv, t in zip(curves, th)])
        k1, k1p = k[0], float(curves[0].stiffness_slope(th[0]))
        resid = sw * (iw * th - G * (k1 * th + gam)) / iw
        jac = np.column_stack([-(k1 * th + gam) * G0, -iw + G * (k1p * th + k1 - k)]) * (sw / iw)[:, None]
        step, *_ = np.linalg.lstsq(jac, -resid, rcond=None)
        dG, dc = float(step[0] * G0), float(step[1])
        G += dG
        c += dc
        if not (np.isfinite(G) and np.isfinite(c)):
            break
        rel = max(abs(dG / G), abs(dc) / max(float(np.max(np.abs(th))), 1e-300))
        if _settled(rel, previous):
            return G, c, phi - c
        previous = rel
    raise StepUndefined("the exact equilibrium could not be solved: the measured angles are not reproduced "
                      "by the torque curve (check the angles' sign and unit)")


# ---------------------------------------------------------------------------------------------
# swing


def swing_fit(inertia, omega2, stiffness, weights, fiber_factors=None) -> tuple[float, float]:
    """(G, kappa) from I omega_i^2 = kappa a_i + G k_i (a_i the fiber's constant relative to the first
    position, 1 without anelasticity), weighted least squares; exact for two positions."""
    y = inertia * np.asarray(omega2, float)
    k = np.asarray(stiffness, float)
    a = np.ones_like(k) if fiber_factors is None else np.asarray(fiber_factors, float)
    sw = np.sqrt(np.asarray(weights, float))
    scale_k = float(np.max(np.abs(k))) or 1.0
    scale_y = float(np.max(np.abs(y)))
    m = np.column_stack([a, k / scale_k]) * sw[:, None]
    sv = np.linalg.svd(m, compute_uv=False)
    if not sv[-1] > 1e-12 * sv[0] or np.ptp(k) <= 1e-12 * scale_k:
        raise StepUndefined("the gravitational stiffness is the same at the swing positions, so the periods "
                          "cannot separate G from the fiber's constant")
    sol, *_ = np.linalg.lstsq(m, sw * y / scale_y, rcond=None)
    kappa, G = sol[0] * scale_y, sol[1] * scale_y / scale_k
    return float(G), float(kappa)


def equilibrium_angle(curve: TorqueCurve, kappa: float, G: float, theta0: float = 0.0) -> float:
    """theta with kappa theta = G Gamma(theta) near theta0 (Newton on the torque curve; rest angle 0)."""
    th = float(theta0)
    previous = math.inf
    for _ in range(MAX_ITERATIONS):
        f = kappa * th - G * float(curve.torque(th))
        fp = kappa + G * float(curve.stiffness(th))
        if not fp > 0:
            raise StepUndefined("the pendulum has no stable equilibrium: the attractor's gravitational stiffness "
                              "exceeds the fiber's")
        step = f / fp
        th -= step
        # relative to the size of the swing of the torque: 1 mrad, or the angle itself when larger
        rel = abs(step) / max(abs(th), 1e-3)
        if _settled(rel, previous):
            return th
        previous = rel
    raise StepUndefined("the equilibrium angle could not be solved")


@dataclass(frozen=True)
class SwingState:
    """The solved swing: G, the fiber's constant kappa at the first position's frequency, and per
    position the equilibrium angle, the stiffness per unit G there, and the period ratio T(A)/T(0)."""

    G: float
    kappa: float
    theta: np.ndarray
    stiffness: np.ndarray
    ratio: np.ndarray
    ratio_lindstedt: np.ndarray
    ratio_error: np.ndarray


def swing_solve(obs: Observations, curves, inertia: float, omega2_measured, G0: float, kappa0: float,
                theta0, amplitude: bool = True, anelastic: bool = True,
                lindstedt: bool = False) -> SwingState:
    """Time-of-swing with the exact equilibrium: iterate (equilibrium on each curve, stiffness there,
    finite-amplitude period ratio, constant-Q fiber factors) -> weighted fit, until G and kappa settle."""
    w2m = np.asarray(omega2_measured, float)
    n = len(curves)
    G, kappa = float(G0), float(kappa0)
    theta = np.array(theta0, float)
    use_amp = amplitude and obs.amplitudes is not None
    q = obs.fiber_q if anelastic else None
    ratio = np.ones(n)
    ratio_l = np.ones(n)
    ratio_e = np.zeros(n)
    factors = np.ones(n)
    previous = math.inf
    for _ in range(MAX_ITERATIONS):
        k = np.empty(n)
        for i, cv in enumerate(curves):
            kap_i = kappa * factors[i]
            theta[i] = equilibrium_angle(cv, kap_i, G, theta[i])
            k[i] = float(cv.stiffness(theta[i]))
            if use_amp:
                # total torque about the equilibrium: fiber plus gravity, as a polynomial in x = theta - theta_i
                total = Polynomial([-kap_i * theta[i], -kap_i]) + cv.about(theta[i]) * G
                potential = -total.integ() / inertia
                pr = period_ratio(potential, float(obs.amplitudes[i]))
                ratio[i], ratio_l[i], ratio_e[i] = pr.ratio, pr.lindstedt, pr.quadrature_error
        used = ratio_l if lindstedt else ratio
        w2 = w2m * used**2
        if q is not None:
            omega = np.sqrt(w2)
            factors = np.array([fiber_constant_factor(om, omega[0], q) for om in omega])
        G_new, kappa_new = swing_fit(inertia, w2, k, obs.weights, factors if q is not None else None)
        rel = max(abs(G_new / G - 1.0), abs(kappa_new / kappa - 1.0))
        G, kappa = G_new, kappa_new
        if _settled(rel, previous):
            return SwingState(G, kappa, theta.copy(), k, ratio.copy(), ratio_l.copy(), ratio_e.copy())
        previous = rel
    raise StepUndefined("the time-of-swing reduction did not settle (check the periods and amplitudes)")


# ---------------------------------------------------------------------------------------------
# the reduction


@dataclass(frozen=True)
class Correction:
    """One named factor of the chain from G_point to G; `applied` False when its input is absent (the
    factor is then 1)."""

    name: str
    factor: float
    applied: bool = True
    note: str = ""


@dataclass(frozen=True, eq=False)
class Reduction:
    """The result. G and G_point in m^3 kg^-1 s^-2 (G_point None when the point-mass formula is
    undefined for this pendulum), the chain of corrections, `numerical_error` an estimate of G's
    numerical error (engine tolerances, equilibrium solve, quadrature). Per measured position:
    `equilibrium` the solved angle from the fiber's rest angle (rad), `torque` G Gamma there (N m),
    `stiffness` G k there (N m/rad). `fiber_constant` kappa (N m/rad; swing: at the first position's
    frequency; None for acceleration and servo, which need none). `offset` (deflection) the common zero of the measured angles (rad). `nodes` the
    turns (rad) at which the engine sampled each position's torque curve; `state` what the
    uncertainty model starts from. `method_terms` the acceleration and servo methods' own numbers
    (acceleration_method.py, servo_method.py), None for deflection and swing."""

    method: str
    G: float
    G_point: float | None
    corrections: tuple[Correction, ...]
    numerical_error: float
    inertia: float
    inertia_point: float
    fiber_constant: float | None
    positions: tuple[str, ...]
    equilibrium: tuple[float, ...]
    torque: tuple[float, ...]
    stiffness: tuple[float, ...]
    offset: float | None
    period_ratio: tuple[float, ...] | None
    nodes: tuple[tuple[float, ...], ...]
    state: tuple[float, ...]
    rtol: float
    reached: bool
    notes: tuple[str, ...] = field(default_factory=tuple)
    G_point_all_pairs: float | None = None
    point_terms: dict | None = None
    method_terms: dict | None = None

    def to_json(self) -> dict:
        out = {
            "method": self.method, "G": self.G, "G_point": self.G_point,
            "corrections": [{"name": c.name, "factor": c.factor, "ppm": (c.factor - 1.0) * 1e6,
                             "applied": c.applied, "note": c.note} for c in self.corrections],
            "numerical_error": self.numerical_error, "rtol": self.rtol, "reached": self.reached,
            "inertia": self.inertia, "inertia_point": self.inertia_point, "fiber_constant": self.fiber_constant,
            "positions": [{"position": p, "equilibrium": e, "torque_axis": t, "stiffness_axis": k,
                           "period_ratio": (self.period_ratio[i] if self.period_ratio else None),
                           "engine_turns": list(self.nodes[i])}
                          for i, (p, e, t, k) in enumerate(zip(self.positions, self.equilibrium, self.torque,
                                                               self.stiffness))],
            "angle_offset": self.offset, "G_point_all_pairs": self.G_point_all_pairs, "notes": list(self.notes),
            "point_terms": self.point_terms,
        }
        if self.method_terms is not None:
            out["method_terms"] = self.method_terms
        return out


def per_unit_g(scene):
    """The scene with G = 1, so that the engine's results are per unit G."""
    return replace(scene, G=Measured(1.0))


def _plan(obs: Observations, theta) -> tuple[tuple[float, ...], ...]:
    """Where to sample each position's torque curve, around the equilibrium angles theta."""
    out = []
    for i, th in enumerate(theta):
        th = float(th)
        if obs.method == "swing" and obs.amplitudes is not None:
            a = float(obs.amplitudes[i])
            out.append(plan_nodes([th, th - a, th + a, 0.0], AMPLITUDE_GAP * a))
        else:
            out.append(plan_nodes([th, 0.0], NODE_GAP))
    return tuple(out)


def _same_nodes(a, b) -> bool:
    """Whether two plans sample the same turns, up to NODE_MOVE (rad): the curve through samples that
    close to the solved angles is exact there for every purpose of the reduction."""
    if len(a) != len(b) or any(len(x) != len(y) for x, y in zip(a, b)):
        return False
    return all(abs(u - v) <= NODE_MOVE for x, y in zip(a, b) for u, v in zip(x, y))


def final_G(obs: Observations, curves, inertia: float, state) -> tuple[float, tuple[float, ...]]:
    """The exact G (every refinement on) from torque curves and a starting state; returns (G, state).
    Deflection state (G, c); swing state (G, kappa, theta_1..theta_n)."""
    omega2 = np.array([undamped_omega_squared(t, obs.decrement) for t in obs.periods])
    if obs.method == "deflection":
        G, c, _ = deflection_exact(obs.angles, obs.weights, curves, inertia, float(omega2[0]), state[0], state[1])
        return G, (G, c)
    s = swing_solve(obs, curves, inertia, omega2, state[0], state[1], state[2:])
    return s.G, (s.G, s.kappa, *s.theta)


def reduce_measurement(scene, *, test: str = "pendulum", source: str = "attractor", rtol: float = 1e-9,
                       fiber_q: Measured | None = None) -> Reduction:
    """G from the scene's [measurement], every correction itemised (see the module docstring; the
    acceleration and servo methods in acceleration_method.py and servo_method.py)."""
    if not rtol > 0:
        raise InputError(scene.path, "--rtol", "the tolerance must be greater than zero")
    method = _measurement(scene).method
    if method in ("acceleration", "servo"):
        if method == "acceleration":
            from truepull.integrate.balance.acceleration_method import reduce_acceleration as reduce_own
        else:
            from truepull.integrate.balance.servo_method import reduce_servo as reduce_own
        result = reduce_own(scene, test=test, source=source, rtol=rtol)
        if fiber_q is not None:
            result = replace(result, notes=result.notes + (f"fiber_q is used by time-of-swing only; the {method} "
                                                           "reduction does not use it",))
        return result
    obs = observations(scene, fiber_q, test=test)
    notes: list[str] = []
    m = scene.measurement
    if obs.method == "deflection":
        if fiber_q is not None or "fiber_q" in m.extra:
            notes.append("fiber_q is used by time-of-swing only; the deflection reduction does not use it")
        if "amplitude" in m.extra:
            notes.append("the amplitude is used by time-of-swing only; the deflection reduction does not use it")
    elif m.angle:
        notes.append("measured angles are not used by time-of-swing")
    s1 = per_unit_g(scene)
    inertia, inertia_point = pendulum_inertia(scene, test)
    drawn = [drawn_pose(s1, p, test, source, rtol) for p in obs.positions]
    for d in drawn:
        notes.extend(d.notes)
    cache = {(d.position, 0.0): d.exact for d in drawn}
    w2d = np.array([damped_omega_squared(t) for t in obs.periods])
    w20 = np.array([undamped_omega_squared(t, obs.decrement) for t in obs.periods])

    try:
        if obs.method == "deflection":
            steps, state, theta_start = _deflection_steps(obs, drawn, inertia, inertia_point, w2d, w20)
        else:
            steps, state, theta_start = _swing_steps(obs, drawn, inertia, inertia_point, w2d, w20)
    except StepUndefined as exc:
        raise InputError(scene.path, "measurement", str(exc)) from None
    _check_sign(scene, obs, state[0])

    def solve(nodes, start):
        if obs.amplitudes is not None:
            _check_swing_clearance(s1, obs, nodes, test, source)
        curves = [sample_curve(s1, p, n, test, source, rtol, cache) for p, n in zip(obs.positions, nodes)]
        try:
            G, st = final_G(obs, curves, inertia, start)
        except StepUndefined as exc:
            raise InputError(scene.path, "measurement", str(exc)) from None
        return G, st, curves

    # sample each curve around the equilibrium, solve, re-place the samples at the solved angles and
    # solve again, until G settles far below the engine tolerance (or the samples stay put)
    nodes = _plan(obs, theta_start)
    G_b, state_b, curves = solve(nodes, state)
    solve_error = math.inf
    for _ in range(MAX_PLANS - 1):
        new_nodes = _plan(obs, _angles(obs, state_b))
        if _same_nodes(new_nodes, nodes):
            solve_error = 0.0 if math.isinf(solve_error) else solve_error
            break
        G_a = G_b
        nodes = new_nodes
        G_b, state_b, curves = solve(nodes, state_b)
        solve_error = abs(G_b - G_a)
        if solve_error <= PLAN_RTOL * rtol * abs(G_b):
            break

    try:
        if obs.method == "deflection":
            steps.append(("equilibrium", G_b, True, ""))
            extra_error, more_notes, ratio = 0.0, [], None
        else:
            extra_error, more_notes, ratio = _swing_curve_steps(steps, obs, curves, inertia, w20, state_b)
    except StepUndefined as exc:
        raise InputError(scene.path, "measurement", str(exc)) from None
    notes.extend(more_notes)
    G = steps[-1][1]
    _check_sign(scene, obs, G)

    corrections, G_point = _chain(steps)
    if G_point is None:
        notes.append("the point-mass formula is undefined for this pendulum (no point torque or point inertia); "
                     "the corrections start from the first defined step")
    engine_error = _engine_error(obs, drawn, curves, inertia, w20, steps) + _rounding_error(obs, G, w20)
    theta = _angles(obs, state_b)
    torque = tuple(G * float(cv.torque(t)) for cv, t in zip(curves, theta))
    stiff = tuple(G * float(cv.stiffness(t)) for cv, t in zip(curves, theta))
    if obs.method == "deflection":
        kappa = inertia * float(w20[0]) - stiff[0]
        offset = float(state_b[1])
    else:
        kappa, offset = float(state_b[1]), None
    reached = all(cv.reached for cv in curves) and all(d.exact.reached for d in drawn)
    if not reached:
        notes.append(f"the engine did not reach its tolerance {rtol:g} everywhere; see the numerical error")
    all_pairs = next((g for key, g, ok, _ in steps if key == "pairs" and ok), None)
    return Reduction(
        method=obs.method, G=float(G), G_point=G_point, corrections=corrections,
        numerical_error=float(engine_error + solve_error + extra_error), inertia=inertia,
        inertia_point=inertia_point, fiber_constant=float(kappa), positions=obs.positions,
        equilibrium=tuple(float(t) for t in theta), torque=torque, stiffness=stiff, offset=offset,
        period_ratio=ratio, nodes=tuple(cv.nodes for cv in curves), state=tuple(float(v) for v in state_b),
        rtol=rtol, reached=reached, notes=tuple(dict.fromkeys(notes)), G_point_all_pairs=all_pairs,
        point_terms=point_terms(obs, drawn, inertia_point) if G_point is not None else None)


def _check_sign(scene, obs, G):
    if not G > 0:
        what = ("angles" if obs.method == "deflection" else "periods")
        raise InputError(scene.path, "measurement",
                         f"the measured {what} give a negative G ({G:.6g}): the measured change has the opposite "
                         "sign to what the attractor's pull predicts (angles are right-handed about the frame axis)")


def _check_swing_clearance(scene_per_g, obs, nodes, test, source):
    """Refuse a swing whose turning points put pendulum and attractor bodies into each other."""
    for name, thetas in zip(obs.positions, nodes):
        for theta in thetas:
            if theta != 0.0:
                sc = turned_scene(scene_per_g, name, test, theta)
                try:
                    check_separated(sc.group(test), sc.group(source), sc.path)
                except InputError as exc:
                    raise InputError(sc.path, "measurement.amplitude",
                                     f"at position {name} the swing reaches a turn of {theta:.6g} rad where "
                                     f"{exc.reason}") from None


def _angles(obs, state) -> np.ndarray:
    if obs.method == "deflection":
        return obs.angles - state[1]
    return np.array(state[2:], float)


def _try(fn, *args):
    try:
        return fn(*args)
    except StepUndefined:
        return None


def _deflection_steps(obs, drawn, inertia, inertia_point, w2d, w20):
    """The linearised steps of the chain: [(key, G or None, applied, note)], the start state for the
    exact solve, and the starting equilibrium angles."""
    phi, w = obs.angles, obs.weights
    near = [d.nearest_torque for d in drawn]
    point = [d.point_torque for d in drawn]
    exact = [d.exact.torque for d in drawn]
    k1 = drawn[0].exact.stiffness
    lin = deflection_linear
    ip = inertia_point if inertia_point > 0 else math.nan
    steps = []
    for key, args in (("point", (phi, w, near, ip, w2d[0])), ("pairs", (phi, w, point, ip, w2d[0])),
                      ("shapes", (phi, w, exact, ip, w2d[0])), ("inertia", (phi, w, exact, inertia, w2d[0])),
                      ("damping", (phi, w, exact, inertia, w20[0]))):
        r = _try(lin, *args)
        g = r[0] if r is not None and np.isfinite(r[0]) and r[0] != 0 else None
        steps.append((key, g, key != "damping" or obs.decrement_given, ""))
    G5, c5 = lin(phi, w, exact, inertia, w20[0], k1)  # must exist: raises StepUndefined otherwise
    steps.append(("stiffness", G5, True, ""))
    return steps, (G5, c5), phi - c5


def _swing_steps(obs, drawn, inertia, inertia_point, w2d, w20):
    w = obs.weights
    near = [d.nearest_stiffness for d in drawn]
    point = [d.point_stiffness for d in drawn]
    exact = [d.exact.stiffness for d in drawn]
    ip = inertia_point if inertia_point > 0 else math.nan
    steps = []
    for key, args in (("point", (ip, w2d, near, w)), ("pairs", (ip, w2d, point, w)),
                      ("shapes_swing", (ip, w2d, exact, w)), ("inertia", (inertia, w2d, exact, w))):
        r = _try(swing_fit, *args)
        g = r[0] if r is not None and np.isfinite(r[0]) and r[0] != 0 else None
        steps.append((key, g, True, ""))
    G4, kappa4 = swing_fit(inertia, w20, exact, w)
    steps.append(("damping", G4, obs.decrement_given, ""))
    theta = np.array([G4 * d.exact.torque / (kappa4 + G4 * d.exact.stiffness) for d in drawn])
    return steps, (G4, kappa4, *theta), theta


def _swing_curve_steps(steps, obs, curves, inertia, w20, state):
    """Append the curve-based swing steps; return (extra numerical error, notes, period ratios)."""
    G0, kappa0, theta0 = state[0], state[1], state[2:]
    eq = swing_solve(obs, curves, inertia, w20, G0, kappa0, theta0, amplitude=False, anelastic=False)
    steps.append(("equilibrium", eq.G, True, ""))
    notes, error, ratio = [], 0.0, None
    if obs.amplitudes is not None:
        amp = swing_solve(obs, curves, inertia, w20, G0, kappa0, theta0, amplitude=True, anelastic=False)
        lind = swing_solve(obs, curves, inertia, w20, G0, kappa0, theta0, amplitude=True, anelastic=False,
                           lindstedt=True)
        steps.append(("amplitude", amp.G, True, "energy integral over the torque curve"))
        notes.append(f"finite amplitude by the energy integral; the second-order Lindstedt-Poincare value differs "
                     f"by {(lind.G / amp.G - 1) * 1e6:.3g} ppm")
        ratio = tuple(float(r) for r in amp.ratio)
        # quadrature error of the period ratios, through G = I (w_a^2 - w_b^2) / (k_a - k_b)
        w2 = w20 * amp.ratio**2
        spread = float(np.ptp(w2)) or float(np.max(w2))
        error += abs(amp.G) * float(np.sum(2 * w2 * amp.ratio_error / amp.ratio)) / spread
    if obs.fiber_q is not None:
        full = swing_solve(obs, curves, inertia, w20, G0, kappa0, theta0, amplitude=True, anelastic=True)
        steps.append(("anelasticity", full.G, True, f"constant-loss-angle fiber, Q = {obs.fiber_q:.6g}"))
    return error, notes, ratio


def _chain(steps) -> tuple[tuple[Correction, ...], float | None]:
    """Factors between consecutive defined steps; the first defined value is G_point only when it is
    the textbook step itself."""
    corrections = []
    previous = None
    G_point = None
    for key, value, applied, note in steps:
        if key == "point":
            G_point = value
            previous = value
            continue
        name = CORRECTION_NAMES[key]
        if value is None:
            corrections.append(Correction(name, math.nan, False, "undefined for this pendulum"))
            continue
        factor = value / previous if previous is not None else math.nan
        if previous is None and not note:
            note = "the first defined step: nothing before it to compare with"
        corrections.append(Correction(name, float(factor), bool(applied), note))
        previous = value
    return tuple(corrections), G_point


def _rounding_error(obs, G, w20) -> float:
    """Rounding of the measured values in double precision, amplified by the reduction: G depends on
    differences of angles (deflection) or of omega^2 (swing) that may be small beside the values."""
    values = obs.angles if obs.method == "deflection" else w20
    spread = float(np.ptp(values))
    amplification = float(np.max(np.abs(values))) / spread + 1.0 if spread > 0 else 1.0
    return 16 * np.finfo(float).eps * amplification * abs(G)


def _engine_error(obs, drawn, curves, inertia, w20, steps) -> float:
    """G's error from the engine's error estimates: each position's torque (deflection) or stiffness
    (swing) moved by its estimate in the last linearised formula, the changes added."""
    G = steps[-1][1]
    err = 0.0
    if obs.method == "deflection":
        torques = np.array([d.exact.torque for d in drawn])
        k1 = drawn[0].exact.stiffness
        base = deflection_linear(obs.angles, obs.weights, torques, inertia, w20[0], k1)[0]
        for i, (d, cv) in enumerate(zip(drawn, curves)):
            delta = max(d.exact.torque_error, cv.max_errors()[0])
            t = torques.copy()
            t[i] += delta
            err += abs(deflection_linear(obs.angles, obs.weights, t, inertia, w20[0], k1)[0] - base)
        dk = max(drawn[0].exact.stiffness_error, curves[0].max_errors()[1])
        err += abs(deflection_linear(obs.angles, obs.weights, torques, inertia, w20[0], k1 + dk)[0] - base)
    else:
        k = np.array([d.exact.stiffness for d in drawn])
        base = swing_fit(inertia, w20, k, obs.weights)[0]
        for i, (d, cv) in enumerate(zip(drawn, curves)):
            delta = max(d.exact.stiffness_error, cv.max_errors()[1])
            kk = k.copy()
            kk[i] += delta
            err += abs(swing_fit(inertia, w20, kk, obs.weights)[0] - base)
    return float(err * abs(G / base)) if base else float(err)


def point_terms(obs: Observations, drawn, inertia_point: float) -> dict:
    """The numbers that go into G_point, in SI: deflection G_point = I_p (2 pi / T)^2 s, s the slope of
    the measured angles against the textbook pairs' point torques per unit G (two positions:
    s = (phi_1 - phi_2) / (Gamma_1 - Gamma_2)); swing G_point = I_p (omega_1^2 - omega_2^2) /
    (k_1 - k_2) with omega_i = 2 pi / T_i and k the point stiffness per unit G (least squares for more)."""
    out = {"method": obs.method, "inertia_point": float(inertia_point), "positions": list(obs.positions),
           "periods": [float(t) for t in obs.periods]}
    if obs.method == "deflection":
        out["angles"] = [float(a) for a in obs.angles]
        out["torques_per_G"] = [float(d.nearest_torque) for d in drawn]
    else:
        out["stiffness_per_G"] = [float(d.nearest_stiffness) for d in drawn]
    return out
