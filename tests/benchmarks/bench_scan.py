"""Speed of a 360-value turn of the attractor (run on demand: `python tests/benchmarks/bench_scan.py`,
add `--direct` to also time the demo by direct integration of every value, which is slower).

Prints a table, wall and CPU time, for:
- the built-in demo's 360-value turn on the multipole fast path, warm (second run in this process,
  kernels compiled), including its direct-integration checks;
- the same as a command in a new process (`truepull scan DEMO --turn 0:359:1`), wall time;
- a second separable bench balance (a box among the attractor's parts, so its outer moments need
  quadrature), warm;
- with --direct: the demo integrated directly (`multipoles=False`) at every 10 deg, scaled to 360
  (the worker pool started beforehand).
"""

import math
import sys
import time

from truepull.geometry.scene import load_scene, load_scene_text
from truepull.integrate.multipoles import outer_clearance, regions
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
    import subprocess

    from truepull.shapes import demo_path

    values = tuple(math.radians(v) for v in range(360))
    rows = []
    demo = load_scene(demo_path())
    sep = regions(demo.group("pendulum"), demo.group("attractor"), demo.frame.pivot)
    run = lambda: scan(demo, Sweep("turn", values, "attractor"), workers=2, scene_path=str(demo_path()))  # noqa: E731
    run()
    res, wall, cpu = timed(run)
    rows.append(("demo, 360-value turn, warm", wall, cpu,
                 f"{res.method} (degree {res.degree}), {len(res.checks)} direct checks; reach "
                 f"{sep.inner_radius * 1e3:.1f} mm, attractor's centres "
                 f"{min(outer_clearance(b, demo.frame.pivot) for b in demo.group('attractor')) * 1e3:.1f} mm"))
    cmd = [sys.executable, "-m", "truepull.cli.main", "scan", str(demo_path()), "--turn", "0:359:1", "--csv", "/dev/null"]
    subprocess.run(cmd, capture_output=True, check=True)  # compile caches
    w0 = time.perf_counter()
    subprocess.run(cmd, capture_output=True, check=True)
    rows.append(("demo, `truepull scan --turn 0:359:1`, new process", time.perf_counter() - w0, float("nan"),
                 "imports, scene loading and the scan"))
    sc = load_scene_text(SEPARABLE)
    run = lambda: scan(sc, Sweep("turn", values, "attractor"), workers=2)  # noqa: E731
    run()
    res, wall, cpu = timed(run)
    rows.append(("sphere bobs, ball and block attractor, warm", wall, cpu,
                 f"{res.method} (degree {res.degree}), {len(res.checks)} direct checks"))
    if "--direct" in sys.argv:
        few = tuple(math.radians(v) for v in range(0, 360, 10))
        scan(demo, Sweep("turn", few[:4], "attractor"), workers=2, scene_path=str(demo_path()), multipoles=False)
        res, wall, cpu = timed(lambda: scan(demo, Sweep("turn", few, "attractor"), workers=2,
                                            scene_path=str(demo_path()), multipoles=False))
        rows.append(("demo, direct, scaled to 360 values", 360 * wall / len(few), 360 * cpu / len(few),
                     f"{wall / len(few):.3f} s a value on 2 workers"))
    print(f"{'case':52s} {'wall s':>8s} {'CPU s':>8s}  notes")
    for name, w, c, note in rows:
        print(f"{name:52s} {w:8.3f} {c:8.3f}  {note}")


if __name__ == "__main__":
    main()
