"""Bodies: a shape, where it is, and what it is made of; signed mass properties in the world frame.

A `BodySpec` is the body as the scene states it (values with uncertainties, SI); `build_body` turns
it into a `Body` (SI floats and arrays). A hole or void (negative density, or `subtract = true`)
carries negative mass and negative inertia so that sums over a group give the net body.
Units: m, kg, kg/m^3, rad; inertia in kg m^2.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from truepull.geometry.materials import MATERIALS, material_key
from truepull.geometry.placement import Placement
from truepull.geometry.quantities import Measured
from truepull.geometry.shapes import SIZE_KEYS, MeshShape, Point, shape_from_size

POINTLIKE = ("point", "sphere", "shell")
"""Shapes whose external field is exactly a point's, and which feel no torque about their centre."""


@dataclass(frozen=True, eq=False)
class BodySpec:
    """A body as written in the scene, converted to SI.

    `size` maps the scene's size keys to values: radius, length, inner_radius, radius_top;
    a box's edges as "size.x", "size.y", "size.z"; an ellipsoid's semi-axes as "radii.a", "radii.b",
    "radii.c"; a mesh has none (its shape is `mesh`, loaded from `file` in `file_units`).
    Exactly one of density / material / mass is set. Equality and hashing are by identity."""

    name: str
    group: str
    shape_kind: str
    size: dict[str, Measured]
    at: tuple[Measured, Measured, Measured]
    axis: tuple[float, float, float] | None = None
    rotate_axis: tuple[float, float, float] | None = None
    rotate_angle: Measured = Measured(0.0)
    density: Measured | None = None
    material: str | None = None
    mass: Measured | None = None
    subtract: bool = False
    mesh: MeshShape | None = None
    file: str | None = None
    file_units: str | None = None
    scene_file: str | None = None
    density_gradient: tuple[Measured, Measured, Measured] | None = None
    expansion: Measured | None = None
    temperature: Measured | None = None
    reference_temperature: float = 20.0
    fixed_point: tuple[float, float, float] = (0.0, 0.0, 0.0)

    def thermal_scale(self) -> float:
        """s = 1 + alpha (T - T_ref): every length of the body scales by s about `fixed_point`
        (1 without a temperature or an expansion coefficient). alpha 1/K, temperatures degC."""
        if self.expansion is None or self.temperature is None:
            return 1.0
        return 1.0 + self.expansion.value * (self.temperature.value - self.reference_temperature)

    def expansion_coefficient(self) -> Measured | None:
        """The body's `expansion`, else its material's (with the table's u), else None."""
        if self.expansion is not None:
            return self.expansion
        if self.material is not None:
            m = MATERIALS[material_key(self.material)]
            return Measured(m.alpha, m.u_alpha)
        return None

    def stated_density(self) -> Measured | None:
        """The density the scene states (directly or by material), without the hole sign; None if mass is given."""
        if self.density is not None:
            return self.density
        if self.material is not None:
            return Measured(MATERIALS[material_key(self.material)][0], None)
        return None


