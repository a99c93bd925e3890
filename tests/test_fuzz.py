"""Seeded fuzzing of the command line's promise on bad input.

Scenes (the demo and the tests' fixture scenes) and run files are mutated at random -- numbers pushed
to extremes (0, -x, 1e308, 1e-320, huge integers, nan/inf), units swapped, '+-' and the concise
notation misplaced, keys dropped or invented, values wrapped in lists and tables, tables nested deep --
and sent through `check`, `compare`, `scan` and `fit` in-process. Every outcome must keep the promise:
exit 0 with valid output (no NaN and no null where a number is expected), exit 2 with exactly one line
on stderr naming the file, exit 3 only for an unreached tolerance, never an internal error (exit 1),
a hang, or a numpy/trimesh warning leaking out. A few cases run as real subprocesses to check the exit
codes the shell sees. TRUEPULL_FUZZ_SCALE (default 1) multiplies the number of cases.
"""

from __future__ import annotations

import contextlib
import copy
import io
import json
import math
import os
import random
import re
import shutil
import signal
import subprocess
import sys
import tomllib
import warnings

import pytest

from truepull.cli.main import main
from truepull.shapes import demo_path
from test_check_cli import TWO_BOBS
from test_scene import GOOD

SCALE = float(os.environ.get("TRUEPULL_FUZZ_SCALE", "1"))
SECONDS_PER_CASE = 20  # far beyond any case here; a case that takes longer counts as a hang

SMALL = """
[units]
length = "mm"
angle = "deg"
[frame]
axis = [0, 0, 1]
[[body]]
name = "bob"
group = "pendulum"
shape = "sphere"
radius = "9 +- 0.01"
density = 11340
at = [50, 0, 0]
[[body]]
name = "big"
group = "attractor"
shape = "box"
size = [40, 30, 20]
density = "8000 +- 5"
at = [0, 120, 0]
rotate = { axis = [0, 0, 1], angle = "30 +- 0.1" }
[[body]]
name = "cone"
group = "attractor"
shape = "cone"
radius = 10
length = 20
radius_top = 4
mass = "0.5 kg"
at = [0, -120, 0]
axis = [1, 0, 0]
[[position]]
name = "A"
group = "attractor"
turn = 0
[[position]]
name = "B"
group = "attractor"
turn = 90
shift = [0, 0, 1]
[measurement]
method = "deflection"
angle = { A = "0.0123 rad", B = "-0.0121 rad" }
period = "412.3 +- 0.2 s"
decrement = 0.05
"""

NUMBERS = [0, -1, 1e308, -1e308, 1e-320, 1e-308, 1e300, 1e200, 1e120, 10**400, -(10**30), 2**64, 1e6, 1e-12]
STRINGS = ["nan", "inf", "-inf", "1e308 km", "1e-320 mm", "10 +- mm", "+- 1", "10 +-", "10 +- -1",
           "10.000(2)", "10.000(2) mm", "1.23(45)e-3", "10(2) +- 1", "10 ± 0.1 mm", "1e400", "", " ",
           "mm/m", "90 deg deg", "1 deg**2", "1 pi", "1 kg", "1 s", "1 rad", "1 turn", "1 arcsec", "0x10",
           "1_000", "1e999999999", "1" * 500, "10 mm mm", "10 20 mm", "10 (2)", "10(-2)", "nan +- 1",
           "1 +- nan", "1 furlong", "1 lightyear", "1 parsec", "1e-300 g/cm^3", "1e300 g/cm^3"]
UNITS = ["m", "mm", "km", "nm", "in", "kg", "g", "deg", "rad", "mm/m", "deg**2", "", "furlong", "lightyear",
         "g/cm^3", "kg/m^3", "s", "turn", "pi", "+- mm", "1e300 m", "Mpc", "fm", "%"]
WEIRD = [True, [], {}, [1], [[1, 2, 3]], {"a": 1}, [1, 2], [1, 2, 3, 4], ["x", "y", "z"], [0, 0, 0],
         [1e-320, 0, 0], [1e308, 1e308, 0], ["1 deg deg", 0, 1], ["1 +- 0.1", 0, 1], [True, 0, 0]]


def _toml_value(v) -> str:
    """TOML text of a value, every table inline (enough for a scene: key = value at the top)."""
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, int):
        return str(v)
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, str):
        return json.dumps(v, ensure_ascii=False)
    if isinstance(v, list):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{json.dumps(k)} = {_toml_value(x)}" for k, x in v.items()) + "}"
    raise TypeError(type(v))


