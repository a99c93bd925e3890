"""Speed of the field at many points (run on demand: `python tests/benchmarks/bench_field_points.py`).

Prints a table of points per second, warm (kernels loaded, a first call made), for one body of each
shape: potential and field only, and with the gradient tensor too (closed form for box, mesh and
sphere; Richardson central differences, 18 field evaluations a point, for cylinder and ellipsoid).
Then the wall time of the whole command `truepull field SCENE --points CSV` on 4,000 points in a new
process, beside `truepull field --help` (the process start-up alone).
"""

import os
import subprocess
import sys
import tempfile
import time

import numpy as np

from truepull.geometry.bodies import Body
from truepull.geometry.placement import Placement
from truepull.geometry.shapes import Box, Cylinder, Ellipsoid, MeshShape, Sphere
from truepull.integrate.field_at_points import group_field_at_points

G = 6.6743e-11


def mesh_cylinder(faces=1000):
    import trimesh

    m = trimesh.creation.cylinder(radius=0.02, height=0.04, sections=faces // 4)
    return MeshShape(np.asarray(m.vertices, float), np.asarray(m.faces))


def rate(bodies, n, gradient):
    pts = np.random.default_rng(0).uniform(-0.1, 0.1, (n, 3))
    pts[:, 2] += 0.15          # outside every body, a few sizes away
    group_field_at_points(bodies, pts[:100], G, gradient=gradient)     # warm
    best = np.inf
    for _ in range(3):
        t = time.perf_counter()
        group_field_at_points(bodies, pts, G, gradient=gradient)
        best = min(best, time.perf_counter() - t)
    return n / best


def whole_command(n=4000):
    scene = """[units]
length = "mm"
[[body]]
name = "beam"
group = "attractor"
shape = "box"
size = [90, 4, 2]
density = 2700
at = [0, 0, 0]
"""
    with tempfile.TemporaryDirectory() as d:
        s = os.path.join(d, "s.toml")
        open(s, "w").write(scene)
        p = os.path.join(d, "p.csv")
        pts = np.random.default_rng(1).uniform(-50, 50, (n, 3))
        pts[:, 2] += 100
        np.savetxt(p, pts, delimiter=",", header="x,y,z", comments="")
        out = os.path.join(d, "o.csv")
        times = {}
        for name, argv in [("field --help", ["field", "--help"]),
                           (f"field, {n} points, box", ["field", s, "--points", p, "--out", out])]:
            best = np.inf
            for _ in range(3):
                t = time.perf_counter()
                subprocess.run([sys.executable, "-m", "truepull.cli.main", *argv], check=True,
                               stdout=subprocess.DEVNULL)
                best = min(best, time.perf_counter() - t)
            times[name] = best
    return times


def main():
    eye = np.eye(3)
    cases = [
        ("box", [Body("b", "a", Box((0.09, 0.004, 0.002)), Placement(eye, np.zeros(3)), 2700.0)], 200_000),
        ("sphere", [Body("s", "a", Sphere(0.02), Placement(eye, np.zeros(3)), 8000.0)], 200_000),
        ("mesh, 1000 faces", [Body("m", "a", mesh_cylinder(), Placement(eye, np.zeros(3)), 8000.0)], 20_000),
        ("cylinder", [Body("c", "a", Cylinder(0.02, 0.04), Placement(eye, np.zeros(3)), 8000.0)], 50_000),
        ("ellipsoid", [Body("e", "a", Ellipsoid((0.02, 0.015, 0.01)), Placement(eye, np.zeros(3)), 8000.0)], 50_000),
    ]
    print(f"{'shape':<18} {'points':>8} {'U, g  points/s':>16} {'U, g, T  points/s':>19}")
    for name, bodies, n in cases:
        print(f"{name:<18} {n:>8} {rate(bodies, n, False):>16.3g} {rate(bodies, n // 4, True):>19.3g}")
    print()
    print(f"{'whole command (new process, best of 3)':<44} {'wall s':>8}")
    for name, t in whole_command().items():
        print(f"{name:<44} {t:>8.2f}")


if __name__ == "__main__":
    main()
