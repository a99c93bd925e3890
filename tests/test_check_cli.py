"""`truepull check`: table, JSON per the contract, warnings, and bad input -> exit 2 with one line."""

import json
import math
import subprocess
import sys

import pytest
import trimesh

from truepull.cli.main import main
from test_scene import BAD

PI = math.pi

TWO_BOBS = """
[scene]
title = "two bobs"
[units]
length = "mm"
[[body]]
name = "bob-east"
group = "pendulum"
shape = "sphere"
radius = 10
material = "tungsten"
at = [50, 0, 0]
[[body]]
name = "bob-west"
group = "pendulum"
shape = "sphere"
radius = 10
material = "tungsten"
at = [-50, 0, 0]
[[body]]
name = "big"
group = "attractor"
shape = "cylinder"
radius = 40
length = 80
mass = "5 kg"
at = [0, 120, 0]
[[position]]
name = "A"
group = "attractor"
turn = 0
"""


def run_check(tmp_path, text, *extra, capsys):
    path = tmp_path / "scene.toml"
    path.write_text(text)
    code = main(["check", *extra, str(path)])
    out, err = capsys.readouterr()
    return code, out, err


def test_json_follows_the_contract(tmp_path, capsys):
    code, out, err = run_check(tmp_path, TWO_BOBS, "--json", capsys=capsys)
    assert code == 0 and err == ""
    data = json.loads(out)
    assert set(data) == {"bodies", "groups", "warnings", "stated"}  # "stated": added, the contract keys kept
    assert [b["name"] for b in data["bodies"]] == ["bob-east", "bob-west", "big"]
    for b in data["bodies"]:
        assert set(b) == {"name", "group", "shape", "mass", "volume", "com", "inertia_com"}
        assert len(b["com"]) == 3 and len(b["inertia_com"]) == 3 and all(len(r) == 3 for r in b["inertia_com"])
    R, d, rho = 0.010, 0.050, 19250.0  # tungsten, from memory, typical handbook value (materials table)
    m = rho * 4 / 3 * PI * R**3
    assert data["bodies"][0]["mass"] == pytest.approx(m, rel=1e-12)
    assert data["bodies"][0]["inertia_com"][0][0] == pytest.approx(0.4 * m * R * R, rel=1e-12)
    pend = data["groups"]["pendulum"]
    assert set(pend) == {"mass", "com", "inertia_axis"}
    # two balls at +-d about the fibre: 2 (2/5 m R^2 + m d^2) (standard sphere formula + parallel axis,
    # from memory)
    assert pend["inertia_axis"] == pytest.approx(2 * (0.4 * m * R * R + m * d * d), rel=1e-12)
    assert pend["mass"] == pytest.approx(2 * m) and pend["com"] == pytest.approx([0, 0, 0], abs=1e-15)
    att = data["groups"]["attractor"]
    # cylinder about its own axis through the pivot at distance 0.12 m: m R^2 / 2 + m D^2 (standard
    # formula + parallel axis, from memory)
    assert att["inertia_axis"] == pytest.approx(5 * 0.04**2 / 2 + 5 * 0.12**2, rel=1e-12)
    assert data["warnings"] == []


def test_table_shows_units(tmp_path, capsys):
    code, out, _ = run_check(tmp_path, TWO_BOBS, capsys=capsys)
    assert code == 0
    assert "centre of mass (mm)" in out and "mass (kg)" in out and "bob-west" in out
    assert "(50, 0, 0)" in out and "no warnings" in out


def add_body(text, block):
    return text + "\n[[body]]\n" + block + "\n"


def warnings_of(tmp_path, text, capsys):
    code, out, err = run_check(tmp_path, text, "--json", capsys=capsys)
    assert code == 0, err
    return json.loads(out)["warnings"]


def test_cross_group_overlap_warns(tmp_path, capsys):
    text = add_body(TWO_BOBS, 'name = "clash"\ngroup = "attractor"\nshape = "sphere"\nradius = 5\n'
                              'density = 1000\nat = [55, 0, 0]')
    w = warnings_of(tmp_path, text, capsys)
    assert any("bob-east" in x and "clash" in x and "compare will refuse" in x for x in w)


def test_same_group_overlap_and_stray_hole_warn(tmp_path, capsys):
    text = add_body(TWO_BOBS, 'name = "extra"\ngroup = "pendulum"\nshape = "sphere"\nradius = 5\n'
                              'density = 1000\nat = [55, 0, 0]')
    text = add_body(text, 'name = "bore"\ngroup = "pendulum"\nshape = "cylinder"\nradius = 2\nlength = 30\n'
                          'density = 19250\nsubtract = true\nat = [50, 0, 0]')
    w = warnings_of(tmp_path, text, capsys)
    assert any("extra" in x and "counted twice" in x for x in w)
    assert any("hole bore is not inside" in x for x in w)


