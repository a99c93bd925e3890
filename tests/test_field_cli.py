"""`truepull field`: CSV, JSON and VTK output, the gradient zero along a line, and bad input.

Outside reference: Newton's law for point masses, computed in the test; the ring-axis field for the
gradient zero (see tests/test_field_at_points.py for its derivation).
"""

from __future__ import annotations

import csv
import json

import numpy as np
import pytest

from truepull.cli.main import main

G = 6.6743e-11
SCENE = """
[scene]
G = 6.6743e-11
[units]
length = "mm"
[[body]]
name = "east"
group = "attractor"
shape = "point"
mass = 1.5
at = [30, 0, 0]
[[body]]
name = "west"
group = "attractor"
shape = "point"
mass = 1.5
at = [-30, 0, 0]
[[body]]
name = "bob"
group = "pendulum"
shape = "sphere"
radius = 5
density = 1000
at = [0, 0, 100]
[[position]]
name = "up"
group = "attractor"
shift = [0, 0, 10]
"""
MASSES = np.array([[0.03, 0, 0], [-0.03, 0, 0]])


def _newton(p, shift=(0, 0, 0)):
    """U, g, T of the two 1.5 kg points by Newton's law."""
    U, g, T = 0.0, np.zeros(3), np.zeros((3, 3))
    for c in MASSES + np.asarray(shift):
        d = c - p
        r = np.linalg.norm(d)
        U -= G * 1.5 / r
        g += G * 1.5 * d / r ** 3
        T += G * 1.5 * (3 * np.outer(d, d) - r * r * np.eye(3)) / r ** 5
    return U, g, T


@pytest.fixture()
def scene(tmp_path):
    p = tmp_path / "s.toml"
    p.write_text(SCENE)
    return str(p)