def to_toml(data: dict) -> str:
    return "\n".join(f"{json.dumps(k)} = {_toml_value(v)}" for k, v in data.items()) + "\n"


def _paths(node, prefix=()):
    """Every (path, leaf) in nested dicts/lists."""
    if isinstance(node, dict):
        for k, v in node.items():
            yield from _paths(v, prefix + (k,))
    elif isinstance(node, list):
        for i, v in enumerate(node):
            yield from _paths(v, prefix + (i,))
    if prefix:
        yield prefix, node


def _set(data, path, value):
    node = data
    for p in path[:-1]:
        node = node[p]
    node[path[-1]] = value


def _mutate_leaf(rng: random.Random, leaf):
    r = rng.random()
    if isinstance(leaf, (int, float)) and not isinstance(leaf, bool) and r < 0.6:
        x = rng.choice(NUMBERS)
        return -leaf if rng.random() < 0.1 else (x if rng.random() < 0.7 else float(leaf) * rng.choice([1e300, 1e-300, -1]))
    if isinstance(leaf, str) and r < 0.5:
        if rng.random() < 0.5:
            return rng.choice(UNITS) if rng.random() < 0.5 else rng.choice(STRINGS)
        return f"{leaf} {rng.choice(UNITS)}" if rng.random() < 0.5 else leaf.replace("+-", rng.choice(["", "+- +-", "±", "+/-"]))
    choice = rng.random()
    if choice < 0.45:
        return rng.choice(STRINGS)
    if choice < 0.7:
        return rng.choice(NUMBERS)
    if choice < 0.95:
        return copy.deepcopy(rng.choice(WEIRD))
    return [copy.deepcopy(leaf)]


def mutate(rng: random.Random, data: dict) -> str:
    """TOML text of `data` after 1-3 random mutations (leaves, keys, types, nesting)."""
    for _ in range(rng.randint(1, 3)):
        paths = list(_paths(data))
        path, leaf = rng.choice(paths)
        r = rng.random()
        if r < 0.7:
            _set(data, path, _mutate_leaf(rng, leaf))
        elif r < 0.8 and isinstance(path[-1], str):  # drop a key
            node = data
            for p in path[:-1]:
                node = node[p]
            del node[path[-1]]
        elif r < 0.88:  # invent a key beside it
            node = data
            for p in path[:-1]:
                node = node[p]
            if isinstance(node, dict):
                node[rng.choice(["radious", "mass", "density", "material", "axis", "G", "name", "turn"])] = 1
        elif r < 0.96:  # wrap in a table or a list
            _set(data, path, {"value": leaf} if rng.random() < 0.5 else [leaf, copy.deepcopy(leaf)])
        else:  # nest deep
            depth = rng.choice([3, 50, 1000])
            _set(data, path, 0)
            text = to_toml(data)
            return text.replace("= 0\n", "= " + "[" * depth + "1" + "]" * depth + "\n", 1)
    return to_toml(data)


class _Hang(BaseException):
    """Raised by the alarm when one case runs too long (a BaseException, so no verb swallows it)."""


def _alarm(signum, frame):
    raise _Hang()


def run_cli(argv: list[str]) -> tuple[int, str, str, list]:
    """(exit code, stdout, stderr, warnings raised) of one in-process run of the command line."""
    out, err = io.StringIO(), io.StringIO()
    old = signal.signal(signal.SIGALRM, _alarm)
    signal.alarm(SECONDS_PER_CASE)
    try:
        with warnings.catch_warnings(record=True) as caught, contextlib.redirect_stdout(out), \
                contextlib.redirect_stderr(err):
            warnings.simplefilter("always")
            try:
                rc = main(argv)
            except SystemExit as exc:  # argparse usage errors
                rc = exc.code if isinstance(exc.code, int) else 2
    except _Hang:
        pytest.fail(f"hang (over {SECONDS_PER_CASE} s): {argv}")
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, old)
    return rc, out.getvalue(), err.getvalue(), [w for w in caught if not issubclass(w.category, DeprecationWarning)]


def _strict_json(text: str):
    def refuse(name):
        raise ValueError(f"non-finite number {name} in the JSON")
    return json.loads(text, parse_constant=refuse)


