"""Which bodies overlap, touch, or (for holes) stick out of the body they are cut from.

Method, per pair: a bounding-sphere and bounding-box prefilter, and a separating plane between the
two convex hulls (support.py), which proves them apart when one is found; otherwise the deepest
point common to both bodies is sought by minimising f(p) = max(d_a(p), d_b(p)) over world points p, with d the signed distance to
each surface (distance.py): f < 0 inside both, so min f < -tol means the volumes intersect
("overlap") and |min f| <= tol means they meet without intersecting ("touch"). Start points are a
dense scrambled-Sobol sample of the region common to both bounding boxes, each refined by
Nelder-Mead. tol = touch_rtol * (size of the pair), about 1e-9 relative by default.

Honest limits: this is sampling plus local search, not a proof. For convex pairs (sphere, box,
solid cylinder, cone, ellipsoid) f is convex and the search finds the true minimum; for tubes,
shells and meshes a very small or very thin overlap, or a touch in a narrow pocket, can be missed.
Holes are checked by sampling points inside them, so a sliver of a hole outside its host can be missed.
"""

from __future__ import annotations

import numpy as np

from truepull.geometry.shapes import Box, Cone, Cylinder, Ellipsoid, MeshShape, Point, Shell, Sphere
from truepull.geometry.support import separation_gap

TOUCH_RTOL = 1e-9
CONVEX = (Sphere, Box, Cone, Ellipsoid)  # and Cylinder without a bore (checked below)


def local_bounds(shape) -> tuple[np.ndarray, np.ndarray]:
    """Axis-aligned box (lo, hi) enclosing the shape in its local frame (m)."""
    if isinstance(shape, Point):
        z = np.zeros(3)
        return z, z.copy()
    if isinstance(shape, (Sphere, Shell)):
        r = np.full(3, shape.radius)
    elif isinstance(shape, Cylinder):
        r = np.array([shape.radius, shape.radius, shape.length / 2])
    elif isinstance(shape, Cone):
        rm = max(shape.radius, shape.radius_top)
        r = np.array([rm, rm, shape.length / 2])
    elif isinstance(shape, Box):
        r = 0.5 * np.asarray(shape.size)
    elif isinstance(shape, Ellipsoid):
        r = np.asarray(shape.radii, dtype=float)
    elif isinstance(shape, MeshShape):
        return shape.vertices.min(axis=0).copy(), shape.vertices.max(axis=0).copy()
    else:
        raise TypeError(f"no bounds for {type(shape).__name__}")
    return -r, r.copy()


def world_bounds(body) -> tuple[np.ndarray, np.ndarray]:
    """Axis-aligned world box (lo, hi) enclosing a placed body (m)."""
    lo, hi = local_bounds(body.shape)
    centre, half = (lo + hi) / 2, (hi - lo) / 2
    c = body.placement.apply(centre)
    h = np.abs(body.placement.rotation) @ half
    return c - h, c + h


def signed_distance(shape, points_local):
    """Signed distance (distance.py), imported on first use."""
    from truepull.geometry.distance import signed_distance as sd

    return sd(shape, points_local)


def _sobol(n: int, seed: int) -> np.ndarray:
    from scipy.stats import qmc

    return qmc.Sobol(3, scramble=True, seed=seed).random(n)


def _pair_function(a, b):
    inv_a, inv_b = a.placement.inverse(), b.placement.inverse()

    def f(points):
        p = np.asarray(points, dtype=float).reshape(-1, 3)
        return np.maximum(signed_distance(a.shape, inv_a.apply(p)), signed_distance(b.shape, inv_b.apply(p)))

    return f


