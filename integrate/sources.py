"""The field of one source body at arbitrary world points: U (J/kg), g (m/s^2) and error estimates.

Exact closed forms where physics gives them: point, sphere and shell (shell theorem), box (prism
closed form), mesh (homogeneous polyhedron), ellipsoid (Carlson symmetric integrals). Cylinders,
tubes and cones use the surface-integral form of `surface_field`, adaptively refined per point.
Closed forms carry a rounding-level error estimate: the box's and mesh's kernels give rigorous
bounds at every point (cancellation of their terms included; the mesh's in the same numba pass as
its field, for any number of faces); point, shell and ellipsoid CLOSED_FORM_RTOL of the size.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from truepull.integrate.patches import BAND, PatchSet, body_patches

CLOSED_FORM_RTOL = 1e-14
"""Relative rounding error of the point, shell and ellipsoid closed forms (measured about 1e-15 against
brute-force quadrature); the prism and polyhedron kernels state their own bounds."""

EPS = np.finfo(float).eps

CLOSED_FORM_KINDS = ("point", "sphere", "shell", "box", "mesh", "ellipsoid")
POINTLIKE_KINDS = ("point", "sphere", "shell")
GRADIENT_KINDS = POINTLIKE_KINDS + ("box", "mesh")


@dataclass(eq=False)
class SourceField:
    """Field of a placed body; `method` names how it is computed."""

    body: object
    G: float
    _patches: PatchSet | None = field(default=None, repr=False)
    _poly: object = field(default=None, repr=False)
    _mesh_bounds: tuple | None = field(default=None, repr=False)   # (points, eU, eg, eT) of the last mesh field

    @property
    def kind(self) -> str:
        return self.body.shape.kind

    @property
    def closed_form(self) -> bool:
        return self.kind in CLOSED_FORM_KINDS

    @property
    def method(self) -> str:
        return {
            "point": "point field",
            "sphere": "point field (shell theorem)",
            "shell": "shell theorem",
            "box": "prism closed form",
            "mesh": "polyhedron closed form",
            "ellipsoid": "ellipsoid closed form",
            "cylinder": "band field (closed form along generators, graded Gauss in azimuth)",
            "cone": "band field (closed form along generators, graded Gauss in azimuth)",
        }.get(self.kind, "adaptive surface quadrature")

    def patches(self) -> PatchSet:
        if self._patches is None:
            self._patches = body_patches(self.body)
        return self._patches

    def _local(self, points):
        pl = self.body.placement
        return (np.asarray(points, float) - pl.translation) @ pl.rotation

    def _world_field(self, g_local):
        return g_local @ self.body.placement.rotation.T

    def field(self, points, tol_u: float = 0.0, tol_g: float = 0.0):
        """(U, g, err_U, err_g) at world points (N, 3): potential J/kg, field m/s^2 and absolute error
        estimates. tol_u, tol_g: absolute tolerances for the adaptive fallback (others ignore them)."""
        U, g, dU, dg, rU, rg = self.field_with_differences(points, tol_u, tol_g)
        return U, g, np.abs(dU) + rU, np.linalg.norm(dg, axis=1) + rg

    def field_with_differences(self, points, tol_u: float = 0.0, tol_g: float = 0.0):
        """(U, g, dU, dg, rU, rg): dU (N,), dg (N, 3) signed refinement differences (finer minus coarser
        rule; zero for closed forms) and rU, rg (N,) rounding-error magnitudes."""
        points = np.ascontiguousarray(points, float).reshape(-1, 3)
        b = self.body
        kind = self.kind
        if kind in POINTLIKE_KINDS:
            from truepull.integrate.field_point import point_field, shell_field

            if kind == "shell":
                U, g = shell_field(points, b.com, b.shape.radius, b.shape.inner_radius, b.mass, self.G)
            else:
                U, g = point_field(points, b.com[None, :], np.array([b.mass]), self.G)
            return self._closed(U, g)
        if kind == "box":
            from truepull.integrate.field_prism import prism_field

            U, gl = prism_field(self._local(points), 0.5 * np.asarray(b.shape.size, float), b.density, self.G)
            g = self._world_field(gl)
            eU, eg = self._kernel_bounds(points)
            return U, g, np.zeros_like(U), np.zeros_like(g), eU, eg + 4.0 * EPS * np.linalg.norm(g, axis=1)
        elif kind == "mesh":
            from truepull.integrate.field_polyhedron import polyhedron_field_and_bounds

            # the field and its rigorous rounding bounds in one pass (about 1.7 times the field alone);
            # the bounds are kept for a `rounding_bounds` call at the same points (the gradient's)
            U, gl, eU, eg, eT = polyhedron_field_and_bounds(self._local(points), self.poly(), b.density,
                                                            self.G, self._frame_shift(points))
            self._mesh_bounds = (points.copy(), eU, eg, eT)
            g = self._world_field(gl)
            return U, g, np.zeros_like(U), np.zeros_like(g), eU, eg + 4.0 * EPS * np.linalg.norm(g, axis=1)
        elif kind == "ellipsoid":
            from truepull.integrate.field_ellipsoid import ellipsoid_field

            U, gl = ellipsoid_field(self._local(points), np.asarray(b.shape.radii, float), b.density, self.G)
            g = self._world_field(gl)
        elif np.all(self.patches().kinds == BAND):
            from truepull.integrate.field_band import band_field

            return band_field(points, self.patches(), b.density, self.G)
        else:
            from truepull.integrate.surface_field import surface_field

            U, g, eU, eg, ok = surface_field(points, self.patches(), b.density, self.G, tol_u, tol_g)
            self.last_ok = bool(np.all(ok))
            return U, g, np.zeros_like(U), np.zeros_like(g), eU, eg
        return self._closed(U, g)

    def poly(self):
        """The mesh's PolyhedronData (built once per body)."""
        if self._poly is None:
            from truepull.integrate.field_polyhedron import PolyhedronData
            from truepull.integrate.pair_cache import per_body

            # kept with the body: every pair the body is in, and every call, share it
            self._poly = per_body(self.body, "polyhedron", lambda b: PolyhedronData(
                np.asarray(b.shape.vertices, float), np.asarray(b.shape.faces)))
        return self._poly

    def _frame_shift(self, points):
        """How far (m) the change to the body's frame may move each world point by rounding: a few
        ulps of the larger of the point and the translation."""
        return 4.0 * EPS * (np.abs(points).max(axis=1) + np.abs(self.body.placement.translation).max())

    def _kernel_bounds(self, points):
        """Rigorous rounding bounds (eU (N,), eg (N,)) of a box's kernel at world points, the frame
        change included (see rounding_bounds; the rotation of g is added by the caller)."""
        from truepull.integrate.field_prism import prism_rounding_bounds

        b = self.body
        eU, eg, _ = prism_rounding_bounds(self._local(points), 0.5 * np.asarray(b.shape.size, float),
                                          b.density, self.G, self._frame_shift(points))
        return eU, eg

    @staticmethod
    def _closed(U, g, rtol=CLOSED_FORM_RTOL):
        """A closed-form result: no refinement difference, rounding `rtol` (scalar or per point) of the size."""
        return (U, g, np.zeros_like(U), np.zeros_like(g), rtol * np.abs(U), rtol * np.linalg.norm(g, axis=1))

    def rounding_bounds(self, points, U=None, g=None, T=None):
        """Absolute error bounds (eU (N,) J/kg, eg (N,) m/s^2, eT (N,) 1/s^2, the last two as vector
        and Frobenius norms) of `field` and `gradient` of a closed-form source with a gradient (point,
        sphere, shell, box, mesh) at world points (N, 3). They bound the error where the closed form's
        terms cancel (far away, where the field vanishes by symmetry, next to edges), unlike the
        relative estimates of `field` for points, shells and ellipsoids (for boxes and meshes `field`
        carries the same bounds on U and g). U, g, T: the
        values at `points` if already computed (else they are computed here)."""
        points = np.ascontiguousarray(points, float).reshape(-1, 3)
        b = self.body
        eps = np.finfo(float).eps
        # the change to the body's frame rounds the point by a few ulps of the larger of the two
        shift = 4.0 * eps * (np.abs(points).max(axis=1) + np.abs(b.placement.translation).max())
        if U is None or g is None:
            U, g, _, _ = self.field(points)
        if T is None:
            T = self.gradient(points)
        if self.kind in POINTLIKE_KINDS:
            nT = np.linalg.norm(T, axis=(1, 2))
            gn = np.linalg.norm(g, axis=1)
            r = np.maximum(np.linalg.norm(points - b.com, axis=1), 1e-300)
            # a single term each: relative rounding, plus the point's own rounding (|grad| <= 3|.|/r)
            return (CLOSED_FORM_RTOL * np.abs(U) + shift * gn, CLOSED_FORM_RTOL * gn + shift * nT,
                    CLOSED_FORM_RTOL * nT + shift * 3.0 * nT / r)
        local = self._local(points)
        if self.kind == "box":
            from truepull.integrate.field_prism import prism_rounding_bounds

            eU, eg, eT = prism_rounding_bounds(local, 0.5 * np.asarray(b.shape.size, float),
                                               b.density, self.G, shift)
        elif self.kind == "mesh":
            from truepull.integrate.field_polyhedron import polyhedron_rounding_bounds

            last = self._mesh_bounds
            if last is not None and last[0].shape == points.shape and np.array_equal(last[0], points):
                eU, eg, eT = last[1:]
            else:
                eU, eg, eT = polyhedron_rounding_bounds(local, self.poly(), b.density, self.G, shift)
        else:
            raise ValueError(f"no closed-form gradient for a {self.kind}")
        # the rotation back to world axes: a few ulps of the rotated vector and tensor
        eg = eg + 4.0 * eps * np.linalg.norm(g, axis=1)
        eT = eT + 8.0 * eps * np.linalg.norm(T, axis=(1, 2))
        return eU, eg, eT

    def distance(self, points) -> np.ndarray:
        """Distance (m) from world points (N, 3) to the source's surface (signed: negative inside)."""
        from truepull.geometry.distance import signed_distance

        return signed_distance(self.body.shape, self._local(np.asarray(points, float).reshape(-1, 3)))

    def gradient(self, points):
        """Gradient tensor T_ij = d g_i / d x_j (N, 3, 3), 1/s^2, world axes, of a point, sphere, shell,
        box or mesh source (closed forms)."""
        b = self.body
        points = np.ascontiguousarray(points, float).reshape(-1, 3)
        if self.kind in POINTLIKE_KINDS:
            from truepull.integrate.field_point import point_gradient, shell_gradient

            if self.kind == "shell":
                return shell_gradient(points, b.com, b.shape.radius, b.shape.inner_radius, b.mass, self.G)
            return point_gradient(points, b.com[None, :], np.array([b.mass]), self.G)
        R = b.placement.rotation
        if self.kind == "box":
            from truepull.integrate.field_prism import prism_gradient

            T = prism_gradient(self._local(points), 0.5 * np.asarray(b.shape.size, float), b.density, self.G)
        elif self.kind == "mesh":
            from truepull.integrate.field_polyhedron import polyhedron_gradient

            T = polyhedron_gradient(self._local(points), self.poly(), b.density, self.G)
        else:
            raise ValueError(f"no closed-form gradient for a {self.kind}")
        return np.einsum("ij,njk,lk->nil", R, T, R)
