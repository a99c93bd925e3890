"""The speed goals of close, interleaved curved bodies in one run (on demand:
`python tests/benchmarks/bench_goals.py`, add `--quick` to skip the 16^3 brute force).

Every figure is printed beside two references, as a ratio (reference time / our time):
- a plain numpy brute force: volume Gauss-Legendre products over both bodies of every pair (order n
  per axis, n^3 nodes a body), at n = 8, 12, 16; its error against the engine at 1e-12, and the order
  (and time, n^6 scaled from the largest run) it would need for 1e-6, fitted to the errors measured;
- what a geophysicist would do: each attractor cylinder tessellated into a closed polyhedron
  (trimesh, 64 and 256 sides) through the polyhedron closed form, its own (tessellation) error shown.
Scene: the drums-like fixture (tests/scene_fixtures.py). Rows: one value at rtol 1e-9 and 1e-6 (warm,
pair memory cleared), a 41-value turn of the attractor 0:40:1 deg at 1e-6 and 1e-9 (direct
integration, here in this process), the per-pair cost of a point beside a box through the whole
`compare_groups` (one pair, and 100 points around the box) and the prism closed form alone, and a
whole `truepull compare` process (best of 3).
"""

from __future__ import annotations

import math
import os
import subprocess
import sys
import tempfile
import time

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(__file__), ".."))
sys.path.insert(0, os.path.dirname(__file__))
from bench_pairs import brute_force_torque  # noqa: E402
from scene_fixtures import DRUMS_LIKE  # noqa: E402

from truepull.geometry.scene import load_scene_text  # noqa: E402
from truepull.integrate import pair_cache  # noqa: E402
from truepull.integrate.interaction import compare_groups  # noqa: E402
from truepull.integrate.scans import Sweep, scan  # noqa: E402

POINT_BESIDE_BOX = """
[[body]]
name = "p"
group = "pendulum"
shape = "point"
mass = 1.0
at = [0.3, 0.1, 0.05]
[[body]]
name = "block"
group = "attractor"
shape = "box"
size = [0.2, 0.2, 0.2]
density = 11340
"""


def points_beside_box(n, seed=5):
    """POINT_BESIDE_BOX's box with n unit point masses around it, 0.25-0.6 m from its centre (seeded)."""
    rng = np.random.default_rng(seed)
    parts = [POINT_BESIDE_BOX.split("[[body]]")[2]]
    for i in range(n):
        u = rng.normal(size=3)
        p = u / np.linalg.norm(u) * rng.uniform(0.25, 0.6)
        parts.insert(0, f'\nname = "p{i}"\ngroup = "pendulum"\nshape = "point"\nmass = 1.0\nat = {p.tolist()}\n')
    return "".join("[[body]]" + x for x in parts)


def best(fn, repeat=2):
    fn()
    t_best, out = math.inf, None
    for _ in range(repeat):
        pair_cache.clear()
        t = time.perf_counter()
        out = fn()
        t_best = min(t_best, time.perf_counter() - t)
    return t_best, out


def tessellated_torque(scene, sides):
    """Torque about the axis with each attractor cylinder replaced by a `sides`-sided prism mesh."""
    import trimesh
    from dataclasses import replace

    from truepull.geometry.shapes import MeshShape
    from truepull.integrate.interaction import interaction_totals

    bodies = []
    for b in scene.group("attractor"):
        m = trimesh.creation.cylinder(radius=b.shape.radius, height=b.shape.length, sections=sides)
        bodies.append(replace(b, shape=MeshShape(np.asarray(m.vertices), np.asarray(m.faces), "cylinder")))
    v, _, _, _ = interaction_totals(scene.group("pendulum"), bodies, scene.frame.pivot, scene.frame.axis,
                                    scene.G.value, 1e-9)
    return float(v[3:6] @ scene.frame.axis)


