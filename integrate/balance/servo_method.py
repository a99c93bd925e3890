"""G by an electrostatic servo: the pendulum is held at the angle the scene draws (where the fiber is
untwisted) by a servo torque equal and opposite to the gravitational one, so no fiber constant, period
or equilibrium enters. At every position i the servo torque tau_i (on the pendulum, right-handed
about the frame axis) balances G Gamma_i, Gamma_i the attractor's axial torque per unit G on the
pendulum as drawn at that position, up to a torque c common to all positions (the fiber, were it held
a little twisted, any patch or offset of the servo):

    tau_i = c - G Gamma_i,   so for two positions   G = -(tau_A - tau_B) / (Gamma_A - Gamma_B),

and for more the weighted least-squares line (weights 1/u(tau_i)^2 when every torque states one).
The torques are given directly, or as tau_i = c_V V_i^2 with the calibrated torque_per_volt2 c_V.
SI: torques N m, voltages V, c_V N m/V^2, Gamma N m per unit G (kg^2 m^-1).

Corrections (telescoping): the textbook pairs as points (each attractor body on the pendulum body
nearest it) as G_point; every pair as points; the exact torque difference of the real shapes at the
held angle. The common offset c cancels and is reported.
"""

from __future__ import annotations

import numpy as np

from truepull.geometry.errors import InputError


def servo_torques(scene, values: dict[str, float] | None = None) -> tuple[tuple[str, ...], np.ndarray, np.ndarray]:
    """(positions, servo torques N m, relative weights) of the scene's servo measurement; `values`
    replaces measured values by budget name (reduction.measurement_values)."""
    from truepull.integrate.balance.reduction import measurement_values

    m = scene.measurement
    v = {k: x.value for k, x in measurement_values(scene).items()}
    if values:
        v.update(values)
    positions = m.positions
    if "torque" in m.extra:
        tau = np.array([v[f"measurement.torque.{p}"] for p in positions])
        us = [m.extra["torque"][p].u for p in positions]
    else:
        c = v["measurement.torque_per_volt2"]
        volts = np.array([v[f"measurement.voltage.{p}"] for p in positions])
        tau = c * volts**2
        uv = [m.extra["voltage"][p].u for p in positions]
        us = [2 * abs(c * x) * u if u else None for x, u in zip(volts, uv)]
    weights = np.array([1.0 / u**2 for u in us]) if all(us) else np.ones(len(positions))
    return positions, tau, weights / weights.max()


def servo_fit(torques, weights, gammas) -> tuple[float, float]:
    """(G, c) from tau_i = c - G Gamma_i (weighted least squares; exact for two positions)."""
    from truepull.integrate.balance.reduction import StepUndefined, _weighted_line

    try:
        s, c = _weighted_line(np.asarray(gammas, float), np.asarray(torques, float), np.asarray(weights, float))
    except StepUndefined:
        raise StepUndefined("the gravitational torque on the pendulum is the same at the servo positions, so "
                            "their torques cannot give G") from None
    return -s, c


def geometry_terms(scene, test: str = "pendulum", source: str = "attractor", rtol: float = 1e-9) -> np.ndarray:
    """Gamma_i: the exact axial torque per unit G on the pendulum as drawn at each servo position."""
    from truepull.integrate.balance.reduction import per_unit_g
    from truepull.integrate.balance.torque_curve import sample_pose

    s1 = per_unit_g(scene)
    return np.array([sample_pose(s1, p, 0.0, test, source, rtol).torque for p in scene.measurement.positions])


def g_from_terms(scene, gammas, values: dict[str, float] | None = None) -> float:
    """G from the servo torques (with `values` replacing measured values) and Gamma_i."""
    _, tau, w = servo_torques(scene, values)
    return servo_fit(tau, w, gammas)[0]


