"""Speed of `check` on large scenes (run on demand: `python tests/benchmarks/bench_check_scale.py [N ...]`).

The scenes: N spheres, boxes and cylinders of 10 mm on a 30 mm grid, each 50th body pushed into its
neighbour so the overlap tests have work, sizes and positions written with `+-` every 7th body and
a material every 5th (so unit, uncertainty and material reading are exercised), and two positions of
the attractor half (so the move between them is checked too). Prints, in seconds of wall time:
- process: a whole `truepull check SCENE` process (text output to /dev/null), best of `--repeat`;
  json: the same with `--json`;
- the split of one run inside this process: toml (tomllib.loads), read (the [[body]] tables to
  specs, `read_body_specs`), build (specs to bodies: shapes, placements, density checks), load (all of
  `load_scene_text`, which holds the three before), checks (`truepull.api.check`: mass properties,
  group totals, stated uncertainties and the warnings), of which warnings (`scene_warnings`: overlaps,
  at the positions too, and on the way between them), and output (the text report, `render`);
- all pairs: the overlap search over every pair, as `check` did before the k-d tree (only with
  `--all-pairs` and N <= 2000: it grows as N^2).
Timings depend on the machine's load at the time: report them with it. To time an older version
beside this one, run the script with PYTHONPATH pointing at a directory holding that version as
`truepull/` (e.g. `git archive REV` unpacked there): the processes and the split then use it.
"""

from __future__ import annotations

import argparse
import os
import subprocess
import sys
import tempfile
import time
import tomllib

import numpy as np

from truepull.api import check
from truepull.cli.check import render
from truepull.geometry.audit import scene_warnings
from truepull.geometry.bodies import build_body
from truepull.geometry.overlaps import bodies_overlap
from truepull.geometry.scene import _Reader, load_scene_text

try:
    from truepull.geometry.scene import read_body_specs
except ImportError:  # an older checkout (PYTHONPATH=...), to time the code before
    from truepull.geometry.scene import _read_body

    def read_body_specs(r, raw_bodies):
        return (_read_body(r, raw, i) for i, raw in enumerate(raw_bodies))

SHAPES = ('shape = "sphere"\nradius = 10', 'shape = "box"\nsize = [18, 18, 18]', 'shape = "cylinder"\nradius = 9\nlength = 18')
STATED = ('shape = "sphere"\nradius = "10 +- 0.01"', 'shape = "box"\nsize = ["18 +- 0.01 mm", 18, "1.8 cm"]',
          'shape = "cylinder"\nradius = "9.000(5)"\nlength = 18')


def scene_text(n: int) -> str:
    """A scene of n bodies (see the module docstring), lengths in mm."""
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
                shape = (STATED if k % 7 == 3 else SHAPES)[k % 3]
                at = f'["{x} +- 0.02", {y}, {z}]' if k % 7 == 3 else f"[{x}, {y}, {z}]"
                matter = 'material = "brass"' if k % 5 == 2 else "density = 8000"
                parts.append(f'[[body]]\nname = "b{k}"\ngroup = "{group}"\n{shape}\n{matter}\nat = {at}\n')
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


def process_time(path: str, repeat: int, *extra: str) -> float:
    """Best wall time (s) of a whole `truepull check` process on the scene file."""
    best = np.inf
    for _ in range(repeat):
        t0 = time.perf_counter()
        subprocess.run([sys.executable, "-m", "truepull", "check", *extra, path], check=True,
                       stdout=subprocess.DEVNULL)
        best = min(best, time.perf_counter() - t0)
    return best


def split(text: str, name: str) -> dict[str, float]:
    """Wall times (s) of the phases of one check in this process."""
    t = {}
    t0 = time.perf_counter()
    data = tomllib.loads(text)
    t["toml"] = time.perf_counter() - t0
    r = _Reader(name, os.getcwd())
    t0 = time.perf_counter()
    specs = list(read_body_specs(r, data["body"]))
    t["read"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    [build_body(s) for s in specs]
    t["build"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    scene = load_scene_text(text, name)
    t["load"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    scene_warnings(scene)
    t["warnings"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    result = check(scene).to_json()  # on a fresh scene: nothing cached from the line above
    t["checks"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    render(scene, result)
    t["output"] = time.perf_counter() - t0
    return t


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("sizes", nargs="*", type=int, default=[100, 1000, 10000])
    ap.add_argument("--repeat", type=int, default=2, help="processes per size; the best is shown")
    ap.add_argument("--all-pairs", action="store_true", help="also time the search over every pair (N <= 2000)")
    args = ap.parse_args(argv)
    scene_warnings(load_scene_text(scene_text(27), "warm.toml"))  # imports and kernels outside the split
    cols = ["process", "json", "toml", "read", "build", "load", "checks", "warnings", "output"]
    print(f"{'bodies':>7}  " + "  ".join(f"{c:>8}" for c in cols) + ("  all pairs" if args.all_pairs else ""))
    with tempfile.TemporaryDirectory() as tmp:
        for n in args.sizes:
            text = scene_text(n)
            path = os.path.join(tmp, f"n{n}.toml")
            with open(path, "w", encoding="utf-8") as fh:
                fh.write(text)
            t = {"process": process_time(path, args.repeat), "json": process_time(path, 1, "--json")}
            t.update(split(text, path))
            line = f"{n:>7}  " + "  ".join(f"{t[c]:>8.2f}" for c in cols)
            if args.all_pairs and n <= 2000:
                t0 = time.perf_counter()
                all_pairs(list(load_scene_text(text, path).bodies))
                line += f"  {time.perf_counter() - t0:>9.2f}"
            print(line, flush=True)


if __name__ == "__main__":
    main()
