"""Scale of whole commands (run on demand: `python tests/benchmarks/bench_scale.py [case ...]`).

Each case runs `truepull VERB` as a new process on a scene written to a temporary folder and prints
the wall time (start-up and scene loading included) and the exit code:
- check-1000, check-10000: the grid scenes of bench_check_scale.py (spheres, boxes and cylinders,
  one body in 50 overlapping its neighbour, two positions);
- compare-50-cylinders: `scene_fixtures.small_cylinders_scene(50)`, 25 x 25 pairs at one position;
- bias-all-shapes: `scene_fixtures.all_shapes_scene()`, one body of every shape (point, sphere,
  cylinder, box; shell, tube, frustum, ellipsoid, mesh), two positions and a deflection measurement,
  worker processes one per core.
Cases: the names above (default: all). Say whether the machine was idle when quoting the figures.
"""

import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path[:0] = [str(HERE), str(HERE.parent)]

from bench_check_scale import scene_text  # noqa: E402
from scene_fixtures import all_shapes_scene, small_cylinders_scene, write_cube_mesh  # noqa: E402


def scenes(folder: Path) -> dict:
    write_cube_mesh(folder / "cube.stl")
    texts = {"check-1000": ("check", scene_text(1000)), "check-10000": ("check", scene_text(10000)),
             "compare-50-cylinders": ("compare", small_cylinders_scene(50)),
             "bias-all-shapes": ("bias", all_shapes_scene("cube.stl"))}
    out = {}
    for name, (verb, text) in texts.items():
        path = folder / f"{name}.toml"
        path.write_text(text)
        out[name] = (verb, path)
    return out


def main(cases):
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        table = scenes(folder)
        cases = cases or list(table)
        rows = []
        for name in cases:
            verb, path = table[name]
            t0 = time.perf_counter()
            done = subprocess.run([sys.executable, "-m", "truepull.cli.main", verb, str(path)],
                                  capture_output=True, text=True, env=os.environ.copy())
            rows.append((name, time.perf_counter() - t0, done.returncode))
        load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    print(f"{'case':<22}  {'wall s':>7}  {'exit':>4}")
    for name, t, code in rows:
        print(f"{name:<22}  {t:>7.1f}  {code:>4}")
    print(f"load average at the end: {load:.1f} on {os.cpu_count()} cores")


if __name__ == "__main__":
    main(sys.argv[1:])
