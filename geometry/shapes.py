"""Uniform solid shapes in their own local frame, with closed-form mass properties.

Local frame: the body's reference point is the origin. Cylinder, cone and ellipsoid have their
symmetry axis along local z; a cone's base (radius `radius`) is at z = -length/2 and its top
(radius `radius_top`) at z = +length/2; a box is centred with its edges along local x, y, z.
All lengths in metres; mass properties are for density 1 kg/m^3 (so "mass" = volume, in kg).
`inertia_unit_density()` is the 3x3 inertia tensor about the centroid, in the local frame.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import ClassVar

import numpy as np
from numpy.polynomial import Polynomial

PI = math.pi


def _points(points_local) -> np.ndarray:
    p = np.asarray(points_local, dtype=float)
    if p.ndim == 1:
        p = p.reshape(1, 3)
    return p


def _diag(ixx: float, iyy: float, izz: float) -> np.ndarray:
    return np.diag([float(ixx), float(iyy), float(izz)])


class _ShapeBase:
    """Shared behaviour: size parameters by scene key and replacing one of them."""

    kind: ClassVar[str] = ""
    SIZE_KEYS: ClassVar[tuple[str, ...]] = ()

    def size_params(self) -> dict[str, float]:
        """The scene's size keys of this shape and their SI values (m)."""
        return {k: float(getattr(self, k)) for k in self.SIZE_KEYS}

    def with_size(self, key: str, value: float):
        """A new shape with the one size key `key` set to `value` (m)."""
        if key not in self.SIZE_KEYS:
            raise KeyError(f"{self.kind} has no size parameter '{key}' (has: {', '.join(self.SIZE_KEYS) or 'none'})")
        return replace(self, **{key: float(value)})

    def mass_properties(self) -> tuple[float, np.ndarray, np.ndarray]:
        """(volume m^3, centroid (3,) m, inertia about centroid for density 1) in one call."""
        return self.volume(), self.centroid(), self.inertia_unit_density()


@dataclass(frozen=True)
class Point(_ShapeBase):
    """A point mass: no volume, no inertia of its own; its mass is stated on the body."""

    kind: ClassVar[str] = "point"

    def volume(self) -> float:
        return 0.0

    def centroid(self) -> np.ndarray:
        return np.zeros(3)

    def inertia_unit_density(self) -> np.ndarray:
        return np.zeros((3, 3))

    def bounding_radius(self) -> float:
        return 0.0

    def contains(self, points_local) -> np.ndarray:
        return np.zeros(len(_points(points_local)), dtype=bool)


@dataclass(frozen=True)
class Sphere(_ShapeBase):
    """Solid sphere of radius `radius` (m), centred."""

    radius: float
    kind: ClassVar[str] = "sphere"
    SIZE_KEYS: ClassVar[tuple[str, ...]] = ("radius",)

    def volume(self) -> float:
        return 4.0 / 3.0 * PI * self.radius**3

    def centroid(self) -> np.ndarray:
        return np.zeros(3)

    def inertia_unit_density(self) -> np.ndarray:
        i = 0.4 * self.volume() * self.radius**2
        return _diag(i, i, i)

    def bounding_radius(self) -> float:
        return float(self.radius)

    def contains(self, points_local) -> np.ndarray:
        p = _points(points_local)
        return np.einsum("ij,ij->i", p, p) <= self.radius**2


@dataclass(frozen=True)
class Shell(_ShapeBase):
    """Thick spherical shell: outer radius `radius`, inner radius `inner_radius` (m), centred."""

    radius: float
    inner_radius: float
    kind: ClassVar[str] = "shell"
    SIZE_KEYS: ClassVar[tuple[str, ...]] = ("radius", "inner_radius")

    def volume(self) -> float:
        return 4.0 / 3.0 * PI * (self.radius**3 - self.inner_radius**3)

    def centroid(self) -> np.ndarray:
        return np.zeros(3)

    def inertia_unit_density(self) -> np.ndarray:
        # integral of (2/3) r^2 dV over the shell = (8 pi / 15) (R^5 - r^5)
        i = 8.0 * PI / 15.0 * (self.radius**5 - self.inner_radius**5)
        return _diag(i, i, i)

    def bounding_radius(self) -> float:
        return float(self.radius)

    def contains(self, points_local) -> np.ndarray:
        p = _points(points_local)
        r2 = np.einsum("ij,ij->i", p, p)
        return (r2 <= self.radius**2) & (r2 >= self.inner_radius**2)