def _required_numbers(verb: str, data) -> dict:
    """Where the contract promises numbers in each verb's JSON: path -> value (numbers or lists)."""
    need = {}
    if verb == "check":
        for i, b in enumerate(data["bodies"]):
            for k in ("mass", "volume", "com", "inertia_com"):
                need[f"bodies[{i}].{k}"] = b[k]
        for g, t in data["groups"].items():
            for k in ("mass", "com", "inertia_axis"):
                need[f"groups[{g}].{k}"] = t[k]
    elif verb == "compare":
        for i, r in enumerate(data["results"]):
            for part in ("exact", "point"):
                for k in ("force", "torque", "torque_axis", "stiffness_axis", "energy"):
                    need[f"results[{i}].{part}.{k}"] = r[part][k]
    elif verb == "scan":
        for i, r in enumerate(data["rows"]):
            for k in ("value", "exact_torque_axis", "point_torque_axis", "exact_stiffness_axis", "force"):
                need[f"rows[{i}].{k}"] = r[k]
    elif verb == "fit":
        for i, r in enumerate(data["segments"]):
            for k in ("period", "decrement", "equilibrium", "amplitude"):
                need[f"segments[{i}].{k}"] = r[k]
    return need


def _not_finite(value) -> bool:
    if isinstance(value, list):
        return any(_not_finite(v) for v in value)
    return isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value)


def assert_promise(argv, rc, out, err, caught, file):
    """The promise for one outcome (see the module docstring)."""
    what = f"{argv}\n--- stderr:\n{err}\n--- input: {file}"
    assert not caught, f"warnings leaked: {[str(w.message) for w in caught]} {what}"
    assert rc in (0, 2, 3), f"exit {rc} {what}"
    if rc == 2:
        lines = err.splitlines()
        assert len(lines) == 1, f"refusal not one line {what}"
        assert "Traceback" not in err and "internal error" not in err, what
        if file is not None:
            assert os.path.basename(file) in lines[0], f"refusal does not name the file {what}"
        return
    if rc == 3:
        assert "tolerance" in err.lower() or "reach" in err.lower(), f"exit 3 without an unreached tolerance {what}"
    if "--json" in argv:
        data = _strict_json(out)
        bad = [k for k, v in _required_numbers(argv[0], data).items() if _not_finite(v)]
        assert not bad, f"null or non-finite where a number is expected: {bad[:5]} {what}"
    else:  # a table: no NaN among its numbers (the scene's own strings, e.g. a body named "nan", aside)
        text = out
        for word in sorted(_strings_of(file), key=len, reverse=True):
            text = text.replace(word, " ")
        assert not re.search(r"(?<![A-Za-z])nan(?![A-Za-z])", text, re.IGNORECASE), f"NaN in the output {what}"


def _strings_of(file) -> set[str]:
    """Every string in a scene file (names, units, values), when it parses as TOML."""
    try:
        data = tomllib.loads(open(file, encoding="utf-8").read())
    except Exception:
        return set()
    return {leaf.strip() for _, leaf in _paths(data) if isinstance(leaf, str) and leaf.strip()}


def _seeds(tmp_path):
    """(name, parsed scene, folder with its mesh files) for every seed scene."""
    demo_dir = tmp_path / "demo"
    demo_dir.mkdir()
    shutil.copy(demo_path().with_name("bracket.stl"), demo_dir / "bracket.stl")
    return {
        "small": tomllib.loads(SMALL),
        "good": tomllib.loads(GOOD),
        "two_bobs": tomllib.loads(TWO_BOBS),
        "demo": tomllib.loads(demo_path().read_text()),
    }, demo_dir


def _scene_cases(tmp_path, rng, n, weights):
    seeds, demo_dir = _seeds(tmp_path)
    names = list(seeds)
    for i in range(n):
        name = rng.choices(names, weights=weights)[0]
        data = json.loads(json.dumps(seeds[name]))
        text = mutate(rng, data)
        folder = demo_dir if name == "demo" else tmp_path
        path = folder / f"fuzz-{i}.toml"
        path.write_text(text)
        yield path


