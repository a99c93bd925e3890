"""Support functions of placed bodies, and a separating-plane certificate for a pair (m).

The support function of a body in the world direction n (unit) is h(n) = max over the body of n . x: a
closed form for every primitive (of the solid's convex hull: a tube's bore and a shell's cavity do not
change it) and the largest vertex projection for a mesh. Two bodies are strictly apart when some
direction has h_a(n) + h_b(-n) < 0: the plane between them separates their convex hulls, so their
volumes neither meet nor touch. The gap -(h_a(n) + h_b(-n)) is a lower bound on their distance.
"""

from __future__ import annotations

import numpy as np

from truepull.geometry.shapes import Box, Cone, Cylinder, Ellipsoid, MeshShape, Point, Shell, Sphere


def _local_support(shape, n: np.ndarray) -> np.ndarray:
    """h(n) of a shape in its own frame for unit directions n (K, 3), m."""
    if isinstance(shape, Point):
        return np.zeros(n.shape[0])
    if isinstance(shape, (Sphere, Shell)):
        return np.full(n.shape[0], shape.radius)
    if isinstance(shape, Box):
        return np.abs(n) @ (0.5 * np.asarray(shape.size, float))
    if isinstance(shape, Ellipsoid):
        return np.sqrt(((n * np.asarray(shape.radii, float)) ** 2).sum(axis=1))
    if isinstance(shape, Cylinder):  # the rim circles at z = +-length/2
        side = np.sqrt(np.maximum(0.0, 1.0 - n[:, 2] ** 2))
        return 0.5 * shape.length * np.abs(n[:, 2]) + shape.radius * side
    if isinstance(shape, Cone):  # base circle at z = -length/2, top circle at +length/2
        side = np.sqrt(np.maximum(0.0, 1.0 - n[:, 2] ** 2))
        half = 0.5 * shape.length
        return np.maximum(-half * n[:, 2] + shape.radius * side, half * n[:, 2] + shape.radius_top * side)
    if isinstance(shape, MeshShape):
        return (n @ np.asarray(shape.vertices, float).T).max(axis=1)
    raise TypeError(f"no support function for {type(shape).__name__}")


def support(body, directions) -> np.ndarray:
    """h(n) = max over the placed body of n . x for world unit directions (K, 3), m."""
    n = np.asarray(directions, float).reshape(-1, 3)
    pl = body.placement
    return n @ pl.translation + _local_support(body.shape, n @ pl.rotation)


def _axes(body) -> list[np.ndarray]:
    """World directions that matter for a body's hull: its local axes (the symmetry axis is local z)."""
    return [body.placement.rotation[:, k] for k in range(3)]


def separation_gap(a, b) -> float:
    """The largest gap (m) found between planes separating the two bodies' hulls: positive means they
    are strictly apart by at least that much; negative means no separating plane was found among the
    candidates (they may still be apart). Candidates: the line of centres, the axes of both bodies,
    the line of centres with each body's axis removed, and the cross products of axis pairs, then a
    few steps of local improvement from the best of them."""
    ca, cb = a.placement.translation, b.placement.translation
    d = cb - ca
    cand = [d]
    for e in _axes(a) + _axes(b):
        cand += [e, d - (d @ e) * e]
    for e in _axes(a):
        for f in _axes(b):
            cand.append(np.cross(e, f))
    n = np.array(cand, float)
    norm = np.linalg.norm(n, axis=1)
    keep = norm > 1e-12 * max(np.linalg.norm(d), 1e-300)  # drop vanished candidates (parallel axes)
    n = n[keep] / norm[keep, None]
    n = np.vstack([n, -n])

    def gap(dirs):
        return -(support(a, dirs) + support(b, -dirs))

    g = gap(n)
    best = n[np.argmax(g)]
    best_gap = float(g.max())
    # local improvement: perturb the best direction within a shrinking cone
    rng = np.random.default_rng(0)
    step = 0.2
    for _ in range(12):
        trial = best + step * rng.standard_normal((16, 3))
        trial /= np.linalg.norm(trial, axis=1)[:, None]
        gt = gap(trial)
        k = int(np.argmax(gt))
        if gt[k] > best_gap:
            best, best_gap = trial[k], float(gt[k])
        else:
            step *= 0.5
    return best_gap
