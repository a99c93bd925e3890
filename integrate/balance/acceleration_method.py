"""G by angular-acceleration feedback: the pendulum rides a turntable whose feedback keeps the fiber
untwisted while the attractor turns relative to it, so the turntable's angular acceleration is
alpha(phi) = G tau(phi) / I, tau the axial torque per unit G at the relative turn phi and I the
pendulum's moment of inertia about the frame axis. The measured amplitude alpha_m of harmonic m gives

    G = alpha_m I / |T_m|,    T_m the m-th Fourier amplitude of tau per unit G (turn_harmonics.py).

SI: alpha_m in rad/s^2, I in kg m^2, T_m in N m per unit G (kg^2 m^-1), G in m^3 kg^-1 s^-2.

Corrections, in this order so that the factors telescope: the point model's T_m and inertia (every
body a point at its centre of mass, every pair) as the baseline G_point; exact torque harmonic of the
real shapes; exact moment of inertia; leakage of other harmonics. Assumed: the relative turn is
uniform (phi = Omega t), so the harmonics are separated exactly and the leakage factor is 1; the scene
has no key for a non-uniform turn, so the reduction states, per radian of a wobble of the turn at k
times the turn rate, how much of the neighbouring harmonics would reach the measured one
(turn_harmonics.leakage_per_radian). Not modelled: a residual twist of the fiber (the feedback is
taken to hold it untwisted; the scene has no key for a residual twist).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from truepull.geometry.errors import InputError
from truepull.integrate.interaction import check_separated
from truepull.integrate.balance.turn_harmonics import (NEIGHBOURS, exact_harmonics, leakage_per_radian,
                                                       point_harmonics, signal_source)

TWIST_NOTE = ("a residual twist of the fiber is not modelled: the feedback is taken to hold the fiber untwisted "
              "(the scene has no key for a residual twist)")
# a point-model harmonic below this fraction of the exact one counts as absent (e.g. a plate as a point)
POINT_ABSENT = 1e-6


@dataclass(frozen=True)
class AccelerationTerms:
    """The geometry behind G: exact |T_m| per unit G and its error, the moment of inertia (kg m^2)."""

    amplitude: float
    error: float
    inertia: float


def _setup(scene, test, source):
    m = scene.measurement
    harmonic = int(m.extra["harmonic"])
    src = signal_source(test, source, m.extra.get("group"))
    for name in (test, src):
        if not scene.group(name):
            known = ", ".join(scene.groups()) or "none"
            raise InputError(scene.path, "group", f"no bodies in group '{name}' (groups: {known})")
    return m, harmonic, src


def geometry_terms(scene, test: str = "pendulum", source: str = "attractor", rtol: float = 1e-9,
                   route: str = "auto") -> AccelerationTerms:
    """The exact harmonic amplitude and inertia for the scene's acceleration measurement."""
    from truepull.integrate.balance.reduction import pendulum_inertia, per_unit_g

    _, harmonic, src = _setup(scene, test, source)
    h = exact_harmonics(per_unit_g(scene), harmonic, test, src, rtol, route)
    inertia, _ = pendulum_inertia(scene, test)
    return AccelerationTerms(h.amplitude(harmonic), h.error, inertia)


def g_from_terms(terms: AccelerationTerms, acceleration: float) -> float:
    """G = alpha_m I / |T_m| (m^3 kg^-1 s^-2)."""
    return acceleration * terms.inertia / terms.amplitude


def reduce_acceleration(scene, *, test: str = "pendulum", source: str = "attractor", rtol: float = 1e-9,
                        route: str = "auto"):
    """The Reduction (reduction.py's structure) of the scene's acceleration measurement."""
    from truepull.integrate.balance.reduction import Reduction, _chain, pendulum_inertia, per_unit_g

    m, harmonic, src = _setup(scene, test, source)
    alpha = m.extra["acceleration"].value
    s1 = per_unit_g(scene)
    notes = list(check_separated(s1.group(test), s1.group(src), scene.path))
    if src != source:
        notes.append(f"the signal is the pull of group '{src}' (the measurement's group) turning relative to the "
                     f"pendulum")
    if scene.positions:
        notes.append("the [[position]] tables are not used by the acceleration method: the signal is the turn of the "
                     "scene as drawn")
    inertia, inertia_point = pendulum_inertia(scene, test)
    exact = exact_harmonics(s1, harmonic, test, src, rtol, route)
    point = point_harmonics(s1, harmonic, test, src)
    T, Tp = exact.amplitude(harmonic), point.amplitude(harmonic)
    if not T > exact.error:
        raise InputError(scene.path, f"{m.where}.harmonic",
                         f"the torque has no harmonic {harmonic} in the relative turn here (|T_{harmonic}| = {T:.3g} "
                         f"per unit G, within its error {exact.error:.3g}): choose the harmonic the attractor's "
                         "symmetry makes (2 for a plate and a two-mass attractor)")
    G = alpha * inertia / T
    point_ok = Tp > POINT_ABSENT * T and inertia_point > 0
    steps = [("point", alpha * inertia_point / Tp if point_ok else None, True, ""),
             ("shapes_harmonic", alpha * inertia_point / T if inertia_point > 0 else None, True, exact.how),
             ("inertia", G, True, ""),
             ("leakage", G, False, "uniform relative turn assumed")]
    corrections, G_point = _chain(steps)
    if G_point is None:
        notes.append(f"the point model has no harmonic {harmonic} here (e.g. a plate on the axis is a point on the "
                     "axis); the corrections start from the exact torque of the real shapes")
    leak = {k: leakage_per_radian(exact, harmonic, k) for k in range(1, NEIGHBOURS + 1)}
    notes.append("leakage (not applied: a uniform turn is assumed): a wobble of the relative turn of e rad at k times "
                 "the turn rate would bring up to " + ", ".join(f"{v:.3g} ppm per urad (k = {k})"
                                                                  for k, v in leak.items())
                 + " of the neighbouring harmonics into the measured one")
    notes.append(TWIST_NOTE)
    rounding = 16 * np.finfo(float).eps * abs(G)
    numerical = abs(G) * exact.error / T + rounding
    reached = bool(exact.reached and point.reached)
    if not reached:
        notes.append(f"the torque harmonics did not reach the tolerance {rtol:g}; see the numerical error")
    top = max(harmonic + NEIGHBOURS, 2 * harmonic)
    table = [{"harmonic": n, "amplitude": exact.amplitude(n), "phase": exact.phase(n),
              "amplitude_point": point.amplitude(n)} for n in range(1, top + 1)]
    terms = {"harmonic": harmonic, "acceleration": alpha, "signal_group": src, "amplitude": T,
             "amplitude_error": exact.error, "amplitude_point": Tp, "route": exact.how, "engine_turns": exact.turns,
             "harmonics": table, "leakage_per_rad": {str(k): v for k, v in leak.items()}}
    point_terms = ({"method": "acceleration", "inertia_point": inertia_point, "harmonic": harmonic,
                    "acceleration": alpha, "amplitude_point": Tp, "positions": [], "periods": []}
                   if G_point is not None else None)
    return Reduction(
        method="acceleration", G=float(G), G_point=G_point, corrections=corrections,
        numerical_error=float(numerical), inertia=inertia, inertia_point=inertia_point, fiber_constant=None,
        positions=(), equilibrium=(), torque=(), stiffness=(), offset=None, period_ratio=None, nodes=(),
        state=(float(G),), rtol=rtol, reached=reached, notes=tuple(dict.fromkeys(notes)),
        G_point_all_pairs=G_point, point_terms=point_terms, method_terms=terms)
