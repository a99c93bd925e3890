"""Start-up of a whole `truepull compare` process (run on demand: `python tests/benchmarks/bench_startup.py`).

Two scenes: the two-bob scene below (two cylindrical bobs on a box beam, two cylindrical attractors
3 mm from the bobs) and the drums-like fixture of tests/scene_fixtures.py (the scene of bench_goals).
Prints wall times (best of 5 new processes) and the load average before and after, of:
- `python -c pass`, `import numpy`, `import numba`, and numba's floor: its import and the first call
  of a cached one-line kernel (numba builds its typing and target context there, which imports
  scipy.linalg to look for BLAS) - every process that calls a cached kernel pays it;
- pint's registry built and used once (what a scene with units outside the unit table costs);
- per scene: `truepull compare SCENE` as it is; the same with the work the start-up used to do put
  back in front of it (building pint's unit registry, importing scipy.spatial.transform and
  scipy.constants), i.e. the time before the unit table, the Rodrigues rotations and the constant G;
  and the engine's work alone: compare again in the same process with the pair memory cleared (its
  numba threads: one while the 1-minute load average is at least the cores less a half, threads.py);
- the CPU time of each stage of one drums-like compare process (less sensitive to load than wall).
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


TINY_KERNEL = """
import numpy as np
from numba import njit


@njit(cache=True)
def total(x):
    return x.sum()


total(np.ones(3))
"""

ENGINE_ALONE = """
import sys, time
from truepull.api import compare, load_scene
from truepull.integrate import pair_cache
from truepull.integrate.threads import cores_busy
scene = load_scene(sys.argv[1])
compare(scene)
pair_cache.clear()
t = time.perf_counter()
compare(scene)
print(time.perf_counter() - t, 1 if cores_busy() else 2)
"""


STAGES = """
import sys, time
c0 = time.process_time()
marks = []
def mark(name):
    marks.append((name, time.process_time() - c0))
import numpy
mark("import numpy")
import numba
mark("import numba")
import truepull.cli.main, truepull.cli.compare, truepull.api
from truepull.geometry.scene import load_scene
import truepull.integrate.interaction
scene = load_scene(sys.argv[1])
mark("truepull's modules and reading the scene")
from numba.core.registry import cpu_target
cpu_target.target_context.refresh()
mark("numba's typing and target context (first dispatch)")
from truepull.api import compare
compare(scene)
mark("compare: loading the cached kernels, integrating")
last = 0.0
for name, t in marks:
    print(f"{t - last:.4f} {name}")
    last = t
"""


def cpu_split(scene, n=3):
    """[(stage, least CPU seconds over n processes)] of one compare process (STAGES)."""
    runs = []
    for _ in range(n):
        out = subprocess.run([sys.executable, "-c", STAGES, scene], check=True, capture_output=True,
                             text=True).stdout.splitlines()
        runs.append([(line.split(" ", 1)[1], float(line.split(" ", 1)[0])) for line in out])
    return [(name, min(r[k][1] for r in runs)) for k, (name, _) in enumerate(runs[0])]


def best(code, n=5, args=()):
    t_best = float("inf")
    for _ in range(n):
        t = time.perf_counter()
        subprocess.run([sys.executable, "-c", code, *args], check=True, stdout=subprocess.DEVNULL)
        t_best = min(t_best, time.perf_counter() - t)
    return t_best


def engine_alone(scene, n=3):
    """(best seconds, numba threads of the last run) of compare's second run in one process."""
    runs = []
    for _ in range(n):
        out = subprocess.run([sys.executable, "-c", ENGINE_ALONE, scene], check=True, capture_output=True,
                             text=True).stdout.split()
        runs.append((float(out[0]), int(out[1])))
    return min(r[0] for r in runs), runs[-1][1]


def main():
    sys.path.insert(0, os.path.join(os.path.dirname(__file__), ".."))
    from scene_fixtures import DRUMS_LIKE

    load_before = os.getloadavg()[0]
    rows = []
    with tempfile.TemporaryDirectory() as d:
        tiny = os.path.join(d, "tiny_kernel.py")
        open(tiny, "w").write(TINY_KERNEL)
        kernel = f"import sys; sys.path.insert(0, {d!r}); import tiny_kernel"
        subprocess.run([sys.executable, "-c", kernel], check=True)  # compiles and caches it
        rows += [
            ("python -c pass", best("pass")),
            ("import numpy", best("import numpy")),
            ("import numba", best("import numba")),
            ("numba: import and first call of a cached kernel", best(kernel)),
            ("pint unit registry (built and used once)", best(BEFORE.split(" import scipy")[0])),
        ]
        for name, text in (("two-bob", SCENE), ("drums-like", DRUMS_LIKE)):
            scene = os.path.join(d, f"{name}.toml")
            open(scene, "w").write(text)
            run = f"from truepull.cli.main import main; main(['compare', {scene!r}])"
            subprocess.run([sys.executable, "-c", run], check=True, stdout=subprocess.DEVNULL)  # kernels cached
            t_engine, threads = engine_alone(scene)
            if name == "drums-like":
                split = cpu_split(scene)
            rows += [
                (f"{name}: truepull compare, before (old start-up work put back)", best(BEFORE + run)),
                (f"{name}: truepull compare, now", best(run)),
                (f"{name}: the engine alone (warm, {threads} numba thread{'s' if threads > 1 else ''})", t_engine),
            ]
    print(f"load average before {load_before:.2f}, after {os.getloadavg()[0]:.2f}, on {os.cpu_count()} cores")
    print(f"{'process':<68} {'wall s':>7}")
    for name, t in rows:
        print(f"{name:<68} {t:>7.2f}")
    print()
    print(f"{'drums-like compare: CPU of each stage (least of 3 processes)':<68} {'CPU s':>7}")
    for name, t in split:
        print(f"  {name:<66} {t:>7.3f}")


if __name__ == "__main__":
    main()