@dataclass(frozen=True)
class Cylinder(_ShapeBase):
    """Solid cylinder or tube along local z: outer `radius`, `length`, `inner_radius` (0 = solid), m."""

    radius: float
    length: float
    inner_radius: float = 0.0
    kind: ClassVar[str] = "cylinder"
    SIZE_KEYS: ClassVar[tuple[str, ...]] = ("radius", "length", "inner_radius")

    def volume(self) -> float:
        return PI * (self.radius**2 - self.inner_radius**2) * self.length

    def centroid(self) -> np.ndarray:
        return np.zeros(3)

    def inertia_unit_density(self) -> np.ndarray:
        m = self.volume()
        s = self.radius**2 + self.inner_radius**2
        ixx = m * (3.0 * s + self.length**2) / 12.0
        return _diag(ixx, ixx, m * s / 2.0)

    def bounding_radius(self) -> float:
        return math.hypot(self.radius, self.length / 2.0)

    def contains(self, points_local) -> np.ndarray:
        p = _points(points_local)
        rho2 = p[:, 0] ** 2 + p[:, 1] ** 2
        return (np.abs(p[:, 2]) <= self.length / 2.0) & (rho2 <= self.radius**2) & (rho2 >= self.inner_radius**2)


@dataclass(frozen=True)
class Box(_ShapeBase):
    """Rectangular block, centred, edges `size` = (x, y, z) along local axes (m)."""

    size: tuple[float, float, float]
    kind: ClassVar[str] = "box"
    SIZE_KEYS: ClassVar[tuple[str, ...]] = ("size.x", "size.y", "size.z")

    def __post_init__(self):
        object.__setattr__(self, "size", tuple(float(s) for s in self.size))
        if len(self.size) != 3:
            raise ValueError("box size needs 3 edges")

    def size_params(self) -> dict[str, float]:
        return {"size.x": self.size[0], "size.y": self.size[1], "size.z": self.size[2]}

    def with_size(self, key: str, value: float):
        if key not in self.SIZE_KEYS:
            raise KeyError(f"box has no size parameter '{key}' (has: {', '.join(self.SIZE_KEYS)})")
        s = list(self.size)
        s["xyz".index(key[-1])] = float(value)
        return Box(tuple(s))

    def volume(self) -> float:
        a, b, c = self.size
        return a * b * c

    def centroid(self) -> np.ndarray:
        return np.zeros(3)

    def inertia_unit_density(self) -> np.ndarray:
        a, b, c = self.size
        m = self.volume()
        return _diag(m * (b * b + c * c) / 12.0, m * (a * a + c * c) / 12.0, m * (a * a + b * b) / 12.0)

    def bounding_radius(self) -> float:
        return 0.5 * math.sqrt(sum(s * s for s in self.size))

    def contains(self, points_local) -> np.ndarray:
        p = _points(points_local)
        return np.all(np.abs(p) <= 0.5 * np.asarray(self.size), axis=1)