def test_check_keeps_the_promise_on_mutated_scenes(tmp_path):
    rng = random.Random(20261202)
    n = int(2500 * SCALE)
    outcomes = {0: 0, 2: 0, 3: 0}
    for path in _scene_cases(tmp_path, rng, n, weights=[6, 3, 3, 1]):
        argv = ["check", "--json", str(path)] if rng.random() < 0.7 else ["check", str(path)]
        rc, out, err, caught = run_cli(argv)
        assert_promise(argv, rc, out, err, caught, str(path))
        outcomes[rc] += 1
        path.unlink()
    # the mutations reach past loading often enough to test the output, and are refused often
    assert outcomes[0] > n // 20 and outcomes[2] > n // 2, outcomes


def test_compare_and_scan_keep_the_promise_on_mutated_scenes(tmp_path):
    rng = random.Random(14)
    n = int(200 * SCALE)
    outcomes = {0: 0, 2: 0, 3: 0}
    for path in _scene_cases(tmp_path, rng, n, weights=[4, 1, 1, 0]):
        r = rng.random()
        if r < 0.5:
            argv = ["compare", "--json", "--rtol", "1e-4", str(path)]
        elif r < 0.8:
            argv = ["scan", "--json", "--rtol", "1e-4", str(path), "--turn", rng.choice(["-10:10:10", "0:90:45"])]
        else:
            argv = ["scan", "--json", "--rtol", "1e-4", str(path), "--shift", rng.choice(["x:-5:5:5", "z:0:10:10"])]
        rc, out, err, caught = run_cli(argv)
        assert_promise(argv, rc, out, err, caught, str(path))
        outcomes[rc] += 1
    assert outcomes[0] > n // 10 and outcomes[2] > n // 4, outcomes


def _mutate_run(rng: random.Random, lines: list[str]) -> str:
    lines = list(lines)
    for _ in range(rng.randint(1, 3)):
        i = rng.randrange(len(lines))
        cells = lines[i].split(",")
        j = rng.randrange(len(cells))
        r = rng.random()
        if r < 0.6:
            cells[j] = rng.choice(["nan", "inf", "-inf", "1e308", "-1e308", "1e-320", "0", "", "x", "1e400",
                                   str(10**400), "A", '"', "1" * 200000, "\x00", "1,2", "-0", "1e300"])
        elif r < 0.75:
            cells.append(rng.choice(["1", "", "B"]))
        elif r < 0.85:
            cells = cells[:-1]
        elif r < 0.92:
            lines.insert(i, lines[i])
        else:
            del lines[i]
            if not lines:
                return ""
            continue
        lines[i] = ",".join(cells)
    return "\n".join(lines) + "\n"


def test_fit_keeps_the_promise_on_mutated_runs(tmp_path):
    rng = random.Random(300)
    run = demo_path().with_name("demo_run.csv").read_text().splitlines()
    comments = [ln for ln in run if ln.startswith("#")]
    rows = [ln for ln in run if not ln.startswith("#")]
    # a short run (the first 700 s, about 2.3 periods, of each 1800 s position) keeps the fits quick
    header, body = rows[0], rows[1:]
    short = [header] + [ln for ln in body if float(ln.split(",")[0]) % 1800 < 700]
    n = int(300 * SCALE)
    outcomes = {0: 0, 2: 0, 3: 0}
    for i in range(n):
        path = tmp_path / f"run-{i}.csv"
        path.write_text("\n".join(comments) + "\n" + _mutate_run(rng, short))
        argv = ["fit", "--json", str(path)]
        rc, out, err, caught = run_cli(argv)
        assert_promise(argv, rc, out, err, caught, str(path))
        outcomes[rc] += 1
        path.unlink()
    assert outcomes[0] > n // 10 and outcomes[2] > n // 4, outcomes


@pytest.mark.parametrize("text, rc", [
    ('[[body]]\nname = "b"\ngroup = "pendulum"\nshape = "sphere"\nradius = 1e120\ndensity = 1\n', 2),
    ("a = " + "[" * 1000 + "]" * 1000 + "\n", 2),
    ('[[body]]\nname = "b"\ngroup = "pendulum"\nshape = "sphere"\nradius = "10.000(2) mm"\ndensity = 1\n', 0),
])
def test_exit_codes_seen_by_the_shell(tmp_path, text, rc):
    path = tmp_path / "s.toml"
    path.write_text(text)
    done = subprocess.run([sys.executable, "-m", "truepull.cli.main", "check", str(path)],
                          capture_output=True, text=True, timeout=120)
    assert done.returncode == rc, done.stderr
    if rc == 2:
        assert len(done.stderr.splitlines()) == 1 and "s.toml" in done.stderr
    else:
        assert done.stderr == ""