def main():
    quick = "--quick" in sys.argv
    sc = load_scene_text(DRUMS_LIKE, "drums-like")
    ref = compare_groups(sc, rtol=1e-12).exact.torque_axis
    rows = []

    # the references
    brute = []
    for n in ((8, 12) if quick else (8, 12, 16)):
        t0 = time.perf_counter()
        tz = brute_force_torque(sc, n)
        brute.append((n, time.perf_counter() - t0, abs(tz - ref) / abs(ref)))
    ns, ts, es = (np.array(x) for x in zip(*brute))
    slope, icpt = np.polyfit(ns, np.log10(es), 1)
    n6 = int(math.ceil((-6 - icpt) / slope)) if slope < 0 else None
    t6 = ts[-1] * (n6 / ns[-1]) ** 6 if n6 else math.inf
    tess = []
    for sides in (64, 256):
        t, tz = best(lambda: tessellated_torque(sc, sides), repeat=1)
        tess.append((sides, t, abs(tz - ref) / abs(ref)))
    brute_1e6 = t6
    tess_t = tess[-1][1]

    def row(name, t, note="", ratios=True):
        rows.append((name, t, brute_1e6 / t if ratios else math.nan, tess_t / t if ratios else math.nan, note))

    for rtol in (1e-9, 1e-6):
        t, c = best(lambda: compare_groups(sc, rtol=rtol))
        row(f"one value, rtol {rtol:g} (goal at 1e-9: 0.3 s)", t,
            f"true rel. error {abs(c.exact.torque_axis - ref) / abs(ref):.1e}, estimate "
            f"{c.error.torque_axis / abs(ref):.1e}")
    values = tuple(math.radians(v) for v in range(41))
    for rtol, goal in ((1e-6, f"{brute_1e6 / 4:.3g} s = brute force at 1e-6 / 4"), (1e-9, "10 s")):
        t, res = best(lambda: scan(sc, Sweep("turn", values, "attractor"), rtol=rtol, workers=1), repeat=1)
        row(f"41-value turn 0:40:1 deg, rtol {rtol:g} (goal {goal})", t,
            f"{res.method}, reached={res.reached}")
    pt = load_scene_text(POINT_BESIDE_BOX, "point-box")
    t_pair, _ = best(lambda: compare_groups(pt, rtol=1e-9), repeat=5)
    from truepull.integrate.field_prism import prism_field
    from truepull.integrate.threads import kernel_threads

    x = np.array([[0.3, 0.1, 0.05]])
    h = np.array([0.1, 0.1, 0.1])
    with kernel_threads(1):  # one point: one thread, as the pair itself runs it
        t_cf, _ = best(lambda: prism_field(x, h, 11340.0, 6.674e-11), repeat=20)
    row("point beside a box, whole compare_groups (goal 0.1 ms a pair)", t_pair,
        f"{t_pair / t_cf:.0f} times the closed form alone", ratios=False)
    many = load_scene_text(points_beside_box(100), "points-box")
    t_many, _ = best(lambda: compare_groups(many, rtol=1e-9), repeat=3)
    row("100 points beside a box, whole compare_groups, per pair", t_many / 100,
        f"{t_many / 100 / t_cf:.0f} times the closed form alone", ratios=False)
    row("  the prism closed form alone at that point (one thread)", t_cf, ratios=False)
    with tempfile.TemporaryDirectory() as d:
        path = os.path.join(d, "drums.toml")
        with open(path, "w") as f:
            f.write(DRUMS_LIKE)
        cmd = [sys.executable, "-m", "truepull.cli.main", "compare", path]
        subprocess.run(cmd, capture_output=True)
        walls = []
        for _ in range(3):
            t0 = time.perf_counter()
            subprocess.run(cmd, capture_output=True)
            walls.append(time.perf_counter() - t0)
        row("whole `truepull compare` process, drums-like (goal 0.8 s)", min(walls), "imports, scene, integration")

    print(f"load average at the end: {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores")
    print("references:")
    for n, t, e in brute:
        print(f"  numpy volume Gauss {n}^3 nodes a body: {t:8.2f} s, relative error {e:.1e}")
    print(f"  numpy volume Gauss for 1e-6 (fitted): n = {n6}, about {t6:.3g} s (n^6 from {ns[-1]})")
    for sides, t, e in tess:
        print(f"  tessellated attractors, {sides} sides, polyhedron closed form: {t:.3f} s, "
              f"tessellation error {e:.1e}")
    print(f"{'case':66s} {'time s':>10s} {'brute/ours':>11s} {'tess256/ours':>13s}  notes")
    for name, t, rb, rt, note in rows:
        print(f"{name:66s} {t:10.4g} {rb:11.3g} {rt:13.3g}  {note}")


if __name__ == "__main__":
    main()
