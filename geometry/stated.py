"""The standard uncertainties a scene states (`"12.7 +- 0.01 mm"`), listed as read, in SI.

`check` prints them so that a user sees each `+-` was read; the budget and `bias` use the same values
from the scene objects directly.
"""

from __future__ import annotations

from dataclasses import dataclass

from truepull.geometry.bodies import body_parameters
from truepull.geometry.quantities import Measured

SI_UNITS = {"length": "m", "angle": "rad", "mass": "kg", "density": "kg/m^3", "time": "s",
            "gravitational_constant": "m^3 kg^-1 s^-2", "dimensionless": "", "other": "SI"}
"""The SI unit of each kind of stated value."""

MEASUREMENT_KINDS = {"angle": "angle", "period": "time", "decrement": "dimensionless", "fiber_q": "dimensionless",
                     "amplitude": "angle"}
"""Kinds of the [measurement] keys; any other key's values are listed as kind "other" (SI)."""


@dataclass(frozen=True)
class Stated:
    """One stated value: its scene key (e.g. `body[bob].radius`), value and standard uncertainty u in
    SI, and the kind of quantity (a key of SI_UNITS)."""

    key: str
    value: float
    u: float
    kind: str

    @property
    def unit(self) -> str:
        """The SI unit of `value` and `u`."""
        return SI_UNITS[self.kind]

    def to_json(self) -> dict:
        return {"key": self.key, "value": self.value, "u": self.u, "unit": self.unit}


def _kind_of_parameter(name: str) -> str:
    return {"density": "density", "mass": "mass"}.get(name, "length")


def _items(key: str, raw, kind: str):
    """Stated entries of one scene value: a Measured, or a mapping of names to Measured."""
    if isinstance(raw, Measured):
        if raw.u is not None:
            yield Stated(key, float(raw.value), float(raw.u), kind)
    elif isinstance(raw, dict):
        for name, m in raw.items():
            yield from _items(f"{key}.{name}", m, kind)


def stated_uncertainties(scene) -> list[Stated]:
    """Every value of the scene with a stated standard uncertainty, in file order: scene.G, the frame's
    pivot, each body's placement, sizes, density or mass and rotation angle, each position's turn and
    shift, and the measurement's values."""
    out: list[Stated] = list(_items("scene.G", scene.G, "gravitational_constant"))
    for c, u in zip("xyz", scene.frame.pivot_u):
        if u is not None:
            out.append(Stated(f"frame.pivot.{c}", float(scene.frame.pivot["xyz".index(c)]), float(u), "length"))
    for b in scene.bodies:
        spec = getattr(b, "spec", None)
        if spec is None:
            continue
        for name, m in body_parameters(spec).items():
            # most values state no uncertainty: skip those before building their key
            if m is not None and not (isinstance(m, Measured) and m.u is None):
                out.extend(_items(f"body[{b.name}].{name}", m, _kind_of_parameter(name)))
        if not (isinstance(spec.rotate_angle, Measured) and spec.rotate_angle.u is None):
            out.extend(_items(f"body[{b.name}].rotate.angle", spec.rotate_angle, "angle"))
    for p in scene.positions:
        out.extend(_items(f"position[{p.name}].turn", p.turn, "angle"))
        for c, s in zip("xyz", p.shift):
            out.extend(_items(f"position[{p.name}].shift.{c}", s, "length"))
    m = scene.measurement
    if m is not None:
        values = {"angle": m.angle, "period": m.period, "decrement": m.decrement, **dict(m.extra)}
        for name, raw in values.items():
            out.extend(_items(f"measurement.{name}", raw, MEASUREMENT_KINDS.get(name, "other")))
    return out
