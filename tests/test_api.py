"""The Python API (truepull.api): closed forms through it, and the same numbers as the CLI's --json."""

import json
import math
import subprocess
import sys

import numpy as np
import pytest

import truepull
from truepull.cli.main import main

G = 6.6743e-11
R_PEND, R_ATTR, RHO = 0.01, 0.02, 11340.0
M1 = 4 / 3 * math.pi * R_PEND**3 * RHO
M2 = 5.0
PEND_AT = np.array([0.05, 0.0, 0.0])
ATTR_AT = np.array([0.05, 0.1, 0.0])


def two_spheres():
    return truepull.build_scene(
        [{"name": "bob", "group": "pendulum", "shape": "sphere", "radius": R_PEND, "density": RHO,
          "at": PEND_AT},
         {"name": "ball", "group": "attractor", "shape": "sphere", "radius": "20 mm", "mass": M2, "at": ATTR_AT}],
        title="two spheres", G=G)


def test_two_spheres_follow_newtons_law_through_the_api():
    # Newton's law of gravitation with the shell theorem (Newton, Principia, Book I, Props. 71 and 74):
    # two uniform spheres attract as points, F = G m1 m2 / d^2 along the line of centres
    c = truepull.compare(two_spheres())
    d = ATTR_AT - PEND_AT
    F = G * M1 * M2 / np.linalg.norm(d) ** 2 * d / np.linalg.norm(d)
    tau_z = np.cross(PEND_AT, F)[2]          # torque about the z axis through the origin: r x F
    assert c.exact_force.shape == (1, 3)
    true_err = np.abs(c.exact_force[0] - F)
    assert np.all(true_err <= c.error_force[0] + 1e-15 * np.abs(F).max())   # the estimate bounds the error
    assert abs(c.exact_torque_axis[0] - tau_z) <= c.error_torque_axis[0] + 1e-15 * abs(tau_z)
    # the corrections a point-mass reduction applies: exactly 1 for spheres (same closed form)
    table = c.corrections()
    f = table.factor("torque_axis")
    assert abs(f - 1.0) <= table.table()[0]["factor_error"] + 1e-14
    assert table.apply(2.0, "torque_axis") == pytest.approx(2.0 * f, rel=1e-15)
    # every centre lies at z = 0, so the force along z vanishes by symmetry: exact and point are both
    # within the error of zero there, and the factor says nothing
    assert table.factor("force_z") is None


def test_field_of_a_sphere_is_a_points_field():
    # shell theorem (Newton, Principia, Book I, Prop. 71): outside, g = -G M r / |r|^3, U = -G M / |r|
    p = np.array([[0.05, 0.3, 0.1], [0.2, 0.1, -0.1]])
    f = truepull.field(two_spheres(), p)
    r = p - ATTR_AT
    n = np.linalg.norm(r, axis=1)
    g = -G * M2 * r / n[:, None] ** 3
    assert np.all(np.linalg.norm(f.field - g, axis=1) <= f.error_field + 1e-14 * np.abs(g).max())
    assert np.allclose(f.potential, -G * M2 / n, rtol=1e-13)
    assert list(f.table()[0])[:3] == ["x_m", "y_m", "z_m"]


def _cli_json(capsys, *argv):
    capsys.readouterr()
    code = main([*argv, "--json"])
    out = capsys.readouterr().out
    assert code in (0, 3)
    return json.loads(out)


def test_api_numbers_equal_the_cli_json_for_the_demo(capsys):
    path = str(truepull.demo_path())
    scene = truepull.load_scene(path)
    # the API's to_json is, number for number, what the verb prints (both through one route)
    assert truepull.compare(scene, position="A").to_json() == _cli_json(capsys, "compare", path, "--position", "A")
    assert truepull.check(scene).to_json() == _cli_json(capsys, "check", path)
    pts = "0,0,50:0,0,150:3"       # in the scene's length unit on the command line, metres in the API
    f = scene.length_factor
    line = (np.array([0, 0, 50]) * f, np.array([0, 0, 150]) * f, 3)
    assert truepull.field(scene, line=line).to_json() == _cli_json(capsys, "field", path, "--line", pts)


