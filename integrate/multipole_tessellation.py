"""The tessellation (chord) error of a multipole series, as the pair engine takes it.

A tessellated part (a STEP file at two chord tolerances, a measured form) is its finer polyhedron;
the pair engine adds, to each pair holding such a part, the change of the pair's values when the part
takes its coarser tessellation (`tessellation.tessellated_pair`). The series does the same per body
pair (i, j) of test and source with a tessellated part: the moments of every tessellated body are
also formed on its coarse shape, and the pair's energy and force coefficients (`series_coefficients`)
on the coarse shapes are subtracted from those on the fine ones. At a turn phi (rad) each pair's
change in torque, stiffness, force and energy is evaluated from those coefficients and the absolute
changes are summed over the pairs (SI: N m, N m/rad, N (Euclidean norm), J). Both series are cut at
the same degree L; the coarse bodies' truncation bound (their own reach and clearance) joins the
series' truncation bounds (`MultipoleSeries.bounds`), so the change of the untruncated pair is
bounded by what is reported.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from truepull.integrate.solid_harmonics import full_m


def is_tessellated(body) -> bool:
    """True for a body whose mesh carries a coarser tessellation (`MeshShape.coarse`)."""
    return getattr(body.shape, "coarse", None) is not None


@dataclass(frozen=True, eq=False)
class SeriesChange:
    """Per body pair with a tessellated part: fine minus coarse energy coefficients `energy_c`
    (P, 2L+1) J and force coefficients `force_c` (P, 3, 2L+1) N (frame axes) over m = -L..L, the coarse
    pairs' truncation bound per quantity `tails` (J, N m, N m/rad, N), and the pairs' names."""

    L: int
    energy_c: np.ndarray
    force_c: np.ndarray
    tails: dict
    pairs: tuple[tuple[str, str], ...]
    reached: bool = True
    notes: tuple[str, ...] = ()

    @property
    def m(self) -> np.ndarray:
        return np.arange(-self.L, self.L + 1)

    def at(self, phi) -> dict:
        """Summed |change| over the pairs at each turn phi (rad) of the source: arrays (N,) for
        "energy", "torque_axis", "stiffness_axis", "force" (the coarse truncation bound not included)."""
        phase = np.exp(-1j * np.outer(np.atleast_1d(np.asarray(phi, float)), self.m))  # (N, 2L+1)
        m = self.m
        energy = np.abs((phase @ self.energy_c.T).real)                       # (N, P)
        torque = np.abs((phase @ (-1j * m * self.energy_c).T).real)
        stiffness = np.abs((phase @ (-(m ** 2) * self.energy_c).T).real)
        force = np.linalg.norm(np.einsum("nm,pkm->npk", phase, self.force_c).real, axis=2)
        return {"energy": energy.sum(axis=1), "torque_axis": torque.sum(axis=1),
                "stiffness_axis": stiffness.sum(axis=1), "force": force.sum(axis=1)}

    def uniform(self) -> dict:
        """Bounds of `at` over every turn: sum over pairs and m of |m|^k |coefficient| (k = 0, 1, 2)."""
        m = np.abs(self.m)
        e = np.abs(self.energy_c)
        f = np.sqrt(np.sum(np.sum(np.abs(self.force_c), axis=2) ** 2, axis=1))  # per pair, |sum_m| <= sum_m |.|
        return {"energy": float(e.sum()), "torque_axis": float((m * e).sum()),
                "stiffness_axis": float((m * m * e).sum()), "force": float(f.sum())}

    def harmonic_errors(self) -> np.ndarray:
        """(L,) the change of the torque's cos and sin coefficients C_m, S_m for m = 1..L (N m): each
        bounded by 2 m sum over pairs |energy change_m| (`MultipoleSeries.torque_harmonics`)."""
        k = np.arange(1, self.L + 1)
        return 2.0 * k * np.abs(self.energy_c[:, self.L + k]).sum(axis=0)


def series_change(G, frame, test_bodies, source_bodies, inner, outer, L: int, moment_rtol: float):
    """The SeriesChange of a series built from `inner` and `outer` (Moments with `per_body`, degree >= L)
    about `frame`, or None when no body is tessellated. Raises MultipoleRefused when a coarse part
    reaches the pivot or its regions interleave (the direct pairs then carry the change)."""
    from truepull.integrate.multipoles import (MultipoleRefused, body_inner_moments, body_outer_moments,
                                               inner_reach, outer_clearance, parts_truncation_bounds,
                                               series_coefficients)
    from truepull.integrate.tessellation import coarse_body

    tess_t = [is_tessellated(b) for b in test_bodies]
    tess_s = [is_tessellated(b) for b in source_bodies]
    if not (any(tess_t) or any(tess_s)):
        return None
    if len(inner.per_body) != len(test_bodies) or len(outer.per_body) != len(source_bodies):
        raise ValueError("series_change needs each body's moments (inner_moments / outer_moments with keep=True)")
    fine_a = [full_m(v[:L + 1, :L + 1]) for v in inner.per_body]
    fine_b = [full_m(v[:L + 1, :L + 1]) for v in outer.per_body]
    coarse_a, coarse_b, reached, notes = list(fine_a), list(fine_b), True, []
    ip, op = [], []
    for i, b in enumerate(test_bodies):
        c = coarse_body(b) if tess_t[i] else b
        if tess_t[i]:
            coarse_a[i] = full_m(body_inner_moments(c, frame, L)[0])
        ip.append((abs(float(c.mass)), inner_reach(c, frame.pivot)))
    for j, b in enumerate(source_bodies):
        c = coarse_body(b) if tess_s[j] else b
        if tess_s[j]:
            v, _, ok = body_outer_moments(c, frame, L, moment_rtol)
            coarse_b[j] = full_m(v)
            if not ok:
                reached = False
                notes.append(f"outer moments of the coarse tessellation of '{b.name}' did not converge")
        op.append((abs(float(c.mass)), outer_clearance(c, frame.pivot)))
    energy, force, names = [], [], []
    tails = {"energy": 0.0, "torque_axis": 0.0, "stiffness_axis": 0.0, "force": 0.0}
    for i, t in enumerate(test_bodies):
        for j, s in enumerate(source_bodies):
            if not (tess_t[i] or tess_s[j]):
                continue
            ef, ff = series_coefficients(G, fine_a[i], fine_b[j])
            ec, fc = series_coefficients(G, coarse_a[i], coarse_b[j])
            energy.append(ef - ec)
            force.append(ff - fc)
            names.append((t.name, s.name))
            tb = parts_truncation_bounds(G, (ip[i],), (op[j],), L)
            if not np.isfinite(tb.torque):
                raise MultipoleRefused(f"the coarse tessellation of '{t.name}' or '{s.name}' leaves no sphere "
                                       "about the pivot between them")
            tails["energy"] += tb.energy
            tails["torque_axis"] += tb.torque
            tails["stiffness_axis"] += tb.stiffness
            tails["force"] += tb.force
    tessellated = [b.name for b, k in zip((*test_bodies, *source_bodies), (*tess_t, *tess_s)) if k]
    notes.append("tessellation error from two chord tolerances (" + ", ".join(f"'{n}'" for n in tessellated) +
                 "): each pair's change against the coarser tessellation added to the error estimates")
    return SeriesChange(L, np.array(energy), np.array(force), tails, tuple(names), reached, tuple(notes))
