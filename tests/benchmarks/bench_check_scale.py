"""Speed of `check` on large scenes (run on demand: `python tests/benchmarks/bench_check_scale.py [N ...]`).

The scenes: `scene_fixtures.grid_scene(N)`: N spheres, boxes and cylinders of about 20 mm on a 30 mm
grid, each 50th body pushed into its neighbour so the overlap tests have work, sizes and positions
written with `+-` every 7th body and a material every 5th (so unit, uncertainty and material reading
are exercised), and two positions of the attractor half, 0.5 deg apart (so the move between them is
checked too). Prints, in seconds of wall time:
- process: a whole `truepull check SCENE` process (text output to /dev/null), best of `--repeat`;
  cpu: its CPU time (user + system, best of the same runs: less sensitive to other work on the
  machine than the wall time); json: the wall time with `--json`, one run;
- the split of one run inside this process: toml (tomllib.loads), read (the [[body]] tables to
  specs, `read_body_specs`), build (specs to bodies: shapes, placements, density checks), load (all of
  `load_scene_text`, which holds the three before), checks (`truepull.api.check`: mass properties,
  group totals, stated uncertainties and the warnings), of which warnings (`scene_warnings`: overlaps,
  at the positions too, and on the way between them), and output (the text report, as `check` prints it);
- all pairs: the overlap search over every pair, as `check` did before the k-d tree (only with
  `--all-pairs` and N <= 2000: it grows as N^2).
Timings depend on the machine's load at the time: report them with it. To time an older version
beside this one, run the script with PYTHONPATH pointing at a directory holding that version as
`truepull/` (e.g. `git archive REV` unpacked there): the processes and the split then use it.
"""

from __future__ import annotations

import argparse
import os
import resource
import subprocess
import sys
import tempfile
import time
import tomllib

import numpy as np

sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), ".."))
from scene_fixtures import grid_scene  # noqa: E402
from truepull.api import check  # noqa: E402
from truepull.cli.check import render  # noqa: E402

try:
    from truepull.cli.check import render_result
except ImportError:  # an older checkout
    render_result = None
from truepull.geometry.audit import scene_warnings  # noqa: E402
from truepull.geometry.bodies import build_body  # noqa: E402
from truepull.geometry.overlaps import bodies_overlap  # noqa: E402
from truepull.geometry.scene import _Reader, load_scene_text  # noqa: E402

try:
    from truepull.geometry.scene import read_body_specs
except ImportError:  # an older checkout (PYTHONPATH=...), to time the code before
    from truepull.geometry.scene import _read_body

    def read_body_specs(r, raw_bodies):
        return (_read_body(r, raw, i) for i, raw in enumerate(raw_bodies))

def all_pairs(bodies) -> int:
    hits = 0
    for i, a in enumerate(bodies):
        for b in bodies[i + 1:]:
            hits += bodies_overlap(a, b) is not None
    return hits


def process_time(path: str, repeat: int, *extra: str) -> tuple[float, float]:
    """Best wall time and best CPU time (user + system, s) of a whole `truepull check` process."""
    best, best_cpu = np.inf, np.inf
    for _ in range(repeat):
        before = resource.getrusage(resource.RUSAGE_CHILDREN)
        t0 = time.perf_counter()
        subprocess.run([sys.executable, "-m", "truepull", "check", *extra, path], check=True,
                       stdout=subprocess.DEVNULL)
        best = min(best, time.perf_counter() - t0)
        after = resource.getrusage(resource.RUSAGE_CHILDREN)
        best_cpu = min(best_cpu, after.ru_utime - before.ru_utime + after.ru_stime - before.ru_stime)
    return best, best_cpu


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
    result = check(scene)  # on a fresh scene: nothing cached from the line above
    t["checks"] = time.perf_counter() - t0
    t0 = time.perf_counter()
    if render_result is None:  # an older checkout: as its `check` did
        render(scene, result.to_json())
    else:
        render_result(result)
    t["output"] = time.perf_counter() - t0
    return t


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("sizes", nargs="*", type=int, default=[100, 1000, 10000])
    ap.add_argument("--repeat", type=int, default=2, help="processes per size; the best is shown")
    ap.add_argument("--all-pairs", action="store_true", help="also time the search over every pair (N <= 2000)")
    args = ap.parse_args(argv)
    scene_warnings(load_scene_text(grid_scene(27), "warm.toml"))  # imports and kernels outside the split
    cols = ["process", "cpu", "json", "toml", "read", "build", "load", "checks", "warnings", "output"]
    print(f"{'bodies':>7}  " + "  ".join(f"{c:>8}" for c in cols) + ("  all pairs" if args.all_pairs else ""))
    with tempfile.TemporaryDirectory() as tmp:
        for n in args.sizes:
            text = grid_scene(n)
            path = os.path.join(tmp, f"n{n}.toml")
            with open(path, "w", encoding="utf-8") as fh:
                fh.write(text)
            t = dict(zip(("process", "cpu"), process_time(path, args.repeat)))
            t["json"] = process_time(path, 1, "--json")[0]
            t.update(split(text, path))
            line = f"{n:>7}  " + "  ".join(f"{t[c]:>8.2f}" for c in cols)
            if args.all_pairs and n <= 2000:
                t0 = time.perf_counter()
                all_pairs(list(load_scene_text(text, path).bodies))
                line += f"  {time.perf_counter() - t0:>9.2f}"
            print(line, flush=True)


if __name__ == "__main__":
    main()