def test_scan_through_the_api_equals_the_cli(tmp_path, capsys):
    scene_file = tmp_path / "two.toml"
    scene_file.write_text(truepull.scene_toml(
        [{"name": "bob", "group": "pendulum", "shape": "sphere", "radius": R_PEND, "density": RHO, "at": PEND_AT},
         {"name": "ball", "group": "attractor", "shape": "sphere", "radius": R_ATTR, "mass": M2, "at": ATTR_AT}]))
    api = truepull.scan(str(scene_file), turn="0:90:45", workers=1)
    cli = _cli_json(capsys, "scan", str(scene_file), "--turn", "0:90:45", "--workers", "1")
    assert api.to_json() == cli
    assert list(api.values) == [0.0, 45.0, 90.0]
    # Newton's law (as above) for the turned attractor: tau_z = (r x F)_z
    for phi, tau in zip(np.radians(api.values), api.exact_torque_axis):
        c, s = math.cos(phi), math.sin(phi)
        at = np.array([c * ATTR_AT[0] - s * ATTR_AT[1], s * ATTR_AT[0] + c * ATTR_AT[1], 0.0])
        d = at - PEND_AT
        F = G * M1 * M2 * d / np.linalg.norm(d) ** 3
        assert tau == pytest.approx(np.cross(PEND_AT, F)[2], rel=1e-9, abs=1e-25)
    assert api.table()[1]["value_deg"] == 45.0


def test_built_scene_is_validated_like_a_file():
    with pytest.raises(truepull.InputError) as exc:
        truepull.build_scene([{"name": "x", "group": "pendulum", "shape": "sphere", "radius": -1, "density": 1,
                               "at": [0, 0, 0]}])
    assert "radius" in exc.value.one_line()


def test_python_dash_m_truepull_runs_the_command():
    r = subprocess.run([sys.executable, "-m", "truepull", "--help"], capture_output=True, text=True, timeout=120)
    assert r.returncode == 0 and "usage: truepull" in r.stdout


def test_every_public_name_has_a_numpydoc_docstring():
    import truepull.api as api

    for name in api.__all__:
        obj = getattr(truepull, name)
        assert obj.__doc__ and obj.__doc__.strip(), name
        if callable(obj) and not isinstance(obj, type) and name not in ("InputError",):
            if name not in ("scene_toml", "demo_path", "demo_run_path"):
                assert "Returns\n    -------" in obj.__doc__, name


def test_the_readme_example_runs_and_corrects_the_point_torque(capsys):
    import re
    from pathlib import Path

    text = (Path(__file__).resolve().parent.parent / "README.md").read_text()
    block = re.findall(r"```python\n(.*?)```", text, flags=re.S)[0]
    scope = {}
    exec(block, scope)
    c, k = scope["c"], scope["k"]
    # corrected point torque = exact torque (the factor's definition, exact / point)
    assert k.apply(c.point_torque_axis[0], "torque_axis", "A") == pytest.approx(c.exact_torque_axis[0], rel=1e-14)


def test_reduce_through_the_api_equals_the_cli_and_its_corrections_chain_to_G(capsys):
    path = str(truepull.demo_path())
    r = truepull.reduce(path, budget=False, rtol=1e-6)
    assert r.to_json() == _cli_json(capsys, "reduce", path, "--no-budget", "--rtol", "1e-6")   # the second run reuses the pairs
    # the corrections are factors whose product takes the point-mass G to G (their definition in
    # the contract); a reduction of one's own applies them the same way
    product = math.prod(c["factor"] for c in r.corrections())
    assert r.G_point * product == pytest.approx(r.G, rel=1e-12)


def test_bias_what_ifs_through_the_api_equal_the_cli(tmp_path, capsys):
    # one route: the verb calls truepull.bias; the offset's torque after is Newton's law (as above) for
    # the moved ball, and the gradient what-if (given by name in the API) is the verb's --gradient
    scene_file = tmp_path / "two.toml"
    scene_file.write_text(truepull.scene_toml(
        [{"name": "bob", "group": "pendulum", "shape": "sphere", "radius": R_PEND, "density": RHO, "at": PEND_AT},
         {"name": "ball", "group": "attractor", "shape": "sphere", "radius": R_ATTR, "mass": M2, "at": ATTR_AT}],
        G=G))
    api = truepull.bias(str(scene_file), offset=[("ball", (0.002, 0.0, 0.0))], gradient=[("attractor", 1e-3)],
                        table=False)
    cli = _cli_json(capsys, "bias", str(scene_file), "--no-table", "--offset", "ball:0.002,0,0",
                    "--gradient", "attractor:1e-3")
    assert {k: v for k, v in cli.items() if k not in ("reached", "not_reached")} == api.to_json()
    d = ATTR_AT + [0.002, 0.0, 0.0] - PEND_AT
    F = G * M1 * M2 * d / np.linalg.norm(d) ** 3
    assert api.what_ifs[0].torque_after == pytest.approx(np.cross(PEND_AT, F)[2], rel=1e-9)
    assert [w.kind for w in api.what_ifs] == ["offset", "gradient"]
