"""Group against group: the exact interaction beside the point-mass model, with error estimates.

The Python API behind `truepull compare`:
    comparison = compare_groups(scene, test="pendulum", source="attractor", position="A", rtol=1e-9)
    comparison.exact.torque_axis, comparison.point.torque_axis, comparison.error.torque_axis, ...
Every test body is paired with every source body (bodies of other groups are ignored); pair results
are summed. When a total misses the tolerance relative to its own size (for instance a torque that
nearly cancels between pairs), the pairs are recomputed once with the tolerance tightened by the
shortfall, so `reached` speaks for the totals the user reads; but only when refinement can help: where
the rounding bounds alone (which no refinement reduces) already use half the tolerance, the retry is
skipped and the note says so, and the tightening is capped at MAX_TIGHTENING.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np

from truepull.geometry.errors import InputError
from truepull.geometry.overlaps import bodies_overlap
from truepull.integrate import pair_cache
from truepull.integrate.pairs import PairResult, pair_interaction, tolerance_scale_table
from truepull.integrate.point_model import point_pair_values

RTOL_FLOOR = 1e-14
EPS = np.finfo(float).eps
MAX_TIGHTENING = 1e3
"""The retry asks at most this many times less than the first pass (its cost grows with the digits)."""
ROUNDING_SHARE = 0.5
"""No retry when the rounding parts of the errors alone use this share of the tolerance or more."""


@dataclass(frozen=True)
class Quantities:
    """Force (N), torque about the pivot (N m), its axial part (N m), stiffness about the axis
    (N m/rad) and interaction energy (J) on the test group."""

    force: np.ndarray
    torque: np.ndarray
    torque_axis: float
    stiffness_axis: float
    energy: float

    @staticmethod
    def from_values(v, axis) -> "Quantities":
        v = np.asarray(v, float)
        return Quantities(v[0:3].copy(), v[3:6].copy(), float(v[3:6] @ axis), float(v[6]), float(v[7]))

    @staticmethod
    def from_errors(e, axis) -> "Quantities":
        e = np.asarray(e, float)
        return Quantities(e[0:3].copy(), e[3:6].copy(), float(e[3:6] @ np.abs(axis)), float(e[6]), float(e[7]))

    def to_json(self) -> dict:
        return {"force": self.force.tolist(), "torque": self.torque.tolist(), "torque_axis": self.torque_axis,
                "stiffness_axis": self.stiffness_axis, "energy": self.energy}


def _ratio(a, b):
    return float(a / b) if b != 0 else float("nan")


@dataclass(frozen=True)
class Comparison:
    """Exact and point-model interaction of two groups at one position of the scene."""

    position: str | None
    test: str
    source: str
    G: float
    rtol: float
    axis: np.ndarray
    exact: Quantities
    point: Quantities
    error: Quantities
    pairs: tuple[PairResult, ...]
    point_pairs: np.ndarray  # (n_test, n_source, 8)
    reached: bool
    notes: tuple[str, ...] = field(default_factory=tuple)

    @property
    def correction(self) -> dict:
        """exact / point for the torque and stiffness about the axis and each force component."""
        return {
            "torque_axis": _ratio(self.exact.torque_axis, self.point.torque_axis),
            "stiffness_axis": _ratio(self.exact.stiffness_axis, self.point.stiffness_axis),
            "force": [_ratio(a, b) for a, b in zip(self.exact.force, self.point.force)],
        }

    def to_json(self) -> dict:
        """The CONTRACT.md object for `compare --json`."""
        return {
            "position": self.position, "test": self.test, "source": self.source, "G": self.G,
            "exact": self.exact.to_json(), "point": self.point.to_json(), "correction": self.correction,
            "error": {"force": self.error.force.tolist(), "torque_axis": self.error.torque_axis,
                      "stiffness_axis": self.error.stiffness_axis, "torque": self.error.torque.tolist(),
                      "energy": self.error.energy},
            "pairs": [{"test": p.test, "source": p.source, "torque_axis": p.torque_axis(self.axis),
                       "force": p.force.tolist(), "method": p.method} for p in self.pairs],
            "reached": self.reached, "rtol": self.rtol, "energy_error": self.error.energy,
            "notes": list(self.notes),
        }


def check_separated(test_bodies, source_bodies, file=None) -> list[str]:
    """Refuse overlapping test/source bodies (InputError naming both); return notes on touching ones.
    Holes are not checked: a body may sit inside another group's hole."""
    notes = []
    for a in test_bodies:
        for b in source_bodies:
            if a.is_hole or b.is_hole:
                continue
            key = ("overlap", pair_cache.body_key(a), pair_cache.body_key(b))
            kind = pair_cache.lookup(key)
            if kind is None:
                kind = bodies_overlap(a, b) or "apart"
                pair_cache.remember(key, kind)
            if kind == "overlap":
                raise InputError(file, f"body[{a.name}] / body[{b.name}]",
                                 f"'{a.name}' ({a.group}) and '{b.name}' ({b.group}) overlap in volume; "
                                 "the interaction of overlapping bodies is not defined here")
            if kind == "touch":
                notes.append(f"'{a.name}' and '{b.name}' touch: the error estimate shows what was reached")
    return notes


