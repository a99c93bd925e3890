"""fit --into / reduce --data on a synthetic run: a solve_ivp run of the full equation of motion of the
closed-form balance in tests/synthetic_balance.py (true G not CODATA's), plus drift and noise."""

from __future__ import annotations

import json
import math
import shutil
import tomllib
from pathlib import Path

import numpy as np
import pytest

import synthetic_balance as sb
from test_run_fit import clean_run
from truepull.cli.fit import rebase_paths
from truepull.cli.main import main
from truepull.geometry.scene import load_scene, load_scene_text

NOISE = 1e-6


@pytest.fixture(autouse=True, scope="module")
def one_numba_thread():
    import numba

    before = numba.get_num_threads()
    numba.set_num_threads(1)
    yield
    numba.set_num_threads(before)


def _scene(tmp_path) -> str:
    # a placeholder [measurement]: fit --into / reduce --data replace it
    meas = 'method = "deflection"\nangle = { A = "0.001 rad", B = "-0.001 rad" }\nperiod = "300 s"\n'
    path = tmp_path / "scene.toml"
    path.write_text(sb.scene_text({"A": sb.PSI_A, "B": sb.PSI_B}, meas))
    return str(path)


def _run_csv(tmp_path) -> str:
    t, y, labels = clean_run(4e-3)
    y = y + np.random.default_rng(11).normal(0.0, NOISE, t.size)
    path = tmp_path / "run.csv"
    path.write_text("time,angle,position\n" + "".join(f"{a:.1f},{b:.12e},{c}\n" for a, b, c in zip(t, y, labels)))
    return str(path)


def _json(capsys, argv):
    code = main(argv + ["--json"])
    out = capsys.readouterr()
    assert code == 0, out.err
    return json.loads(out.out)


QUICK = ["--samples", "0", "--workers", "1", "--no-progress"]


def test_reduce_data_equals_fit_into_then_reduce_and_recovers_G(tmp_path, capsys):
    scene, run = _scene(tmp_path), _run_csv(tmp_path)
    new = str(tmp_path / "fitted.toml")
    fitted = _json(capsys, ["fit", run, "--into", scene, "--out", new])
    assert fitted["run"]["model"]["equation_of_motion"].startswith("second order")
    via_file = _json(capsys, ["reduce", new] + QUICK)
    direct = _json(capsys, ["reduce", scene, "--data", run] + QUICK)
    # the same fit, the same reduction: equal to far below the engine tolerance
    assert math.isclose(via_file["G"], direct["G"], rel_tol=1e-10)
    assert math.isclose(via_file["u_G"], direct["u_G"], rel_tol=1e-6)
    # truth: the G put into the solve_ivp run (synthetic_balance.G_TRUE, not CODATA)
    assert abs(direct["G"] - sb.G_TRUE) < 3 * direct["u_G"]
    assert direct["fit"]["run"]["drift"]["span"] > 0


def test_correlation_is_read_and_used_by_the_gum(tmp_path, capsys):
    # JCGM 100:2008 eq. (16): u_c^2 = sum_ij c_i c_j u_i u_j r_ij, against the budget's own rows
    scene, run = _scene(tmp_path), _run_csv(tmp_path)
    new = str(tmp_path / "fitted.toml")
    _json(capsys, ["fit", run, "--into", scene, "--out", new])
    m = load_scene(new).measurement
    r_ab = m.extra["angle_correlation"][0][1]
    assert 0.1 < abs(r_ab) < 1
    data = _json(capsys, ["reduce", new] + QUICK)
    rows = {b["input"]: b for b in data["budget"]}
    names = list(rows)
    r = np.eye(len(names))
    ia, ib = names.index("measurement.angle.A"), names.index("measurement.angle.B")
    r[ia, ib] = r[ib, ia] = r_ab
    cu = np.array([rows[n]["sensitivity"] * rows[n]["u"] for n in names])
    assert math.isclose(data["u_G"], math.sqrt(cu @ r @ cu), rel_tol=1e-9)
    assert not math.isclose(data["u_G"], math.sqrt(cu @ cu), rel_tol=1e-3)   # the correlation matters here


def test_angle_correlation_is_validated(tmp_path, capsys):
    meas = ('method = "deflection"\nangle = { A = "0.001 +- 1e-7 rad", B = "-0.001 +- 1e-7 rad" }\n'
            'period = "300 s"\nangle_correlation = [[1, 1.5], [1.5, 1]]\n')
    path = tmp_path / "bad.toml"
    path.write_text(sb.scene_text({"A": sb.PSI_A, "B": sb.PSI_B}, meas))
    assert main(["reduce", str(path), "--no-budget"]) == 2
    assert "angle_correlation" in capsys.readouterr().err
    # a whole number too large for a float (found by the fuzz test) is refused the same way
    path.write_text(sb.scene_text({"A": sb.PSI_A, "B": sb.PSI_B}, meas.replace("[[1, 1.5], [1.5, 1]]",
                                                                           f"[[1, 0.5], [{10**400}, 1]]")))
    assert main(["reduce", str(path), "--no-budget"]) == 2
    assert "between -1 and 1" in capsys.readouterr().err


def test_mesh_paths_are_rebased_to_the_new_folder(tmp_path):
    # the demo scene's mesh (bracket.stl) in folder a/, the new scene written in b/c/: it must load there
    demo = Path(__file__).resolve().parents[1] / "shapes"
    a, b = tmp_path / "a", tmp_path / "b" / "c"
    a.mkdir()
    b.mkdir(parents=True)
    shutil.copy(demo / "demo.toml", a / "demo.toml")
    shutil.copy(demo / "bracket.stl", a / "bracket.stl")
    text = (a / "demo.toml").read_text()
    new = rebase_paths(text, tomllib.loads(text), a, b)
    assert '"../../a/bracket.stl"' in new
    load_scene_text(new, str(b / "new.toml"), str(b))
