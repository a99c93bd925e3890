"""`truepull scan`: CSV, JSON and PNG output, and bad input.

Outside reference: Newton's law for point masses, computed in the test.
"""

from __future__ import annotations

import csv
import io
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
name = "t1"
group = "pendulum"
shape = "point"
mass = 0.02
at = [30, 0, 0]
[[body]]
name = "t2"
group = "pendulum"
shape = "point"
mass = 0.02
at = [-30, 0, 0]
[[body]]
name = "s1"
group = "attractor"
shape = "point"
mass = 1.2
at = [0, 80, 10]
[[position]]
name = "A"
group = "attractor"
turn = 30
"""


def _newton(phi, shift=(0.0, 0.0, 0.0)):
    """Torque about z and force on the two test masses with the source turned by phi, then shifted (m)."""
    c, s = math.cos(phi), math.sin(phi)
    q = np.array([[c, -s, 0], [s, c, 0], [0, 0, 1]]) @ np.array([0.0, 0.08, 0.01]) + np.asarray(shift)
    tau, F = 0.0, np.zeros(3)
    for r in (np.array([0.03, 0, 0]), np.array([-0.03, 0, 0])):
        d = q - r
        f = G * 0.02 * 1.2 * d / np.linalg.norm(d) ** 3
        F += f
        tau += np.cross(r, f)[2]
    return tau, F


def _write(tmp_path):
    p = tmp_path / "scene.toml"
    p.write_text(SCENE)
    return str(p)


def test_csv_on_stdout_matches_newton(tmp_path, capsys):
    # reference: Newton's law for the point masses, computed by _newton above
    path = _write(tmp_path)
    assert main(["scan", path, "--turn", "0:90:30", "--workers", "1"]) == 0
    out = capsys.readouterr()
    rows = list(csv.reader(io.StringIO(out.out)))
    assert rows[0] == ["value_deg", "exact_torque_axis_N_m", "point_torque_axis_N_m",
                       "exact_stiffness_axis_N_m_per_rad", "point_stiffness_axis_N_m_per_rad", "fx_N", "fy_N", "fz_N",
                       "error_torque_axis_N_m", "error_stiffness_axis_N_m_per_rad", "error_force_N"]
    assert [float(r[0]) for r in rows[1:]] == [0.0, 30.0, 60.0, 90.0]
    scale = max(abs(_newton(math.radians(float(r[0])))[0]) for r in rows[1:])  # the torque vanishes at 0
    for r in rows[1:]:
        tau, F = _newton(math.radians(float(r[0])))
        assert abs(float(r[1]) - tau) <= 1e-9 * scale
        assert abs(float(r[2]) - tau) <= 1e-12 * scale
        assert np.linalg.norm(np.array([float(x) for x in r[5:8]]) - F) <= 1e-9 * np.linalg.norm(F)
        # stiffness -d tau / d theta of the pendulum = +d tau / d phi of the attractor: a central
        # difference of Newton's torque, exact and point model
        h = 1e-5
        phi = math.radians(float(r[0]))
        K = (_newton(phi + h)[0] - _newton(phi - h)[0]) / (2 * h)
        assert abs(float(r[3]) - K) <= 1e-6 * scale and abs(float(r[4]) - K) <= 1e-6 * scale
    assert "multipole" in out.err


def test_json_shift_from_a_position_and_png(tmp_path, capsys):
    # reference: Newton's law for the point masses at position A (turn 30 deg) shifted along z, by _newton;
    # the PNG signature from the PNG specification (ISO/IEC 15948, section 5.2)
    path = _write(tmp_path)
    png = tmp_path / "scan.png"
    assert main(["scan", path, "--shift", "z:0:20:10", "--position", "A", "--json", "--png", str(png),
                 "--workers", "1"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert [r["value"] for r in data["rows"]] == [0.0, 0.01, 0.02]  # metres
    for r in data["rows"]:
        assert set(r) >= {"value", "exact_torque_axis", "point_torque_axis", "exact_stiffness_axis", "force"}
        tau, F = _newton(math.radians(30), (0, 0, r["value"]))
        assert abs(r["exact_torque_axis"] - tau) <= 1e-12 * abs(tau)
        assert len(r["force"]) == 3
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_csv_file_and_bad_input(tmp_path, capsys):
    # reference: the contract's bad-input rule (CONTRACT.md): exit 2 with one line, no traceback
    path = _write(tmp_path)
    out = tmp_path / "t.csv"
    assert main(["scan", path, "--turn", "0:10:10", "--csv", str(out), "--workers", "1"]) == 0
    assert out.read_text().startswith("value_deg,exact_torque_axis_N_m")
    capsys.readouterr()
    for argv in (["--turn", "0:10"], ["--turn", "0:10:0"], ["--shift", "w:0:1:1"], ["--turn", "0:10:5", "--group", "x"],
                 ["--turn", "0:10:5", "--position", "nowhere"], ["--turn", "0:10:5", "--rtol", "-1"]):
        assert main(["scan", path, *argv, "--workers", "1"]) == 2
        err = capsys.readouterr().err
        assert err.count("\n") == 1 and "Traceback" not in err