def pair_tolerances(test_bodies, source_bodies, pivot, axis, G, rtol):
    """Absolute tolerances (n_test, n_source, 8) per pair, so that the summed errors stay within rtol of
    the group totals: each pair gets rtol times the smaller of its own point-model size and the group's
    point-model total shared among the pairs (a floor keeps totals that vanish by symmetry workable)."""
    pp = point_pair_values(test_bodies, source_bodies, pivot, axis, G)
    return _tolerances(pp, G * tolerance_scale_table(test_bodies, source_bodies, pivot), rtol)


def _tolerances(pp, own, rtol):
    """pair_tolerances from the point-model pairs pp and their sizes own (n_test, n_source, 8), SI."""
    n = max(pp.shape[0] * pp.shape[1], 1)
    tot = pp.sum(axis=(0, 1)).tolist()
    f, t = _norm3(tot[0:3]), _norm3(tot[3:6])
    group = np.array([f, f, f, t, t, t, abs(tot[6]), abs(tot[7])])
    share = np.maximum(group / n, SYMMETRY_FLOOR * own)
    return rtol * np.minimum(own, share)


def interaction_totals(test_bodies, source_bodies, pivot, axis, G, rtol=1e-9, tols=None):
    """Sum of pair interactions: (values (8,), errors (8,), pairs, reached). `tols` (n_test, n_source, 8)
    absolute per-pair tolerances (default: pair_tolerances)."""
    if tols is None:
        tols = pair_tolerances(test_bodies, source_bodies, pivot, axis, G, rtol)
    pairs = _pair_results(test_bodies, source_bodies, pivot, axis, G, rtol, tols)
    values, errors, _ = _pair_totals(pairs)
    return values, errors, pairs, all(p.reached for p in pairs)


def _pair_results(test_bodies, source_bodies, pivot, axis, G, rtol, tols) -> list[PairResult]:
    """Every pair's result at the tolerances `tols` (n_test, n_source, 8), from the pair memory or computed."""
    # tolerances rounded down to a power of two: a slightly changed scene keeps its other pairs' keys
    tols = np.exp2(np.floor(np.log2(np.maximum(tols, 1e-300))))
    pivot = np.asarray(pivot, float)
    axis = np.asarray(axis, float)
    frame = (pivot.tobytes(), axis.tobytes(), float(G))
    source_keys = [pair_cache.body_key(s) for s in source_bodies]
    pairs = []
    for i, t in enumerate(test_bodies):
        tk = pair_cache.body_key(t)
        for j, s in enumerate(source_bodies):
            key = (tk, source_keys[j], frame + (tols[i, j].tobytes(),))
            result = pair_cache.lookup(key)
            if result is None:
                result = pair_interaction(t, s, pivot, axis, G, rtol, tol=tols[i, j])
                pair_cache.remember(key, result)
            elif result.test != t.name or result.source != s.name:
                result = replace(result, test=t.name, source=s.name)
            pairs.append(result)
    return pairs