def deepest_common_point(a, b, samples: int = 1024, starts: int = 6, seed: int = 0,
                         enough: float | None = None) -> tuple[float, np.ndarray]:
    """(min over p of max(d_a, d_b), the point) for two bodies, in m; negative = interpenetration depth.
    `enough` (m): stop at the first point found at least this deep inside both (a witness that they
    overlap; the value returned is then that point's, not the minimum). A few obvious points (the
    centres of mass, their midpoint, the middle of the common box) are tried before the sample."""
    f = _pair_function(a, b)
    lo_a, hi_a = world_bounds(a)
    lo_b, hi_b = world_bounds(b)
    scale = max(a.shape.bounding_radius(), b.shape.bounding_radius(), 1e-300)
    pad = 1e-6 * scale
    lo, hi = np.maximum(lo_a, lo_b) - pad, np.minimum(hi_a, hi_b) + pad
    if np.any(lo > hi):  # separate boxes: start between the bodies
        lo, hi = np.minimum(lo, hi), np.maximum(lo, hi)
    obvious = np.vstack([a.com, b.com, (a.com + b.com) / 2, (lo + hi) / 2])
    first = f(obvious)
    k = int(np.argmin(first))
    if enough is not None and first[k] <= -enough:
        return float(first[k]), obvious[k]
    sob = _sobol(samples, seed)
    candidates = np.vstack([lo + sob * (hi - lo), obvious])
    values = np.concatenate([f(candidates[:-len(obvious)]), first])
    order = np.argsort(values)
    best_val, best_p = float(values[order[0]]), candidates[order[0]]
    if enough is not None and best_val <= -enough:
        return best_val, best_p
    tol = TOUCH_RTOL * scale * 1e-2
    from scipy.optimize import minimize

    for idx in order[:starts]:
        x0 = candidates[idx]
        span = max(float(np.max(hi - lo)), scale * 1e-3) * 0.05
        simplex = np.vstack([x0, x0 + np.diag([span] * 3)])
        res = minimize(lambda x: float(f(x)[0]), x0, method="Nelder-Mead",
                       options={"initial_simplex": simplex, "xatol": tol, "fatol": tol, "maxiter": 4000,
                                "maxfev": 8000})
        if res.fun < best_val:
            best_val, best_p = float(res.fun), np.asarray(res.x)
        if best_val < -1e3 * TOUCH_RTOL * scale or (enough is not None and best_val <= -enough):
            break
    return best_val, best_p


def bodies_overlap(a, b, touch_rtol: float = TOUCH_RTOL) -> str | None:
    """'overlap' if the two bodies' volumes intersect, 'touch' if they meet within touch_rtol of their
    size without intersecting, else None. Point bodies overlap a body they lie inside (deeper than
    touch_rtol of the size), touch one on whose surface they lie, and never touch an ellipsoid."""
    ca, ra = a.bounding_sphere()
    cb, rb = b.bounding_sphere()
    scale = max(ra, rb)
    tol = touch_rtol * max(scale, 1e-300)
    if np.linalg.norm(ca - cb) > ra + rb + tol:
        return None
    if isinstance(a.shape, Point) or isinstance(b.shape, Point):
        if isinstance(a.shape, Point) and isinstance(b.shape, Point):
            return None
        point, other = (a, b) if isinstance(a.shape, Point) else (b, a)
        if not other.contains_world(point.com.reshape(1, 3))[0]:
            return None
        if isinstance(other.shape, Ellipsoid):
            return "overlap"
        # a point mass on the surface of a uniform body feels a finite field (potential and field are
        # continuous there): it touches; only a point inside the material overlaps
        d = float(signed_distance(other.shape, other.to_local(point.com.reshape(1, 3)))[0])
        return "overlap" if d < -tol else "touch"
    lo_a, hi_a = world_bounds(a)
    lo_b, hi_b = world_bounds(b)
    if np.any(np.maximum(lo_a, lo_b) > np.minimum(hi_a, hi_b) + tol):
        return None
    if separation_gap(a, b) > tol:  # a plane separates their hulls: a proof, no search needed
        return None
    sphere, other = (a, b) if isinstance(a.shape, Sphere) else (b, a)
    if isinstance(sphere.shape, Sphere) and not isinstance(other.shape, Ellipsoid):
        # exact: a ball meets a body iff the body's distance from the ball's centre is under its radius
        d = float(signed_distance(other.shape, other.to_local(sphere.com.reshape(1, 3)))[0])
        gap = d - sphere.shape.radius
        return "overlap" if gap < -tol else ("touch" if gap <= tol else None)
    convex = all(isinstance(x.shape, CONVEX) or (isinstance(x.shape, Cylinder) and x.shape.inner_radius == 0)
                 or (isinstance(x.shape, MeshShape) and x.shape.is_convex()) for x in (a, b))
    depth, _ = deepest_common_point(a, b, starts=2 if convex else 6, enough=1e3 * tol)
    if depth < -tol:
        return "overlap"
    if depth <= tol:
        return "touch"
    return None