@dataclass(frozen=True, eq=False)
class Body:
    """A placed body. `density` kg/m^3 (negative for a hole) is its uniform part; for a `point` body the
    mass is held in `point_mass` (kg, negative for a subtracted point) and `density` is 0.
    `gradient` (3,) kg/m^4, in the body's LOCAL axes (so it turns with the body), or None: the density
    is then density + gradient . x_local, x_local measured from the reference point (`at`); a hole's
    gradient carries the hole's sign. Mass, centre of mass and inertia include the linear part."""

    name: str
    group: str
    shape: object
    placement: Placement
    density: float
    spec: BodySpec | None = None
    point_mass: float = 0.0
    gradient: np.ndarray | None = None
    _cache: dict = field(default_factory=dict, init=False, repr=False, compare=False)

    # --- intrinsic properties -------------------------------------------------------------
    @property
    def kind(self) -> str:
        return self.shape.kind

    @property
    def volume(self) -> float:
        """Geometric volume (m^3), always >= 0 (also for holes)."""
        return float(self.shape.volume())

    @property
    def has_gradient(self) -> bool:
        return self.gradient is not None

    def uniform_part(self) -> "Body":
        """The body without its density gradient (the uniform part, density `density`)."""
        return self if self.gradient is None else replace(self, gradient=None)

    def _linear_moments(self):
        """(mass (kg), first moment (3,) kg m, third-moment tensor (3, 3) kg m^2) of the linear part,
        local axes about the reference point, by an exact polynomial volume rule (degree 3)."""
        if "linear" not in self._cache:
            from truepull.integrate.linear_density import linear_moments

            self._cache["linear"] = linear_moments(self.shape, self.gradient)
        return self._cache["linear"]

    @property
    def uniform_mass(self) -> float:
        """Signed mass (kg) of the uniform part (the stated mass or density times volume)."""
        if isinstance(self.shape, Point):
            return float(self.point_mass)
        return self.density * self.volume

    @property
    def mass(self) -> float:
        """Signed mass (kg): negative for a hole; includes the linear density part."""
        if isinstance(self.shape, Point):
            return float(self.point_mass)
        if self.gradient is not None:
            return self.density * self.volume + self._linear_moments()[0]
        return self.density * self.volume

    @property
    def is_hole(self) -> bool:
        return self.mass < 0

    @property
    def is_pointlike(self) -> bool:
        """True for point, sphere and shell: the field outside is a point's (shell theorem)."""
        return self.shape.kind in POINTLIKE

    # --- world-frame mass properties ------------------------------------------------------
    @property
    def com(self) -> np.ndarray:
        """Centre of mass in the world (m)."""
        if self.gradient is not None:
            return self.placement.apply(self._com_local())
        return self.placement.apply(self.shape.centroid())

    def _com_local(self) -> np.ndarray:
        m1, f1, _ = self._linear_moments()
        m0 = self.density * self.volume
        return (m0 * np.asarray(self.shape.centroid(), float) + f1) / (m0 + m1)

    @property
    def inertia_com(self) -> np.ndarray:
        """Signed inertia tensor about the centre of mass, world axes (kg m^2): R (rho I_local) R^T."""
        if "inertia_com" not in self._cache:
            if isinstance(self.shape, Point):
                i = np.zeros((3, 3))
            elif self.gradient is not None:
                i = self.placement.apply_tensor(self._inertia_local_com())
                i = 0.5 * (i + i.T)
            else:
                i = self.placement.apply_tensor(self.density * self.shape.inertia_unit_density())
                i = 0.5 * (i + i.T)
            i.setflags(write=False)
            self._cache["inertia_com"] = i
        return self._cache["inertia_com"].copy()

    def _inertia_local_com(self) -> np.ndarray:
        """Local-axes inertia about the centre of mass of uniform plus linear part (kg m^2)."""
        eye = np.eye(3)
        c = np.asarray(self.shape.centroid(), float)
        m0 = self.density * self.volume
        i0 = self.density * self.shape.inertia_unit_density() + m0 * (c @ c * eye - np.outer(c, c))
        m1, _, m3 = self._linear_moments()
        i_origin = i0 + np.trace(m3) * eye - m3
        d = self._com_local()
        return i_origin - (m0 + m1) * (d @ d * eye - np.outer(d, d))

    def inertia_tensor_about(self, point) -> np.ndarray:
        """Signed inertia tensor about `point` (world, m), world axes, by the parallel-axis theorem."""
        d = self.com - np.asarray(point, dtype=float)
        return self.inertia_com + self.mass * (np.dot(d, d) * np.eye(3) - np.outer(d, d))

    def inertia_about(self, point, axis) -> float:
        """Moment of inertia (kg m^2, signed) about the line through `point` along `axis`."""
        n = np.asarray(axis, dtype=float)
        n = n / np.linalg.norm(n)
        return float(n @ self.inertia_tensor_about(point) @ n)

    # --- geometry in the world ------------------------------------------------------------
    def bounding_sphere(self) -> tuple[np.ndarray, float]:
        """(centre (3,), radius) in m of a sphere about the reference point enclosing the whole body."""
        return self.placement.translation.copy(), float(self.shape.bounding_radius())

    def contains_world(self, points) -> np.ndarray:
        """Which world points (N, 3) lie inside (or on) the body."""
        return self.shape.contains(self.placement.inverse().apply(np.asarray(points, dtype=float).reshape(-1, 3)))

    def to_local(self, points) -> np.ndarray:
        return self.placement.inverse().apply(points)

    def moved(self, placement: Placement) -> "Body":
        """The same body moved rigidly by a further world placement (applied after its own).
        `spec` still describes the body as written in the scene."""
        return replace(self, placement=self.placement.then(placement))

    def with_density(self, density: float) -> "Body":
        return replace(self, density=float(density))

    def __repr__(self) -> str:
        return f"Body({self.name!r}, group={self.group!r}, shape={self.shape!r}, mass={self.mass:.6g} kg)"


def build_shape(spec: BodySpec):
    """The shape object of a spec."""
    if spec.shape_kind == "mesh":
        if spec.mesh is None:
            raise ValueError(f"body {spec.name}: mesh body without a loaded mesh")
        return spec.mesh
    return shape_from_size(spec.shape_kind, {k: v.value for k, v in spec.size.items()})


