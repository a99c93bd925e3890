"""Rigid placements: a rotation then a translation, taking a body's local frame to the world (m, rad)."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

_Z = np.array([0.0, 0.0, 1.0])


def _as_floats(v) -> np.ndarray:
    """A (3,) float array from numbers or Measured values."""
    return np.array([float(getattr(c, "value", c)) for c in v], dtype=float)


def _unit(v) -> np.ndarray:
    v = _as_floats(v)
    n = np.linalg.norm(v)
    if not n > 0:
        raise ValueError("direction vector must not be zero")
    return v / n


def rotvec_matrix(rotvec) -> np.ndarray:
    """The rotation matrix (3x3) of a rotation vector (axis times angle in rad), by Rodrigues' formula
    R = I + sin(t) K + (1 - cos(t)) K^2 (K the cross-product matrix of the unit axis); written here so
    that placing bodies does not import scipy.spatial (about 0.5 s of start-up); tested against
    scipy.spatial.transform.Rotation."""
    v = np.asarray(rotvec, dtype=float).reshape(3)
    t = float(np.linalg.norm(v))
    if t == 0.0:
        return np.eye(3)
    k = v / t
    K = np.array([[0.0, -k[2], k[1]], [k[2], 0.0, -k[0]], [-k[1], k[0], 0.0]])
    return np.eye(3) + math.sin(t) * K + (1.0 - math.cos(t)) * (K @ K)


def rotation_z_to(axis) -> np.ndarray:
    """The shortest rotation (3x3) taking local z to the direction `axis`; a half turn about x for -z."""
    a = _unit(axis)
    cross = np.cross(_Z, a)
    s = np.linalg.norm(cross)
    c = float(np.dot(_Z, a))
    if s < 1e-15:
        if c > 0:
            return np.eye(3)
        return rotvec_matrix([np.pi, 0.0, 0.0])
    angle = np.arctan2(s, c)
    return rotvec_matrix(cross / s * angle)


@dataclass(frozen=True, eq=False)
class Placement:
    """x_world = rotation @ x_local + translation. Arrays are stored read-only; equality by identity
    (use `isclose` to compare values)."""

    rotation: np.ndarray
    translation: np.ndarray

    def __post_init__(self):
        r = np.array(self.rotation, dtype=float, copy=True).reshape(3, 3)
        t = (np.array(self.translation, dtype=float, copy=True) if isinstance(self.translation, np.ndarray)
             else _as_floats(self.translation)).reshape(3)
        r.setflags(write=False)
        t.setflags(write=False)
        object.__setattr__(self, "rotation", r)
        object.__setattr__(self, "translation", t)

    @staticmethod
    def identity() -> "Placement":
        return Placement(np.eye(3), np.zeros(3))

    @staticmethod
    def shift(vector) -> "Placement":
        """A pure translation by `vector` (m)."""
        return Placement(np.eye(3), _as_floats(vector))

    @staticmethod
    def turn_about(pivot, axis, angle: float) -> "Placement":
        """A right-handed rotation by `angle` (rad) about the line through `pivot` along `axis`."""
        r = rotvec_matrix(_unit(axis) * float(angle))
        p = _as_floats(pivot)
        return Placement(r, p - r @ p)

    @staticmethod
    def from_scene(at, axis=None, rotate_axis=None, rotate_angle=0.0) -> "Placement":
        """The scene's placement: local z turned to `axis` (shortest rotation), then the optional
        turn by `rotate_angle` (rad) about `rotate_axis` through the body's reference point, then the
        reference point moved to `at` (m). `at` may hold numbers or Measured values."""
        r = np.eye(3) if axis is None else rotation_z_to(axis)
        angle = float(rotate_angle)
        if rotate_axis is not None and angle != 0.0:
            r = rotvec_matrix(_unit(rotate_axis) * angle) @ r
        return Placement(r, _as_floats(at))

    def apply(self, points) -> np.ndarray:
        """Local points (..., 3) to world points (m)."""
        p = np.asarray(points, dtype=float)
        return p @ self.rotation.T + self.translation

    def apply_vector(self, vectors) -> np.ndarray:
        """Rotate local direction vectors (..., 3) to the world (no translation)."""
        return np.asarray(vectors, dtype=float) @ self.rotation.T

    def apply_tensor(self, tensor) -> np.ndarray:
        """Rotate a local 3x3 tensor to the world: R T R^T."""
        return self.rotation @ np.asarray(tensor, dtype=float) @ self.rotation.T

    def then(self, other: "Placement") -> "Placement":
        """The placement that applies `self` first and then `other`."""
        return Placement(other.rotation @ self.rotation, other.rotation @ self.translation + other.translation)

    def inverse(self) -> "Placement":
        rt = self.rotation.T
        return Placement(rt, -rt @ self.translation)

    def isclose(self, other: "Placement", atol: float = 1e-12) -> bool:
        return bool(np.allclose(self.rotation, other.rotation, atol=atol, rtol=0)
                    and np.allclose(self.translation, other.translation, atol=atol, rtol=0))

    def __repr__(self) -> str:
        from scipy.spatial.transform import Rotation

        rv = Rotation.from_matrix(self.rotation).as_rotvec()
        return f"Placement(rotvec={np.round(rv, 12).tolist()}, translation={self.translation.tolist()})"
