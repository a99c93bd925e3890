"""Speed of `check` on large scenes (run on demand: `python tests/benchmarks/bench_check_scale.py [N ...]`).

Prints a table, wall time, for scenes of N bodies (spheres, boxes and cylinders of 10 mm on a 30 mm
grid, each next to a touching neighbour every 50th body so the overlap tests have work), with two
positions of the attractor half (so the move between them is checked too):
- load: reading the scene;
- warnings: `scene_warnings`, as `check` runs it (candidate pairs from a k-d tree of bounding spheres);
- all pairs: the same overlap search over every pair, as `check` did before the k-d tree (only for
  N <= 2000: it grows as N^2).
"""

import sys
import time

import numpy as np

from truepull.geometry.audit import scene_warnings
from truepull.geometry.overlaps import bodies_overlap
from truepull.geometry.scene import load_scene_text

SHAPES = ('shape = "sphere"\nradius = 10', 'shape = "box"\nsize = [18, 18, 18]', 'shape = "cylinder"\nradius = 9\nlength = 18')


def scene_text(n: int) -> str:
    side = int(np.ceil(n ** (1 / 3)))
    parts = ['[units]\nlength = "mm"\n']
    k = 0
    for i in range(side):
        for j in range(side):
            for m in range(side):
                if k >= n:
                    break
                group = "pendulum" if i < side / 2 else "attractor"
                x, y, z = 30.0 * i + 200.0 * (group == "attractor"), 30.0 * j, 30.0 * m
                if k % 50 == 1:
                    z -= 15.0  # overlaps its neighbour below
                parts.append(f'[[body]]\nname = "b{k}"\ngroup = "{group}"\n{SHAPES[k % 3]}\ndensity = 8000\n'
                             f"at = [{x}, {y}, {z}]\n")
                k += 1
    parts.append('[[position]]\nname = "A"\ngroup = "attractor"\nturn = 0\n')
    parts.append('[[position]]\nname = "B"\ngroup = "attractor"\nturn = 0.5\n')
    return "\n".join(parts)


def all_pairs(bodies) -> int:
    hits = 0
    for i, a in enumerate(bodies):
        for b in bodies[i + 1:]:
            hits += bodies_overlap(a, b) is not None
    return hits


def main(sizes):
    rows = []
    scene_warnings(load_scene_text(scene_text(27), "warm.toml"))  # imports and kernels outside the timings
    for n in sizes:
        text = scene_text(n)
        t0 = time.perf_counter()
        scene = load_scene_text(text, f"n{n}.toml")
        t1 = time.perf_counter()
        w = scene_warnings(scene)
        t2 = time.perf_counter()
        brute = "-"
        if n <= 2000:
            t3 = time.perf_counter()
            all_pairs(list(scene.bodies))
            brute = f"{time.perf_counter() - t3:.2f}"
        rows.append((n, f"{t1 - t0:.2f}", f"{t2 - t1:.2f}", len(w), brute))
    print(f"{'bodies':>7}  {'load s':>7}  {'warnings s':>10}  {'warnings':>8}  {'all pairs s (before)':>20}")
    for r in rows:
        print(f"{r[0]:>7}  {r[1]:>7}  {r[2]:>10}  {r[3]:>8}  {r[4]:>20}")


if __name__ == "__main__":
    main([int(a) for a in sys.argv[1:]] or [100, 1000, 10000])