def _scaled_shape(shape, s: float):
    """The shape with every length times s."""
    if s == 1.0 or isinstance(shape, Point):
        return shape
    if isinstance(shape, MeshShape):
        coarse = None if shape.coarse is None else _scaled_shape(shape.coarse, s)
        vertices = np.asarray(shape.vertices, float) * s
        if getattr(shape, "form", None) is not None:        # a measured form keeps its fit, noting the scale
            return replace(shape, vertices=vertices, coarse=coarse, scale=shape.scale * s)
        return MeshShape(vertices, shape.faces, shape.file, shape.inverted, coarse)
    return shape_from_size(shape.kind, {k: v * s for k, v in shape.size_params().items()})


def build_body(spec: BodySpec) -> Body:
    """Build a Body from its spec: shape, placement and density (mass given -> density = mass/volume).
    At a temperature other than the reference, sizes and the reference point scale by
    s = spec.thermal_scale() about spec.fixed_point, the mass fixed (density / s^3, gradient / s^4)."""
    s = spec.thermal_scale()
    shape = _scaled_shape(build_shape(spec), s)
    at = spec.at
    if s != 1.0:
        p = np.asarray(spec.fixed_point, float)
        at = tuple(p + s * (np.array([float(a.value) if hasattr(a, "value") else float(a) for a in at]) - p))
    placement = Placement.from_scene(at, spec.axis, spec.rotate_axis, spec.rotate_angle.value)
    sign = -1.0 if spec.subtract else 1.0
    if spec.shape_kind == "point":
        if spec.mass is None:
            raise ValueError(f"body {spec.name}: a point body needs a mass")
        return Body(spec.name, spec.group, shape, placement, 0.0, spec, point_mass=sign * spec.mass.value)
    if spec.mass is not None:
        density = spec.mass.value / shape.volume()
    else:
        density = spec.stated_density().value / s**3
    if spec.subtract:
        density = -abs(density)
    gradient = None
    if spec.density_gradient is not None and any(c.value != 0 for c in spec.density_gradient):
        # stated in scene (world) axes at the body's placement; kept in local axes, hole sign included
        gw = np.array([c.value for c in spec.density_gradient], float)
        gradient = (-1.0 if spec.subtract else 1.0) * (placement.rotation.T @ gw) / s**4
        gradient.setflags(write=False)
    return Body(spec.name, spec.group, shape, placement, float(density), spec, gradient=gradient)


def density_parameter(spec: BodySpec) -> str:
    """'mass' when the scene states the mass (always for a point), otherwise 'density'."""
    return "mass" if spec.mass is not None else "density"


def body_parameters(spec: BodySpec) -> dict[str, Measured]:
    """The body's parameters in bias order: at.x, at.y, at.z, each size key, then density or mass.
    Values in SI with the scene's standard uncertainties (None where it states none). Density is
    the stated (positive) density, also for holes."""
    out: dict[str, Measured] = {f"at.{c}": m for c, m in zip("xyz", spec.at)}
    for key in SIZE_KEYS.get(spec.shape_kind, ()):
        if key in spec.size:
            out[key] = spec.size[key]
    if spec.mass is not None:
        out["mass"] = spec.mass
    else:
        out["density"] = spec.stated_density()
    if spec.density_gradient is not None:
        for c, m in zip("xyz", spec.density_gradient):
            out[f"density_gradient.{c}"] = m
    if spec.temperature is not None and spec.expansion is not None:
        out["expansion"] = spec.expansion
    return out


def spec_with(spec: BodySpec, param: str, value: float) -> BodySpec:
    """A copy of `spec` with ONE parameter (named as in body_parameters) set to `value` (SI); the
    stated uncertainty is kept. Setting 'density' on a material body replaces the material."""
    value = float(value)
    if param.startswith("at.") and param[3:] in ("x", "y", "z") and len(param) == 4:
        i = "xyz".index(param[3])
        at = list(spec.at)
        at[i] = Measured(value, at[i].u)
        return replace(spec, at=tuple(at))
    if param in SIZE_KEYS.get(spec.shape_kind, ()):
        size = dict(spec.size)
        old = size.get(param)
        size[param] = Measured(value, old.u if old is not None else None)
        return replace(spec, size=size)
    if param == "density" and spec.mass is None and spec.shape_kind != "point":
        old = spec.stated_density()
        return replace(spec, density=Measured(value, old.u if old is not None else None), material=None)
    if param.startswith("density_gradient.") and param[-1] in "xyz" and len(param) == 18:
        i = "xyz".index(param[-1])
        old = list(spec.density_gradient or (Measured(0.0),) * 3)
        old[i] = Measured(value, old[i].u)
        return replace(spec, density_gradient=tuple(old))
    if param == "expansion" and spec.expansion is not None:
        return replace(spec, expansion=Measured(value, spec.expansion.u))
    if param == "mass" and spec.mass is not None:
        return replace(spec, mass=Measured(value, spec.mass.u))
    raise KeyError(f"body {spec.name} has no parameter '{param}' (has: {', '.join(body_parameters(spec))})")
