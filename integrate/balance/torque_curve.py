"""The exact axial torque on the pendulum as it turns about the fiber: engine samples and the Hermite
polynomial through them.

theta (rad) is a right-handed turn of the test group (the pendulum) about the frame axis through the
pivot, away from the pose the scene draws (after the position's own move of the attractor). All
values are per unit G: torque / G in kg^2 m^-1 (N m per m^3 kg^-1 s^-2), stiffness / G
= -d(torque / G)/d(theta) per rad, energy / G in kg^2 m^-1.

The engine gives torque and stiffness (its slope) at each sampled angle, so the curve is the Hermite
interpolant through m samples, a polynomial of degree 2m - 1. For the small turns of a torsion balance
(mrad against a torque curve that changes over tenths of a radian) its interpolation error is far
below the engine tolerance; see reduction.py for how the samples are placed.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.polynomial import Polynomial

from truepull.integrate.interaction import interaction_totals


@dataclass(frozen=True)
class PoseSample:
    """Engine result per unit G at one turn `theta` of the pendulum at one position, with the engine's
    absolute error estimates and whether it reached its tolerance."""

    theta: float
    torque: float
    stiffness: float
    energy: float
    torque_error: float
    stiffness_error: float
    reached: bool


def turned_scene(scene, position, test: str, theta: float):
    """The scene at `position` (a name or None) with the group `test` turned by theta (rad) about the
    frame axis through the pivot."""
    sc = scene.at_position(position) if position is not None else scene
    if theta == 0.0:
        return sc
    turn = sc.frame.turn(theta)
    return sc.with_bodies(b.moved(turn) if b.group == test else b for b in sc.bodies)


def sample_pose(scene, position, theta: float, test: str = "pendulum", source: str = "attractor",
                rtol: float = 1e-9) -> PoseSample:
    """The exact torque, stiffness and energy per unit G on `test` from `source` with the pendulum
    turned by theta (rad) at `position`."""
    sc = turned_scene(scene, position, test, float(theta))
    axis = sc.frame.axis
    values, errors, _pairs, reached = interaction_totals(sc.group(test), sc.group(source), sc.frame.pivot,
                                                         axis, 1.0, rtol)
    return PoseSample(theta=float(theta), torque=float(values[3:6] @ axis), stiffness=float(values[6]),
                      energy=float(values[7]), torque_error=float(errors[3:6] @ np.abs(axis)),
                      stiffness_error=float(errors[6]), reached=bool(reached))


def plan_nodes(candidates, gap: float) -> tuple[float, ...]:
    """Sample angles from candidates in priority order, dropping any closer than `gap` (rad) to one
    already taken (close samples add nothing and make the interpolant ill-conditioned)."""
    out: list[float] = []
    for c in candidates:
        c = float(c)
        if all(abs(c - o) >= gap for o in out):
            out.append(c)
    return tuple(sorted(out))


@dataclass(frozen=True, eq=False)
class TorqueCurve:
    """Torque per unit G against the pendulum's turn theta, through `samples` (sorted by theta)."""

    position: str | None
    samples: tuple[PoseSample, ...]

    def __post_init__(self):
        if not self.samples:
            raise ValueError("a torque curve needs at least one sample")
        s = tuple(sorted(self.samples, key=lambda p: p.theta))
        object.__setattr__(self, "samples", s)
        theta = np.array([p.theta for p in s])
        centre = float(theta.mean())
        scale = float(np.max(np.abs(theta - centre))) if len(s) > 1 else 1.0
        t = (theta - centre) / scale
        n_coef = 2 * len(s)  # value and slope at each sample
        rows = np.zeros((n_coef, n_coef))
        rhs = np.zeros(n_coef)
        j = np.arange(n_coef)
        for i, (ti, p) in enumerate(zip(t, s)):
            rows[2 * i] = ti ** j
            rhs[2 * i] = p.torque
            rows[2 * i + 1, 1:] = j[1:] * ti ** (j[1:] - 1) / scale
            rhs[2 * i + 1] = -p.stiffness
        coef = np.linalg.solve(rows, rhs)
        object.__setattr__(self, "_in_t", Polynomial(coef))  # in t = (theta - centre) / scale
        object.__setattr__(self, "_centre", centre)
        object.__setattr__(self, "_scale", scale)

    @property
    def nodes(self) -> tuple[float, ...]:
        return tuple(p.theta for p in self.samples)

    @property
    def reached(self) -> bool:
        return all(p.reached for p in self.samples)

    def _t(self, theta):
        return (np.asarray(theta, dtype=float) - self._centre) / self._scale

    def torque(self, theta):
        """Torque per unit G at theta (rad)."""
        return self._in_t(self._t(theta))

    def stiffness(self, theta):
        """Stiffness per unit G, -d(torque)/d(theta), at theta (rad)."""
        return -self._in_t.deriv(1)(self._t(theta)) / self._scale

    def stiffness_slope(self, theta):
        """d(stiffness)/d(theta) per unit G at theta."""
        return -self._in_t.deriv(2)(self._t(theta)) / self._scale**2

    def about(self, theta0: float) -> Polynomial:
        """The torque per unit G as a polynomial in x = theta - theta0."""
        return self._in_t(Polynomial([(theta0 - self._centre) / self._scale, 1.0 / self._scale]))

    def max_errors(self) -> tuple[float, float]:
        """Largest engine error estimates (torque, stiffness) among the samples."""
        return (max(p.torque_error for p in self.samples), max(p.stiffness_error for p in self.samples))


def sample_curve(scene, position, nodes, test="pendulum", source="attractor", rtol=1e-9,
                 cache: dict | None = None) -> TorqueCurve:
    """Engine samples at `nodes` (rad) and the curve through them; `cache` maps (position, theta) to
    samples already computed for this scene."""
    samples = []
    for theta in nodes:
        key = (position, float(theta))
        sample = cache.get(key) if cache is not None else None
        if sample is None:
            sample = sample_pose(scene, position, float(theta), test, source, rtol)
            if cache is not None:
                cache[key] = sample
        samples.append(sample)
    return TorqueCurve(position, tuple(samples))


def curve_span(curve: TorqueCurve) -> float:
    """Width (rad) of the sampled range (0 for one sample)."""
    n = curve.nodes
    return float(n[-1] - n[0]) if len(n) > 1 else 0.0