def bounding_spheres(bodies) -> tuple[np.ndarray, np.ndarray]:
    """Centres (N, 3) and radii (N,) in m of the bodies' bounding spheres."""
    spheres = [b.bounding_sphere() for b in bodies]
    c = np.array([s[0] for s in spheres], float).reshape(-1, 3)
    r = np.array([s[1] for s in spheres], float)
    return c, r


def candidate_pairs(bodies, touch_rtol: float = TOUCH_RTOL, between=None) -> list[tuple[int, int]]:
    """Index pairs (i < j, in body order) whose bounding spheres meet (within the touch tolerance): the
    only pairs that can overlap or touch (sphere_pairs on the bodies' bounding spheres).
    `between` (a boolean mask) keeps only pairs with one body inside it and one outside."""
    bodies = list(bodies)
    if len(bodies) < 2:
        return []
    c, r = bounding_spheres(bodies)
    return sphere_pairs(c, r, touch_rtol, between)


DIRECT_PAIRS = 200
"""Up to this many spheres every pair is tested directly (at most 19,900 pairs, well under a millisecond
with numpy), which also spares a small scene the import of scipy.spatial (about 0.3 s of start-up)."""


def sphere_pairs(c, r, touch_rtol: float = TOUCH_RTOL, between=None) -> list[tuple[int, int]]:
    """Index pairs (i < j, ascending) of the spheres (centres c (N, 3), radii r (N,), m) that meet
    within touch_rtol of the larger radius. Up to DIRECT_PAIRS spheres every pair is tested; beyond, a
    k-d tree (scipy.spatial.cKDTree) over the centres finds the candidates in about N log N rather than
    N^2 (`_tree_candidates`). `between` (a boolean mask) keeps only pairs with one sphere inside it and
    one outside."""
    c = np.asarray(c, float).reshape(-1, 3)
    r = np.asarray(r, float)
    n = len(r)
    if n < 2:
        return []
    tol = touch_rtol * np.maximum(r, 1e-300)
    if n <= DIRECT_PAIRS:
        p = np.column_stack(np.triu_indices(n, 1)).astype(np.int64)
    else:
        p = _tree_candidates(c, r, touch_rtol)
        if p is None:
            return []
    d = np.linalg.norm(c[p[:, 0]] - c[p[:, 1]], axis=1)
    keep = d <= r[p[:, 0]] + r[p[:, 1]] + np.maximum(tol[p[:, 0]], tol[p[:, 1]])
    if between is not None:
        m = np.asarray(between, bool)
        keep &= m[p[:, 0]] != m[p[:, 1]]
    return [tuple(x) for x in p[keep].tolist()]


