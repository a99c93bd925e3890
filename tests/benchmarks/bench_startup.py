"""Start-up of a whole `truepull compare` process (run on demand: `python tests/benchmarks/bench_startup.py`).

The scene: two cylindrical bobs on a box beam, two cylindrical attractors 3 mm from the bobs. Prints
wall times (best of 5 new processes) of:
- `python -c pass` and `import numpy` (the floor of any process on this machine, now);
- `truepull compare SCENE` as it is;
- the same with the work the start-up used to do put back in front of it (building pint's unit
  registry, importing scipy.spatial.transform and scipy.constants), i.e. the time before the unit
  table, the Rodrigues rotations and the constant G;
- the pieces alone: pint's registry, and numba's import.
"""

import os
import subprocess
import sys
import tempfile
import time

SCENE = """
[units]
length = "mm"
[[body]]
name = "bob-east"
group = "pendulum"
shape = "cylinder"
radius = 5
length = 10
density = 19300
at = [40, 0, 0]
[[body]]
name = "bob-west"
group = "pendulum"
shape = "cylinder"
radius = 5
length = 10
density = 19300
at = [-40, 0, 0]
[[body]]
name = "beam"
group = "pendulum"
shape = "box"
size = [90, 4, 2]
density = 2700
at = [0, 0, 7]
[[body]]
name = "att-north"
group = "attractor"
shape = "cylinder"
radius = 20
length = 10
density = 19300
at = [40, 28, 0]
[[body]]
name = "att-south"
group = "attractor"
shape = "cylinder"
radius = 20
length = 10
density = 19300
at = [-40, -28, 0]
"""

BEFORE = ("import pint; pint.UnitRegistry().Quantity(1.0, 'mm').to('m'); "
          "import scipy.spatial.transform, scipy.constants; ")


def best(code, n=5):
    t_best = float("inf")
    for _ in range(n):
        t = time.perf_counter()
        subprocess.run([sys.executable, "-c", code], check=True, stdout=subprocess.DEVNULL)
        t_best = min(t_best, time.perf_counter() - t)
    return t_best


def main():
    with tempfile.TemporaryDirectory() as d:
        scene = os.path.join(d, "bench.toml")
        open(scene, "w").write(SCENE)
        run = f"from truepull.cli.main import main; main(['compare', {scene!r}])"
        rows = [
            ("python -c pass", best("pass")),
            ("import numpy", best("import numpy")),
            ("pint unit registry (built and used once)", best(BEFORE.split(" import scipy")[0])),
            ("import numba", best("import numba")),
            ("truepull compare: before (old start-up work put back)", best(BEFORE + run)),
            ("truepull compare: now", best(run)),
        ]
    print(f"{'process':<56} {'wall s':>7}")
    for name, t in rows:
        print(f"{name:<56} {t:>7.2f}")


if __name__ == "__main__":
    main()
