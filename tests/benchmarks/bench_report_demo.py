"""Time of `truepull report` on the built-in demo (run on demand:
`python tests/benchmarks/bench_report_demo.py [--cold] [extra report options]`).

The goal is under a minute on 2 cores. The report is written into a temporary folder twice (the
first run also compiles and caches the numba kernels, unless they are cached already), and the
second run's section times are printed as a table with the machine's core count. Extra options go
to the report, e.g. `--no-view` or `--rtol 1e-6`.
"""

import json
import os
import sys
import tempfile
import time
from pathlib import Path

from truepull.cli.main import main


def one_run(extra) -> tuple[float, dict]:
    with tempfile.TemporaryDirectory() as d:
        out = Path(d) / "report"
        start = time.perf_counter()
        code = main(["report", "--out", str(out)] + extra)
        wall = time.perf_counter() - start
        if code != 0:
            raise SystemExit(f"truepull report ended with code {code}")
        return wall, json.loads((out / "report.json").read_text())


def main_bench(argv) -> int:
    cold = "--cold" in argv
    extra = [a for a in argv if a != "--cold"]
    wall, info = one_run(extra)
    if not cold:
        wall, info = one_run(extra)
    print(f"truepull report on the built-in demo, {'first' if cold else 'second (warm)'} run, "
          f"{os.cpu_count()} cores: {wall:.1f} s wall (goal: under 60 s)")
    print(f"{'section':10s} {'seconds':>9s}  reached")
    for name, s in info["sections"].items():
        state = "-" if s.get("reached") is None else ("yes" if s["reached"] else "NO")
        if not s["available"]:
            state = "not available: " + s.get("reason", "")
        print(f"{name:10s} {s['seconds']:9.1f}  {state}")
    return 0


if __name__ == "__main__":
    sys.exit(main_bench(sys.argv[1:]))