def _pair_totals(pairs):
    """(values (8,), errors (8,), parts (8,)) of a list of pair results: the summed values, the summed
    errors with the rounding of the sum, and the sums of the pairs' absolute values."""
    if not pairs:
        return np.zeros(8), np.zeros(8), np.zeros(8)
    each = np.array([p.values for p in pairs])
    parts = np.abs(each).sum(axis=0)
    # absolute pair errors add; so does the rounding of summing the pairs, n ulps of the sum of their
    # sizes (which covers a total that cancels across pairs)
    errors = np.array([p.errors for p in pairs]).sum(axis=0) + len(pairs) * EPS * parts
    return each.sum(axis=0), errors, parts


def rounding_totals(pairs) -> np.ndarray:
    """The part (8,) of interaction_totals' errors that refinement cannot reduce: the pairs' rounding
    parts (zero for a pair that does not say) and the rounding of summing them."""
    known = [p.rounding for p in pairs if p.rounding is not None]
    own = np.sum(known, axis=0) if known else np.zeros(8)
    return own + len(pairs) * EPS * _parts(pairs)


SYMMETRY_FLOOR = 1e-3
"""A pair's tolerance never drops below rtol times this fraction of its own point-model size (force,
and force times lever for torque and stiffness), so that a total that vanishes by symmetry stays
workable; the same floor, summed over the pairs, is where such a total is judged."""

CANCELLATION_FLOOR = 1e-2
"""A total that cancels to below this fraction of the sum of its pairs' sizes (e.g. a torque that
vanishes by symmetry) is judged against this fraction of that sum instead of its own size: its relative
error means nothing, and its absolute error is then held to rtol / 100 of the pairs it is made of."""


def _shortfall(values, errors, axis, rtol, parts=None, scales=None) -> float:
    """How many times the errors of |F|, torque_axis and stiffness_axis exceed rtol of their sizes.
    `parts` (8,): sums of the pairs' absolute values, for the cancellation floor; `scales` (8,): sums of
    the pairs' point-model sizes (pairs.tolerance_scales times G), for the symmetry floor.
    (Eight numbers each: plain floats, not small numpy calls.)"""
    v, e = np.asarray(values, float).tolist(), np.asarray(errors, float).tolist()
    a = np.abs(np.asarray(axis, float)).tolist()
    size_f, size_t, size_k = _norm3(v[0:3]), abs(_dot3(v[3:6], np.asarray(axis, float).tolist())), abs(v[6])
    if parts is not None:
        p = np.asarray(parts, float).tolist()
        size_f = max(size_f, CANCELLATION_FLOOR * _norm3(p[0:3]))
        size_t = max(size_t, CANCELLATION_FLOOR * _dot3(p[3:6], a))
        size_k = max(size_k, CANCELLATION_FLOOR * p[6])
    if scales is not None:
        sc = np.asarray(scales, float).tolist()
        size_f = max(size_f, SYMMETRY_FLOOR * sc[0])
        size_t = max(size_t, SYMMETRY_FLOOR * sc[3])
        size_k = max(size_k, SYMMETRY_FLOOR * sc[6])
    worst = 0.0
    for err, size in ((_norm3(e[0:3]), size_f), (_dot3(e[3:6], a), size_t), (e[6], size_k)):
        if size > 0:
            worst = max(worst, err / (rtol * size))
    return worst


def _norm3(x) -> float:
    return math.sqrt(x[0] * x[0] + x[1] * x[1] + x[2] * x[2])


def _dot3(x, y) -> float:
    return x[0] * y[0] + x[1] * y[1] + x[2] * y[2]


def _parts(pairs) -> np.ndarray:
    return np.sum([np.abs(p.values) for p in pairs], axis=0) if pairs else np.zeros(8)