def _tree_candidates(c, r, touch_rtol: float):
    """Candidate pairs (M, 2) (i < j, ascending, each once) of many spheres from k-d trees, a superset
    of the pairs that meet, or None: spheres much larger than the typical one are compared with all
    others directly, so one big body does not widen the tree's search for every small one."""
    from scipy.spatial import cKDTree

    n = len(r)
    big = r > 4.0 * max(float(np.median(r)), 1e-300)
    found = []
    small, large = np.nonzero(~big)[0], np.nonzero(big)[0]
    grow = 1 + 4 * touch_rtol
    for idx in (small, large):  # pairs within each class
        if len(idx) > 1:
            reach = 2.0 * float(r[idx].max()) * grow
            ij = cKDTree(c[idx]).query_pairs(reach, output_type="ndarray")
            if len(ij):
                found.append(idx[ij])
    if len(small) and len(large):  # a large body against the small ones near it
        tree = cKDTree(c[small])
        hits = tree.query_ball_point(c[large], (r[large] + float(r[small].max())) * grow)
        for i, js in zip(large, hits):
            if js:
                found.append(np.column_stack([np.full(len(js), i), small[np.asarray(js, int)]]))
    if not found:
        return None
    p = np.vstack(found).astype(np.int64)
    # each pair once, (i, j) ascending: unique of the one-number keys i * n + j (as a row-wise unique)
    key = np.unique(np.minimum(p[:, 0], p[:, 1]) * n + np.maximum(p[:, 0], p[:, 1]))
    return np.column_stack([key // n, key % n])


def find_overlaps(bodies, touch_rtol: float = TOUCH_RTOL, between=None, spheres=None) -> list[tuple[str, str, str]]:
    """Every pair (name_a, name_b, kind) with kind 'overlap' or 'touch', in body order. Only pairs whose
    bounding spheres meet are examined (candidate_pairs); `between` as there; `spheres` the bodies'
    (centres, radii) when already known (bounding_spheres)."""
    bodies = list(bodies)
    if len(bodies) < 2:
        return []
    c, r = bounding_spheres(bodies) if spheres is None else spheres
    out = []
    for i, j in sphere_pairs(c, r, touch_rtol, between):
        a, b = bodies[i], bodies[j]
        kind = bodies_overlap(a, b, touch_rtol)
        if kind is not None:
            out.append((a.name, b.name, kind))
    return out


def _points_inside(body, n: int, seed: int = 0) -> np.ndarray:
    """About n world points spread through the body's volume (scrambled Sobol, rejection)."""
    lo, hi = local_bounds(body.shape)
    box = np.prod(hi - lo)
    frac = body.volume / box if box > 0 else 1.0
    m = int(min(2**20, max(64, n / max(frac, 1e-3))))
    m = 1 << int(np.ceil(np.log2(m)))
    pts = lo + _sobol(m, seed) * (hi - lo)
    pts = pts[body.shape.contains(pts)]
    return body.placement.apply(pts)


def hole_outside_fraction(hole, hosts, samples: int = 4096) -> float:
    """Fraction (0..1) of sampled points of `hole` that lie in none of the positive bodies `hosts`."""
    pts = _points_inside(hole, samples)
    if len(pts) == 0:
        return 0.0
    covered = np.zeros(len(pts), dtype=bool)
    for h in hosts:
        if h.is_hole or h is hole or isinstance(h.shape, Point):
            continue
        c, r = h.bounding_sphere()
        near = np.linalg.norm(pts - c, axis=1) <= r * (1 + 1e-12)
        if np.any(near & ~covered):
            idx = np.nonzero(near & ~covered)[0]
            covered[idx] = h.contains_world(pts[idx])
    return float(1.0 - covered.mean())


def stray_holes(bodies, samples: int = 4096) -> list[tuple[str, float]]:
    """Holes not wholly inside the positive bodies of their own group: (name, fraction outside)."""
    bodies = list(bodies)
    out = []
    holes = [h for h in bodies if h.is_hole and not isinstance(h.shape, Point)]
    if not holes:
        return out
    c, r = bounding_spheres(bodies)
    for h in holes:
        ch, rh = h.bounding_sphere()
        # the spheres that can meet the hole's (padded), then the exact test on each of those
        near = np.nonzero(np.linalg.norm(c - ch, axis=1) <= (r + rh) * (1 + 1e-9) + 1e-300)[0]
        hosts = [b for b in (bodies[k] for k in near) if b.group == h.group and not b.is_hole
                 and np.linalg.norm(b.bounding_sphere()[0] - ch) <= b.bounding_sphere()[1] + rh]
        frac = hole_outside_fraction(h, hosts, samples)
        if frac > 0:
            out.append((h.name, frac))
    return out
