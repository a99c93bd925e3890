"""Speed of a 360-value turn of the attractor (run on demand: `python tests/benchmarks/bench_scan.py`,
add `--demo-direct` to also time the built-in demo by direct integration, which is slow).

Prints, warm (second run), wall and CPU time for:
- a separable bench balance (pendulum inside, attractor outside a sphere about the pivot) on the
  multipole fast path, including its direct-integration checks;
- the built-in demo: whether the fast path applies there (its bobs reach farther from the fiber than
  the attractor cylinders' nearest points, so it does not) and, with --demo-direct, the direct
  sweep over a few values, scaled to 360.
"""

import math
import sys
import time

from truepull.geometry.scene import load_scene, load_scene_text
from truepull.integrate.multipoles import regions
from truepull.integrate.scans import Sweep, scan

SEPARABLE = """
[units]
length = "mm"
[[body]]
name = "bob-east"
group = "pendulum"
shape = "sphere"
radius = 5
density = 11340
at = [25, 0, 0]
[[body]]
name = "bob-west"
group = "pendulum"
shape = "sphere"
radius = 5
density = 11340
at = [-25, 0, 0]
[[body]]
name = "beam"
group = "pendulum"
shape = "box"
size = [40, 4, 2]
density = 2700
[[body]]
name = "ball-north"
group = "attractor"
shape = "sphere"
radius = 20
density = 11340
at = [0, 70, 0]
[[body]]
name = "block-south"
group = "attractor"
shape = "box"
size = [30, 30, 30]
density = 11340
at = [0, -70, 0]
"""


def timed(fn):
    w0, c0 = time.perf_counter(), time.process_time()
    out = fn()
    return out, time.perf_counter() - w0, time.process_time() - c0


def main():
    values = tuple(math.radians(v) for v in range(360))
    sc = load_scene_text(SEPARABLE)
    run = lambda: scan(sc, Sweep("turn", values, "attractor"), workers=2)  # noqa: E731
    run()
    res, wall, cpu = timed(run)
    print(f"separable balance, 360-value turn: {res.method} (degree {res.degree}), "
          f"{wall:.3f} s wall, {cpu:.3f} s CPU, {len(res.checks)} direct checks")

    from truepull.shapes import demo_path

    demo = load_scene(demo_path())
    sep = regions(demo.group("pendulum"), demo.group("attractor"), demo.frame.pivot)
    print(f"demo: pendulum reach {sep.inner_radius * 1e3:.2f} mm, attractor clearance "
          f"{sep.outer_radius * 1e3:.2f} mm -> multipole fast path {'applies' if sep.ok else 'does not apply'}")
    if "--demo-direct" in sys.argv:
        few = tuple(math.radians(v) for v in (-60, -50, -40, 40, 50, 60))
        sweep = Sweep("turn", few, "attractor")
        scan(demo, Sweep("turn", few[:1], "attractor"), workers=1)
        res, wall, cpu = timed(lambda: scan(demo, sweep, workers=2, scene_path=str(demo_path())))
        print(f"demo, direct integration: {wall / len(few):.3f} s per value wall -> "
              f"{360 * wall / len(few):.1f} s for 360 values")


if __name__ == "__main__":
    main()