def test_json_points_csv(scene, tmp_path, capsys):
    pts = tmp_path / "p.csv"
    pts.write_text("name,z,y,x\na,5,0,0\nb,10,20,40\n")
    assert main(["field", scene, "--points", str(pts), "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out["source"] == "attractor" and out["G"] == G and len(out["rows"]) == 2
    for row, p in zip(out["rows"], [[0, 0, 0.005], [0.04, 0.02, 0.01]]):
        U, g, T = _newton(np.array(p))   # Newton's law
        assert np.allclose(row["at"], p)
        assert abs(row["potential"] - U) <= row["error_potential"]
        assert np.linalg.norm(np.array(row["field"]) - g) <= row["error_field"]
        assert np.linalg.norm(np.array(row["gradient"]) - T) <= row["error_gradient"]


def test_position_moves_the_source(scene, capsys):
    assert main(["field", scene, "--line", "0,0,0:0,0,20:3", "--position", "up", "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)["rows"]
    U, g, T = _newton(np.array(rows[1]["at"]), shift=(0, 0, 0.01))   # Newton's law, shifted masses
    assert abs(rows[1]["potential"] - U) <= rows[1]["error_potential"]


def test_csv_line_and_gradient_zero(scene, tmp_path, capsys):
    # two equal points at +-a on the x axis: on the z axis g_z = -G M z/(z^2+a^2)^1.5 (ring-axis form)
    # and d g_z / dz vanishes at z = a / sqrt(2)
    out = tmp_path / "line.csv"
    assert main(["field", scene, "--line", "0,0,1:0,0,60:40", "--out", str(out)]) == 0
    text = capsys.readouterr().out
    assert "vanishes at" in text
    z0 = 0.03 / np.sqrt(2)
    shown = float(text.split("vanishes at [")[1].split("]")[0].split(",")[2])
    assert abs(shown - z0) < 1e-11
    rows = list(csv.DictReader(out.open()))
    assert len(rows) == 40 and "error_gradient_per_s2" in rows[0]
    p = np.array([float(rows[7][k]) for k in ("x_m", "y_m", "z_m")])
    U, g, T = _newton(p)
    assert abs(float(rows[7]["gz_m_per_s2"]) - g[2]) <= float(rows[7]["error_field_m_per_s2"])
    assert abs(float(rows[7]["Tzz_per_s2"]) - T[2, 2]) <= float(rows[7]["error_gradient_per_s2"])


def test_csv_to_stdout_and_grid_vtk(scene, tmp_path, capsys):
    pv = pytest.importorskip("pyvista")
    vts = tmp_path / "g.vts"
    assert main(["field", scene, "--grid", "0:10:3,5:5:1,0:20:2", "--vtk", str(vts)]) == 0
    lines = capsys.readouterr().out.strip().splitlines()
    assert lines[0].startswith("x_m,y_m,z_m,potential_J_per_kg") and len(lines) == 7
    grid = pv.read(str(vts))
    assert grid.n_points == 6 and grid.dimensions == (3, 1, 2)
    # each VTK point carries the value computed at its own coordinates (Newton's law)
    for k in range(grid.n_points):
        U, g, T = _newton(np.asarray(grid.points[k]))
        assert abs(grid.point_data["potential"][k] - U) <= grid.point_data["error_potential"][k]
        assert np.allclose(grid.point_data["gradient"][k], T.ravel(), rtol=1e-9, atol=1e-20)


def test_grid_lengths_take_units(scene, capsys):
    # the scene's unit is mm: a unit after START and STOP, or once after STOP for both, gives the
    # points np.linspace makes of the ends in m (x fastest); the field there is Newton's law
    assert main(["field", scene, "--grid", "-0.5 cm:5 mm:3,5:5:1,0:2 cm:2", "--json"]) == 0
    rows = json.loads(capsys.readouterr().out)["rows"]
    xs, zs = np.linspace(-0.005, 0.005, 3), np.linspace(0.0, 0.02, 2)
    expect = [(x, 0.005, z) for z in zs for x in xs]
    assert len(rows) == 6
    for row, p in zip(rows, expect):
        assert np.allclose(row["at"], p, rtol=1e-14, atol=1e-18)
        U, g, T = _newton(np.asarray(p))
        assert np.allclose(row["field"], g, rtol=1e-9, atol=1e-20)
    # the same grid with a shared unit and in the scene's own unit
    for spec in ("-5:5 mm:3,0.5:0.5 cm:1,0:0.02 m:2", "-5:5:3,5:5:1,0:20:2"):
        assert main(["field", scene, f"--grid={spec}", "--json"]) == 0  # '=': the spec starts with '-'
        again = json.loads(capsys.readouterr().out)["rows"]
        for a, b in zip(again, rows):
            assert np.allclose(a["at"], b["at"], rtol=1e-14, atol=1e-18)
            assert np.allclose(a["field"], b["field"], rtol=1e-12, atol=1e-22)


@pytest.mark.parametrize("spec, words", [("0:1 s:3,0:0:1,0:0:1", "not a length unit"),
                                         ("0 mm:1:3,0:0:1,0:0:1 kg", "whole number"),
                                         ("0:inf mm:3,0:0:1,0:0:1", "--grid")])
def test_grid_units_refused_in_one_line(scene, spec, words, capsys):
    assert main(["field", scene, "--grid", spec]) == 2
    err = capsys.readouterr().err.strip()
    assert words in err and "\n" not in err and "Traceback" not in err


def test_vtk_polydata(scene, tmp_path, capsys):
    pv = pytest.importorskip("pyvista")
    vtp = tmp_path / "l.vtp"
    assert main(["field", scene, "--line", "0,0,5:0,0,9:5", "--vtk", str(vtp), "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["rows"]
    mesh = pv.read(str(vtp))
    assert mesh.n_points == 5 and mesh.point_data["field"].shape == (5, 3)


@pytest.mark.parametrize("argv", [
    ["--line", "0,0:1,1,1:5"],
    ["--line", "0,0,0:1,1,1:1"],
    ["--line", "0,0,0:1,1,1"],
    ["--line", "0,0,0:0,0,0:4"],
    ["--line", "0,0,x:1,1,1:4"],
    ["--grid", "0:1:2,0:1:2"],
    ["--grid", "0:1:1,0:1:2,0:1:2"],
    ["--line", "30,0,0:40,0,0:2"],          # the first point is a point mass's position
    ["--line", "0,0,0:0,0,1:3", "--source", "nothing"],
    ["--line", "0,0,0:0,0,1:3", "--position", "nowhere"],
    ["--line", "0,0,0:0,0,1:3", "--vtk", "out.png"],
])
def test_bad_input_one_line(scene, argv, capsys, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    assert main(["field", scene, *argv]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("truepull") and "\n" not in err and "Traceback" not in err


def test_points_csv_missing_column(scene, tmp_path, capsys):
    pts = tmp_path / "p.csv"
    pts.write_text("x,y\n1,2\n")
    assert main(["field", scene, "--points", str(pts)]) == 2
    assert "missing column(s) z" in capsys.readouterr().err
    pts.write_text("x,y,z\n1,2,abc\n")
    assert main(["field", scene, "--points", str(pts)]) == 2
    assert "line 2" in capsys.readouterr().err