def test_touch_and_position_overlap_warn(tmp_path, capsys):
    # a ball resting on bob-east's top (centre 10 + 5 above it) and an attractor turned into the bobs
    text = add_body(TWO_BOBS, 'name = "cap"\ngroup = "attractor"\nshape = "sphere"\nradius = 5\n'
                              'density = 1000\nat = [50, 0, 15]')
    text = text.replace('name = "A"\ngroup = "attractor"\nturn = 0',
                        'name = "A"\ngroup = "attractor"\nturn = 0\n[[position]]\nname = "C"\n'
                        'group = "attractor"\nshift = [20, -120, 0]')
    w = warnings_of(tmp_path, text, capsys)
    assert any("bob-east" in x and "cap" in x and "touch" in x for x in w)
    assert any("at position C" in x and "overlap" in x for x in w)


def test_mesh_note_and_mass_plausibility(tmp_path, capsys):
    trimesh.creation.box(extents=(10, 10, 10)).export(tmp_path / "cube.stl")
    text = add_body(TWO_BOBS, 'name = "cube"\ngroup = "attractor"\nshape = "mesh"\nfile = "cube.stl"\n'
                              'density = 2700\nat = [0, -200, 0]')
    text = text.replace('mass = "5 kg"', 'mass = "5000 kg"')  # 5 t in a 0.4 l cylinder: 1.2e7 kg/m^3
    w = warnings_of(tmp_path, text, capsys)
    assert any("cube" in x and "12 faces" in x for x in w)
    assert any("big" in x and "density" in x for x in w)


def test_missing_groups_noted(tmp_path, capsys):
    text = TWO_BOBS.split("[[body]]\nname = \"big\"")[0]
    w = warnings_of(tmp_path, text, capsys)
    assert any("no group named attractor" in x for x in w)


@pytest.mark.parametrize("case", list(BAD), ids=list(BAD))
def test_bad_input_exit_2_one_line(case, tmp_path, capsys):
    text, key = BAD[case]
    code, out, err = run_check(tmp_path, text, capsys=capsys)
    assert code == 2
    assert out == ""
    lines = err.strip("\n").split("\n")
    assert len(lines) == 1 and lines[0].startswith("truepull check: ")
    assert "Traceback" not in err
    if key:
        assert key in lines[0]


def test_subprocess_exit_codes(tmp_path):
    good = tmp_path / "good.toml"
    good.write_text(TWO_BOBS)
    r = subprocess.run([sys.executable, "-m", "truepull.cli.main", "check", "--json", "--no-overlaps", str(good)],
                       capture_output=True, text=True, timeout=300)
    assert r.returncode == 0 and json.loads(r.stdout)["groups"]["attractor"]["mass"] == pytest.approx(5.0)
    bad = tmp_path / "bad.toml"
    bad.write_text(TWO_BOBS.replace("radius = 40", "radius = -40"))
    r = subprocess.run([sys.executable, "-m", "truepull.cli.main", "check", str(bad)],
                       capture_output=True, text=True, timeout=300)
    assert r.returncode == 2 and r.stdout == ""
    assert r.stderr.count("\n") == 1 and "body[big].radius" in r.stderr and "Traceback" not in r.stderr
    r = subprocess.run([sys.executable, "-m", "truepull.cli.main", "check", str(tmp_path / "none.toml")],
                       capture_output=True, text=True, timeout=300)
    assert r.returncode == 2 and r.stderr.count("\n") == 1


def test_density_in_another_unit_is_named(tmp_path, capsys):
    from scene_fixtures import DENSITY_IN_WRONG_UNIT

    code, out, err = run_check(tmp_path, DENSITY_IN_WRONG_UNIT, capsys=capsys)
    assert code == 0
    assert "copper: density 8.96e+06 kg/m^3 is not a solid's" in out and "fits kg/m^3, not g/cm^3" in out


def test_no_false_plausibility_warnings_on_a_plain_scene(tmp_path, capsys):
    code, out, err = run_check(tmp_path, TWO_BOBS, "--json", capsys=capsys)
    warnings = json.loads(out)["warnings"]
    assert not [w for w in warnings if "not a solid's" in w or "file_units" in w or "on the way" in w]
