"""Whether bodies meet on the way from one position to the next (each end may be clear while the path is not).

The path between two positions of the same group: the turn about the frame axis interpolated the
shorter way round (a change of 350 deg is taken as -10 deg) and the shift linearly, both in step
with one parameter s in [0, 1]. SI: m, rad.

Method, per pair (moving body, body of another group): interval halving with a proof of clearance.
Between parameters s and s' every point of the moving body moves at most
r_far |theta(s) - theta(s')| + |shift(s) - shift(s')|, with r_far the largest distance of the body
from the frame axis (bounding sphere), because an arc is no shorter than its chord. So an interval
is proved clear when, at its midpoint, the bounding spheres or a plane separating the two hulls
(support.separation_gap) leave a gap larger than that reach over half the interval. Intervals not
proved clear are halved; at each midpoint the overlap test of overlaps.py decides whether the
bodies meet there. Halving stops at intervals whose reach is below `resolution` (relative to the
smaller body's size); such a remaining interval is reported as a meeting only where the overlap
test found one (for non-convex bodies, whose hulls may cross while they do not, that last step is
the overlap test's sampling, not a proof).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from truepull.geometry.overlaps import TOUCH_RTOL, bodies_overlap, bounding_spheres, sphere_pairs
from truepull.geometry.placement import Placement
from truepull.geometry.shapes import Point
from truepull.geometry.support import separation_gap

RESOLUTION = 1e-2
"""Halving stops when a body moves less than this fraction of the smaller body's size over an interval."""


@dataclass(frozen=True)
class PathMeeting:
    """Bodies `moving` (of the moved group) and `other` meet on the way from position `start` to `end`,
    first near the turn `turn` (rad, of the group, as the scene counts it) and shift `shift` (m)."""

    start: str
    end: str
    moving: str
    other: str
    kind: str  # "overlap" or "touch"
    turn: float
    shift: np.ndarray


def shorter_turn(a: float, b: float) -> float:
    """b - a taken the shorter way round, in (-pi, pi] (rad)."""
    d = (b - a + np.pi) % (2 * np.pi) - np.pi
    return float(np.pi if d == -np.pi else d)


def _placement(frame, turn: float, shift) -> Placement:
    return frame.turn(turn).then(Placement.shift(shift))


def _far_from_axis(body, frame) -> float:
    """Largest distance (m) of any point of the body (as drawn) from the frame axis."""
    c, r = body.bounding_sphere()
    v = c - frame.pivot
    return float(np.linalg.norm(v - (v @ frame.axis) * frame.axis)) + r


def _pair_meeting(a, b, frame, t0, dt, s0, ds, resolution, budget):
    """First parameter s in [0, 1] where a (moved by the path) meets b, with the kind; else None."""
    ra, rb = a.bounding_sphere()[1], b.bounding_sphere()[1]
    size = max(min(ra, rb), 1e-300)
    r_far = _far_from_axis(a, frame)
    speed = r_far * abs(dt) + float(np.linalg.norm(ds))  # reach per unit of s
    stack = [(0.0, 1.0)]
    while stack:
        lo, hi = stack.pop()
        mid = 0.5 * (lo + hi)
        moved = a.moved(_placement(frame, t0 + mid * dt, s0 + mid * ds))
        reach = 0.5 * (hi - lo) * speed
        ca, cb = moved.bounding_sphere()[0], b.bounding_sphere()[0]
        if np.linalg.norm(ca - cb) - ra - rb > reach:
            continue
        if not isinstance(a.shape, Point) and not isinstance(b.shape, Point) and separation_gap(moved, b) > reach:
            continue
        budget[0] -= 1
        kind = bodies_overlap(moved, b)
        if kind == "overlap" or budget[0] <= 0:
            return (mid, kind) if kind else None
        if reach <= resolution * size:
            if kind == "touch":
                return mid, kind
            continue
        stack += [(mid, hi), (lo, mid)]  # earlier half first
    return None


def path_meetings(scene, resolution: float = RESOLUTION, max_tests: int = 4000) -> list[PathMeeting]:
    """Meetings on the path between each two consecutive positions of the same group (file order)."""
    out = []
    frame = scene.frame
    positions = list(scene.positions)
    for p, q in zip(positions, positions[1:]):
        if p.group != q.group:
            continue
        t0, dt = p.turn.value, shorter_turn(p.turn.value, q.turn.value)
        s0 = np.array([s.value for s in p.shift], float)
        ds = np.array([s.value for s in q.shift], float) - s0
        if dt == 0 and not np.any(ds):
            continue
        movers = [b for b in scene.bodies if b.group == p.group]
        others = [b for b in scene.bodies if b.group != p.group]
        if not movers or not others:
            continue
        for a, b in _near_pairs(movers, others, frame, t0, dt, s0, ds):
            budget = [max_tests]
            hit = _pair_meeting(a, b, frame, t0, dt, s0, ds, resolution, budget)
            if hit is not None:
                s, kind = hit
                out.append(PathMeeting(p.name, q.name, a.name, b.name, kind, t0 + s * dt, s0 + s * ds))
    return out


def _near_pairs(movers, others, frame, t0, dt, s0, ds):
    """(mover, other) pairs whose bounding spheres can meet somewhere on the path: each mover's sphere
    swept along the path is enclosed by spheres at a few path points, each grown by the reach to the
    next, and the k-d tree of sphere_pairs finds the others near any of them. The spheres are moved
    as arrays, padded by 1e-12 of their size and distance from the origin (for rounding)."""
    speed = max(_far_from_axis(a, frame) for a in movers) * abs(dt) + float(np.linalg.norm(ds))
    c_move, r_move = bounding_spheres(movers)
    c_other, r_other = bounding_spheres(others)
    size = max(float(r_move.max()), float(r_other.max()), 1e-300)
    n = int(min(2048, max(2, np.ceil(speed / size) + 1)))
    s = np.linspace(0.0, 1.0, n)
    half = 0.5 * speed / (n - 1)
    r = np.concatenate([r_move + half, r_other])
    mask = np.concatenate([np.ones(len(movers), bool), np.zeros(len(others), bool)])
    found = set()
    for sk in s:
        move = _placement(frame, t0 + sk * dt, s0 + sk * ds)
        c = np.vstack([c_move @ move.rotation.T + move.translation, c_other])
        pad = 1e-12 * (r + np.linalg.norm(c, axis=1) + abs(half))
        for i, j in sphere_pairs(c, r + pad, TOUCH_RTOL, between=mask):
            found.add((i, j - len(movers)))
    return [(movers[i], others[j]) for i, j in sorted(found)]