@dataclass(frozen=True)
class Cone(_ShapeBase):
    """Cone or frustum along local z: base radius `radius` at z = -length/2, top radius
    `radius_top` (0 = a pointed cone) at z = +length/2 (m)."""

    radius: float
    length: float
    radius_top: float = 0.0
    kind: ClassVar[str] = "cone"
    SIZE_KEYS: ClassVar[tuple[str, ...]] = ("radius", "length", "radius_top")

    def _profile(self) -> Polynomial:
        """Radius as a polynomial in s = height above the base (0..length)."""
        return Polynomial([self.radius, (self.radius_top - self.radius) / self.length])

    def _slice_integrals(self) -> tuple[float, float, float, float]:
        """Exact integrals over the height s in [0, L] of the disc slices:
        (volume, first moment in s, integral of s^2 dV, integral of rho^2 dV)."""
        r = self._profile()
        area = PI * r**2
        s = Polynomial([0.0, 1.0])
        L = self.length

        def integral(poly):
            q = poly.integ()
            return float(q(L) - q(0.0))

        vol = integral(area)
        first = integral(area * s)
        second = integral(area * s * s)
        rho2 = integral(PI * r**4 / 2.0)  # a disc of radius r: integral of rho^2 dA = pi r^4 / 2
        return vol, first, second, rho2

    def volume(self) -> float:
        R1, R2, L = self.radius, self.radius_top, self.length
        return PI * L * (R1 * R1 + R1 * R2 + R2 * R2) / 3.0

    def centroid(self) -> np.ndarray:
        R1, R2, L = self.radius, self.radius_top, self.length
        above_base = L * (R1 * R1 + 2 * R1 * R2 + 3 * R2 * R2) / (4.0 * (R1 * R1 + R1 * R2 + R2 * R2))
        return np.array([0.0, 0.0, above_base - L / 2.0])

    def inertia_unit_density(self) -> np.ndarray:
        vol, first, second, rho2 = self._slice_integrals()
        sc = first / vol
        z2_about_centroid = second - vol * sc * sc  # integral of (s - sc)^2 dV
        izz = rho2
        ixx = rho2 / 2.0 + z2_about_centroid  # integral of (x^2 + z^2) dV, with x^2 = rho^2 / 2 by symmetry
        return _diag(ixx, ixx, izz)

    def bounding_radius(self) -> float:
        # distance^2 = z^2 + r(z)^2 is convex in z along the side, so the rims are farthest
        return math.hypot(max(self.radius, self.radius_top), self.length / 2.0)

    def contains(self, points_local) -> np.ndarray:
        p = _points(points_local)
        z = p[:, 2]
        s = z + self.length / 2.0
        r = self.radius + (self.radius_top - self.radius) * s / self.length
        rho2 = p[:, 0] ** 2 + p[:, 1] ** 2
        return (np.abs(z) <= self.length / 2.0) & (rho2 <= r * r)


@dataclass(frozen=True)
class Ellipsoid(_ShapeBase):
    """Solid ellipsoid, centred, semi-axes `radii` = (a, b, c) along local x, y, z (m)."""

    radii: tuple[float, float, float]
    kind: ClassVar[str] = "ellipsoid"
    SIZE_KEYS: ClassVar[tuple[str, ...]] = ("radii.a", "radii.b", "radii.c")

    def __post_init__(self):
        object.__setattr__(self, "radii", tuple(float(s) for s in self.radii))
        if len(self.radii) != 3:
            raise ValueError("ellipsoid needs 3 semi-axes")

    def size_params(self) -> dict[str, float]:
        return {"radii.a": self.radii[0], "radii.b": self.radii[1], "radii.c": self.radii[2]}

    def with_size(self, key: str, value: float):
        if key not in self.SIZE_KEYS:
            raise KeyError(f"ellipsoid has no size parameter '{key}' (has: {', '.join(self.SIZE_KEYS)})")
        r = list(self.radii)
        r["abc".index(key[-1])] = float(value)
        return Ellipsoid(tuple(r))

    def volume(self) -> float:
        a, b, c = self.radii
        return 4.0 / 3.0 * PI * a * b * c

    def centroid(self) -> np.ndarray:
        return np.zeros(3)

    def inertia_unit_density(self) -> np.ndarray:
        a, b, c = self.radii
        m = self.volume()
        return _diag(m * (b * b + c * c) / 5.0, m * (a * a + c * c) / 5.0, m * (a * a + b * b) / 5.0)

    def bounding_radius(self) -> float:
        return float(max(self.radii))

    def contains(self, points_local) -> np.ndarray:
        p = _points(points_local)
        return np.sum((p / np.asarray(self.radii)) ** 2, axis=1) <= 1.0