def reduce_servo(scene, *, test: str = "pendulum", source: str = "attractor", rtol: float = 1e-9):
    """The Reduction (reduction.py's structure) of the scene's servo measurement."""
    from truepull.integrate.balance.reduction import (Reduction, StepUndefined, _chain, drawn_pose,
                                                      pendulum_inertia, per_unit_g)

    m = scene.measurement
    positions, tau, w = servo_torques(scene)
    for name in positions:
        if scene.get_position(name).group == test:
            raise InputError(scene.path, f"position[{name}].group",
                             f"position '{name}' moves the pendulum itself; a servo position must move the "
                             "attractor (the pendulum is held at its drawn angle)")
    s1 = per_unit_g(scene)
    drawn = [drawn_pose(s1, p, test, source, rtol) for p in positions]
    notes = [n for d in drawn for n in d.notes]
    steps = []
    try:
        for key, gam in (("point", [d.nearest_torque for d in drawn]), ("pairs", [d.point_torque for d in drawn]),
                         ("shapes_servo", [d.exact.torque for d in drawn])):
            try:
                g = servo_fit(tau, w, gam)[0]
            except StepUndefined:
                if key == "shapes_servo":
                    raise
                g = None
            steps.append((key, g if g is not None and np.isfinite(g) and g != 0 else None, True, ""))
    except StepUndefined as exc:
        raise InputError(scene.path, m.where, str(exc)) from None
    gammas = np.array([d.exact.torque for d in drawn])
    G, c = servo_fit(tau, w, gammas)
    if not G > 0:
        raise InputError(scene.path, m.where, f"the servo torques give a negative G ({G:.6g}): the servo must push "
                         "against the attractor's pull (torques are right-handed about the frame axis, on the pendulum)")
    corrections, G_point = _chain(steps)
    if G_point is None:
        notes.append("the point-mass formula is undefined for this pendulum; the corrections start from the first "
                     "defined step")
    # engine errors: each Gamma moved by its estimate, the changes in G added; rounding of the torques
    err = 0.0
    for i, d in enumerate(drawn):
        g2 = gammas.copy()
        g2[i] += d.exact.torque_error
        err += abs(servo_fit(tau, w, g2)[0] - G)
    spread = float(np.ptp(tau))
    err += 16 * np.finfo(float).eps * abs(G) * (float(np.max(np.abs(tau))) / spread + 1.0 if spread > 0 else 1.0)
    reached = all(d.exact.reached for d in drawn)
    if not reached:
        notes.append(f"the engine did not reach its tolerance {rtol:g} everywhere; see the numerical error")
    notes.append(f"the common torque offset c = {c:.6g} N m (fiber, servo zero) cancels in the difference")
    inertia, inertia_point = pendulum_inertia(scene, test)
    terms = {"servo_torque": [float(t) for t in tau], "gamma_per_G": [float(g) for g in gammas],
             "offset_torque": float(c), "given_as": "torque" if "torque" in m.extra else "c V^2"}
    point_terms = ({"method": "servo", "inertia_point": inertia_point, "positions": list(positions), "periods": [],
                    "servo_torque": [float(t) for t in tau], "torques_per_G": [float(d.nearest_torque) for d in drawn]}
                   if G_point is not None else None)
    all_pairs = next((g for key, g, ok, _ in steps if key == "pairs" and ok), None)
    return Reduction(
        method="servo", G=float(G), G_point=G_point, corrections=corrections, numerical_error=float(err),
        inertia=inertia, inertia_point=inertia_point, fiber_constant=None, positions=tuple(positions),
        equilibrium=tuple(0.0 for _ in positions), torque=tuple(float(G * g) for g in gammas),
        stiffness=tuple(float(G * d.exact.stiffness) for d in drawn), offset=None, period_ratio=None,
        nodes=tuple((0.0,) for _ in positions), state=(float(G), float(c)), rtol=rtol, reached=reached,
        notes=tuple(dict.fromkeys(notes)), G_point_all_pairs=all_pairs, point_terms=point_terms,
        method_terms=terms)
