"""Speed of the polyhedron field kernel: a ~10,000-face closed mesh at 1,000 points (run on demand:
`python tests/benchmarks/bench_field_polyhedron.py`). Prints wall time and CPU time; on a busy
machine the CPU time divided by the number of threads is the fairer figure."""

import time

import numba
import numpy as np
import trimesh

from truepull.integrate.field_polyhedron import (PolyhedronData, polyhedron_field,
                                                 polyhedron_gradient)


def main():
    meshes = (("capsule", trimesh.creation.capsule(height=0.2, radius=0.05, count=[70, 72])),
              ("icosphere", trimesh.creation.icosphere(subdivisions=5, radius=0.1)))
    rng = np.random.default_rng(0)
    pts = rng.uniform(-0.3, 0.3, size=(1000, 3))
    for name, m in meshes:
        data = PolyhedronData(m.vertices, m.faces)
        polyhedron_field(pts[:20], data, 1.0, 1.0)
        polyhedron_gradient(pts[:20], data, 1.0, 1.0)
        for label, fn in (("field", polyhedron_field), ("gradient", polyhedron_gradient)):
            best_wall = best_cpu = np.inf
            for _ in range(5):
                w0, c0 = time.perf_counter(), time.process_time()
                fn(pts, data, 1.0, 1.0)
                best_wall = min(best_wall, time.perf_counter() - w0)
                best_cpu = min(best_cpu, time.process_time() - c0)
            print(f"{name:10s} {len(m.faces):6d} faces x 1000 points {label:8s}: "
                  f"wall {best_wall * 1e3:7.1f} ms, cpu {best_cpu * 1e3:7.1f} ms "
                  f"({numba.get_num_threads()} threads)")


if __name__ == "__main__":
    main()