@dataclass(frozen=True, eq=False)
class MeshShape(_ShapeBase):
    """A closed, outward-wound triangle mesh: `vertices` (V, 3) in metres in the local frame (the
    file's origin), `faces` (F, 3) vertex indices; `file` is where it came from. Arrays are stored
    read-only; equality and hashing are by identity. Mass properties from trimesh (density 1).
    `inverted` records that the file was wound inside-out and its faces were reversed on loading.
    `coarse`: for a tessellated CAD surface, the same part tessellated at a coarser chord tolerance
    (the engine reports the change as the tessellation error), else None."""

    vertices: np.ndarray
    faces: np.ndarray
    file: str = ""
    inverted: bool = False
    coarse: object = None
    _props: dict = field(default_factory=dict, init=False, repr=False, compare=False)
    kind: ClassVar[str] = "mesh"

    def __post_init__(self):
        v = np.array(self.vertices, dtype=float, copy=True)
        f = np.array(self.faces, dtype=np.int64, copy=True)
        if v.ndim != 2 or v.shape[1] != 3 or f.ndim != 2 or f.shape[1] != 3:
            raise ValueError("mesh needs vertices (V, 3) and faces (F, 3)")
        v.setflags(write=False)
        f.setflags(write=False)
        object.__setattr__(self, "vertices", v)
        object.__setattr__(self, "faces", f)

    def __repr__(self) -> str:
        return f"MeshShape(file={self.file!r}, vertices={len(self.vertices)}, faces={len(self.faces)})"

    def trimesh(self):
        """A trimesh.Trimesh of this mesh (unprocessed, so vertex order is kept)."""
        import trimesh

        return trimesh.Trimesh(vertices=np.array(self.vertices), faces=np.array(self.faces), process=False)

    def _mass(self) -> dict:
        if "volume" not in self._props:
            mp = self.trimesh().mass_properties  # density 1; moment_inertia is about the centre of mass
            self._props.update(volume=float(mp["volume"]), centroid=np.array(mp["center_mass"], dtype=float),
                               inertia=np.array(mp["inertia"], dtype=float))
        return self._props

    def volume(self) -> float:
        return self._mass()["volume"]

    def centroid(self) -> np.ndarray:
        return self._mass()["centroid"].copy()

    def inertia_unit_density(self) -> np.ndarray:
        return self._mass()["inertia"].copy()

    def bounding_radius(self) -> float:
        return float(np.sqrt(np.max(np.einsum("ij,ij->i", self.vertices, self.vertices))))

    def triangles(self) -> np.ndarray:
        """(F, 3, 3) vertex coordinates of every face (m), read-only, C-contiguous."""
        if "triangles" not in self._props:
            t = np.ascontiguousarray(self.vertices[self.faces])
            t.setflags(write=False)
            self._props["triangles"] = t
        return self._props["triangles"]

    def is_convex(self) -> bool:
        if "convex" not in self._props:
            self._props["convex"] = bool(self.trimesh().is_convex)
        return self._props["convex"]

    def contains(self, points_local) -> np.ndarray:
        """Inside test by the generalized winding number (about 1 inside, 0 outside)."""
        from truepull.geometry.winding import winding_numbers

        p = _points(points_local)
        if len(p) == 0:
            return np.zeros(0, dtype=bool)
        return winding_numbers(p, self.triangles()) > 0.5

    def size_params(self) -> dict[str, float]:
        return {}

    def with_size(self, key: str, value: float):
        raise KeyError(f"a mesh has no size parameters (asked for '{key}')")


SHAPES: dict[str, type] = {cls.kind: cls for cls in (Point, Sphere, Shell, Cylinder, Box, Cone, Ellipsoid, MeshShape)}
"""Scene shape name -> shape class."""

SIZE_KEYS: dict[str, tuple[str, ...]] = {kind: cls.SIZE_KEYS for kind, cls in SHAPES.items()}
"""Scene shape name -> its size keys (as used by bias rows and spec_with)."""


def shape_from_size(kind: str, size: dict[str, float]):
    """Build a primitive shape from its scene name and SI size keys (missing optional keys take defaults)."""
    if kind == "point":
        return Point()
    if kind == "sphere":
        return Sphere(size["radius"])
    if kind == "shell":
        return Shell(size["radius"], size["inner_radius"])
    if kind == "cylinder":
        return Cylinder(size["radius"], size["length"], size.get("inner_radius", 0.0))
    if kind == "box":
        return Box((size["size.x"], size["size.y"], size["size.z"]))
    if kind == "cone":
        return Cone(size["radius"], size["length"], size.get("radius_top", 0.0))
    if kind == "ellipsoid":
        return Ellipsoid((size["radii.a"], size["radii.b"], size["radii.c"]))
    raise KeyError(f"no primitive shape called '{kind}'")