def compare_groups(scene, test: str = "pendulum", source: str = "attractor", position=None,
                   rtol: float = 1e-9) -> Comparison:
    """Exact and point-model interaction of group `test` with group `source` at `position`
    (a position name, a Position, or None for the scene as drawn)."""
    if not rtol > 0:
        raise InputError(scene.path, "--rtol", "the tolerance must be greater than zero")
    sc = scene.at_position(position) if position is not None else scene
    tb, sb = sc.group(test), sc.group(source)
    for name, bodies in ((test, tb), (source, sb)):
        if not bodies:
            known = ", ".join(scene.groups()) or "none"
            raise InputError(scene.path, "group", f"no bodies in group '{name}' (groups: {known})")
    if test == source:
        raise InputError(scene.path, "--source", "test and source groups must differ")
    pivot, axis, G = sc.frame.pivot, sc.frame.axis, sc.G.value
    notes = check_separated(tb, sb, scene.path)
    # the point model's pairs and their sizes, once: for the pair tolerances, the floors and the output
    pp = point_pair_values(tb, sb, pivot, axis, G)
    sizes = tolerance_scale_table(tb, sb, pivot)
    pairs = _pair_results(tb, sb, pivot, axis, G, rtol, _tolerances(pp, G * sizes, rtol))
    values, errors, parts = _pair_totals(pairs)
    scales = G * sizes.sum(axis=(0, 1))  # the pairs' point-model sizes summed (8,), SI
    short = _shortfall(values, errors, axis, rtol, parts, scales)
    futile = False
    if short > 1.0:
        # only the refinement parts can be reduced by asking more; when the rounding parts alone fill
        # ROUNDING_SHARE of the tolerance, a retry would cost much and gain nothing
        rounding = rounding_totals(pairs)
        short_rounding = _shortfall(values, rounding, axis, rtol, parts, scales)
        futile = short_rounding >= ROUNDING_SHARE
        if not futile:
            short_refine = _shortfall(values, np.maximum(errors - rounding, 0.0), axis, rtol, parts, scales)
            room = 1.0 - short_rounding
            tighter = max(rtol * room / (4.0 * max(short_refine, 1.0)), rtol / MAX_TIGHTENING, RTOL_FLOOR)
            pairs = _pair_results(tb, sb, pivot, axis, G, tighter, _tolerances(pp, G * sizes, tighter))
            values, errors, parts = _pair_totals(pairs)
            short = _shortfall(values, errors, axis, rtol, parts, scales)
    reached = all(p.reached for p in pairs)
    if short > 1.0:
        reached = False
        why = ""
        if futile:
            from truepull.integrate.tessellation import TESSELLATION_METHOD

            tessellated = any(p.method.endswith(TESSELLATION_METHOD) for p in pairs)
            why = (" (mostly what refinement cannot reduce: rounding bounds and a tessellated part's change "
                   "against its coarser tessellation)" if tessellated
                   else " (mostly rounding bounds, which refinement cannot reduce)")
        notes.append(f"tolerance {rtol:g} not reached: errors are up to {short:.3g} times the tolerance{why}")
    pos_name = sc.position if position is not None else None
    return Comparison(
        position=pos_name, test=test, source=source, G=G, rtol=rtol, axis=np.asarray(axis, float),
        exact=Quantities.from_values(values, axis), point=Quantities.from_values(pp.sum(axis=(0, 1)), axis),
        error=Quantities.from_errors(errors, axis), pairs=tuple(pairs), point_pairs=pp, reached=bool(reached),
        notes=tuple(notes))


def compare_positions(scene, test="pendulum", source="attractor", rtol=1e-9, position=None) -> list[Comparison]:
    """One Comparison per position in file order (or the one named), or one for the scene as drawn."""
    if position is not None:
        return [compare_groups(scene, test, source, position, rtol)]
    if not scene.positions:
        return [compare_groups(scene, test, source, None, rtol)]
    return [compare_groups(scene, test, source, p.name, rtol) for p in scene.positions]


def group_field(bodies, points, G, rtol=1e-9):
    """Potential U (J/kg) and field g (m/s^2) of a group of bodies at world points (N, 3), with
    absolute error estimates (err_U, err_g): field_at_points' values without the gradient tensor, so
    density gradients are included (and points inside a gradient body refused)."""
    from truepull.integrate.field_at_points import group_field_at_points

    f = group_field_at_points(bodies, points, G, rtol, gradient=False)
    return f.U, f.g, f.err_U, f.err_g
