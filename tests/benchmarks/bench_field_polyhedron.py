"""Speed of the polyhedron field kernels (run on demand: `python tests/benchmarks/bench_field_polyhedron.py`).

1. A ~10,000-face closed mesh at 1,000 points: field and gradient tensor.
2. Points per second for the value alone (`polyhedron_field`) and with its rigorous rounding bound
   computed in the same pass (`polyhedron_field_and_bounds`), for meshes of about 100, 1,000 and 5,000
   faces (trimesh capsules) at 20,000 points in a box three times the mesh's size.
Prints wall time and CPU time (best of 5 and 3); on a busy machine the CPU time divided by the number
of threads is the fairer figure. The bounded call runs on one thread while the 1-minute load average
leaves less than half a core free (integrate/threads.py); the load average is printed."""

import os
import time

import numba
import numpy as np
import trimesh

from truepull.integrate.field_polyhedron import (PolyhedronData, polyhedron_field,
                                                 polyhedron_field_and_bounds, polyhedron_gradient)


def best(fn, repeat):
    wall = cpu = np.inf
    for _ in range(repeat):
        w0, c0 = time.perf_counter(), time.process_time()
        fn()
        wall = min(wall, time.perf_counter() - w0)
        cpu = min(cpu, time.process_time() - c0)
    return wall, cpu


def big_meshes():
    meshes = (("capsule", trimesh.creation.capsule(height=0.2, radius=0.05, count=[70, 72])),
              ("icosphere", trimesh.creation.icosphere(subdivisions=5, radius=0.1)))
    rng = np.random.default_rng(0)
    pts = rng.uniform(-0.3, 0.3, size=(1000, 3))
    for name, m in meshes:
        data = PolyhedronData(m.vertices, m.faces)
        polyhedron_field(pts[:20], data, 1.0, 1.0)
        polyhedron_gradient(pts[:20], data, 1.0, 1.0)
        for label, fn in (("field", polyhedron_field), ("gradient", polyhedron_gradient)):
            wall, cpu = best(lambda: fn(pts, data, 1.0, 1.0), 5)
            print(f"{name:10s} {len(m.faces):6d} faces x 1000 points {label:8s}: "
                  f"wall {wall * 1e3:7.1f} ms, cpu {cpu * 1e3:7.1f} ms "
                  f"({numba.get_num_threads()} threads)")


def rates():
    from truepull.integrate.threads import cores_busy

    print(f"\npoints/s, value alone and with the rigorous bound (load average {os.getloadavg()[0]:.2f}; "
          f"value on {numba.get_num_threads()} threads, bound on "
          f"{1 if cores_busy() else numba.get_num_threads()})")
    print(f"{'faces':>6s} {'edges':>6s} {'value pts/s':>12s} {'bound pts/s':>12s} {'cost':>6s}")
    n = 20_000
    for count in ([6, 8], [20, 25], [50, 50]):       # about 100, 1,000 and 5,000 faces
        m = trimesh.creation.capsule(height=0.1, radius=0.03, count=count)
        data = PolyhedronData(m.vertices, m.faces)
        pts = np.random.default_rng(1).uniform(-0.1, 0.1, size=(n, 3))
        polyhedron_field_and_bounds(pts[:20], data, 1.0, 1.0)
        polyhedron_field(pts[:20], data, 1.0, 1.0)
        w_value, _ = best(lambda: polyhedron_field(pts, data, 1.0, 1.0), 3)
        w_bound, _ = best(lambda: polyhedron_field_and_bounds(pts, data, 1.0, 1.0), 3)
        print(f"{len(data.faces):6d} {len(data.edges):6d} {n / w_value:12.3g} {n / w_bound:12.3g} "
              f"{w_bound / w_value:5.2f}x")


def main():
    big_meshes()
    rates()


if __name__ == "__main__":
    main()
