"""`truepull bias`: the ranked table, the JSON shape, what-ifs and bad input.

Outside reference: Newton's law for point masses and uniform spheres (shell theorem), computed here.
"""

from __future__ import annotations

import json
import math

import numpy as np

from truepull.cli.main import main

G = 6.6743e-11
SCENE = """
[scene]
G = 6.6743e-11
[units]
length = "mm"
[[body]]
name = "bob"
group = "pendulum"
shape = "point"
mass = 0.02
at = ["30 +- 0.01", 0, 0]
[[body]]
name = "ball"
group = "attractor"
shape = "sphere"
radius = 20
mass = "1.2 +- 0.001"
at = [10, 60, 0]
[[position]]
name = "A"
group = "attractor"
turn = 0
[[position]]
name = "B"
group = "attractor"
turn = 180
"""
MEASUREMENT = """
[measurement]
method = "deflection"
angle = { A = "0.002 rad", B = "-0.002 rad" }
period = "300 +- 0.1 s"
"""


def _tau(r, q, m=0.02, M=1.2):
    d = q - r
    return G * m * M * np.cross(r, d)[2] / np.linalg.norm(d) ** 3


def _write(tmp_path, text):
    p = tmp_path / "scene.toml"
    p.write_text(text)
    return str(p)


def test_json_rows_and_what_ifs(tmp_path, capsys):
    path = _write(tmp_path, SCENE)
    assert main(["bias", path, "--json", "--workers", "1", "--offset", "ball:1,0,0", "--void", "ball:5:0,5,0"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["position"] == "A"
    rows = {(r["body"], r["parameter"]): r for r in data["rows"]}
    for r in data["rows"]:
        assert set(r) >= {"body", "parameter", "value", "d_torque_axis", "u", "torque_ppm", "d_G", "G_ppm"}
        assert r["d_G"] is None and r["G_ppm"] is None  # no measurement
    assert rows[("ball", "at.z")]["u"] is None and rows[("ball", "at.z")]["torque_ppm"] is None
    r, q = np.array([0.03, 0, 0]), np.array([0.01, 0.06, 0])
    tau = _tau(r, q)
    # mass: linear (Newton); ppm per stated u
    m = rows[("ball", "mass")]
    assert abs(m["d_torque_axis"] - tau / 1.2) <= 1e-12 * abs(tau)
    assert abs(m["torque_ppm"] - 1e6 * 0.001 / 1.2) <= 1e-6
    assert abs(rows[("bob", "at.x")]["u"] - 1e-5) < 1e-20
    ppms = [abs(x["torque_ppm"]) for x in data["rows"] if x["torque_ppm"] is not None]
    assert ppms == sorted(ppms, reverse=True)
    offset, void = data["what_if"]
    assert offset["kind"] == "offset" and abs(offset["torque_after"] - _tau(r, q + [0.001, 0, 0])) <= 1e-12 * abs(tau)
    m_void = -(1.2 / (4 / 3 * math.pi * 0.02**3)) * 4 / 3 * math.pi * 0.005**3
    expect = tau + _tau(r, q + [0, 0.005, 0], M=m_void)
    assert abs(void["torque_after"] - expect) <= 1e-12 * abs(tau)
    assert void["G_ppm"] is None


def test_table_with_a_measurement_has_g_columns(tmp_path, capsys):
    path = _write(tmp_path, SCENE + MEASUREMENT)
    png = tmp_path / "bias.png"
    assert main(["bias", path, "--workers", "1", "--body", "ball", "--flatten", "ball:0.02", "--png", str(png)]) == 0
    out = capsys.readouterr().out
    assert "G (ppm)" in out and "G model: first order (deflection)" in out and "what if" in out
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    only_what_ifs = tmp_path / "what-if.png"
    assert main(["bias", path, "--no-table", "--offset", "ball:1,0,0", "--png", str(only_what_ifs)]) == 0
    assert only_what_ifs.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    capsys.readouterr()
    assert main(["bias", path, "--json", "--workers", "1", "--body", "ball"]) == 0
    data = json.loads(capsys.readouterr().out)
    mass = next(r for r in data["rows"] if r["parameter"] == "mass")
    # first-order model: G ~ I / (tau_A - tau_B); only the ball's mass changes: d ln G / dM = -1/M
    assert abs(mass["G_ppm"] - (-1e6 * 0.001 / 1.2)) <= 1e-6


def test_bad_what_ifs_exit_2(tmp_path, capsys):
    path = _write(tmp_path, SCENE)
    for argv in (["--flatten", "bob:0.1"], ["--void", "ball:30:0,0,0"], ["--offset", "ball:1,2"],
                 ["--offset", "nobody:1,2,3"], ["--void", "ball:5"], ["--position", "C"]):
        assert main(["bias", path, "--no-table", "--workers", "1", *argv]) == 2
        err = capsys.readouterr().err
        assert err.count("\n") == 1 and "Traceback" not in err


UNREACHABLE = """
[units]
length = "mm"
[[body]]
name = "bob"
group = "pendulum"
shape = "point"
mass = "0.02 +- 0.0001"
at = [50, 0, 0]
[[body]]
name = "big"
group = "attractor"
shape = "cylinder"
radius = 40
length = 80
density = 8000
at = [0, 120, 0]
"""


def test_unreached_tolerance_exits_3_naming_what(tmp_path, capsys):
    path = _write(tmp_path, UNREACHABLE)
    # 1e-15 is below what double precision quadrature of a cylinder can reach (rounding ~1e-16 per
    # term), as in compare's own exit-3 test
    code = main(["bias", path, "--json", "--workers", "1", "--body", "bob", "--rtol", "1e-15"])
    out, err = capsys.readouterr()
    assert code == 3
    data = json.loads(out)
    assert data["reached"] is False and "torque" in data["not_reached"]
    assert all("reached" in r for r in data["rows"])
    assert err.count("\n") == 1 and "tolerance not reached for torque" in err
    code = main(["bias", path, "--workers", "1", "--body", "bob", "--rtol", "1e-15"])
    out, err = capsys.readouterr()
    assert code == 3 and "tolerance NOT reached for: torque" in out
    assert main(["bias", path, "--json", "--workers", "1", "--body", "bob", "--rtol", "1e-8"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["reached"] is True and data["not_reached"] == [] and all(r["reached"] for r in data["rows"])
