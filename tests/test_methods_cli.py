"""`truepull reduce` with the acceleration and servo methods from the command line: several
[[measurement]] tables side by side, --method, and the one-line refusals (exit 2) of bad tables."""

from __future__ import annotations

import json
import math

import pytest

import synthetic_methods as sm
from truepull.cli.main import main

QUICK = ["--samples", "0", "--workers", "1", "--no-progress"]
PSI = {"A": 0.0, "B": -2 * sm.ANGLE}


def _alpha():
    return sm.G_TRUE * sm.fft_amplitudes(lambda p: sm.sphere_torque(p, G=1.0))[2] / sm.INERTIA_SPHERES


def two_methods_text():
    alpha = _alpha()
    tau = {p: 1e-13 - sm.sphere_torque(psi) for p, psi in PSI.items()}
    acc = f'[[measurement]]\nmethod = "acceleration"\nharmonic = 2\nacceleration = "{alpha!r} +- {1e-5 * alpha!r}"\n'
    servo = ('[[measurement]]\nmethod = "servo"\ntorque = { '
             + ", ".join(f'{p} = "{t!r} +- {abs(t) * 2e-5!r} N m"' for p, t in tau.items()) + " }\n")
    return sm.scene_text(acc + "\n" + servo, positions=PSI)


def test_two_methods_side_by_side(tmp_path, capsys):
    path = tmp_path / "two.toml"
    path.write_text(two_methods_text())
    assert main(["reduce", str(path), "--json", *QUICK]) == 0
    data = json.loads(capsys.readouterr().out)
    assert [r["method"] for r in data["methods"]] == ["acceleration", "servo"]
    assert data["G"] == data["methods"][0]["G"]
    for r in data["methods"]:
        assert abs(r["G"] / sm.G_TRUE - 1) < 1e-8  # both recover the true G (closed forms)
    c = data["comparison"][0]
    a, s = data["methods"]
    assert c["difference"] == pytest.approx(s["G"] - a["G"], rel=1e-12, abs=1e-30)
    # no shared inputs with stated uncertainties: u of the difference is sqrt(u_a^2 + u_b^2)
    assert c["shared_inputs"] == []
    assert c["u_difference"] == pytest.approx(math.hypot(a["u_G"], s["u_G"]), rel=1e-12)
    assert main(["reduce", str(path), *QUICK]) == 0
    text = capsys.readouterr().out
    assert "methods side by side" in text and "servo - acceleration" in text
    assert main(["reduce", str(path), "--json", "--method", "servo", *QUICK]) == 0
    one = json.loads(capsys.readouterr().out)
    assert one["method"] == "servo" and "methods" not in one



BAD = [
    ('method = "acceleration"\nacceleration = "1e-9"\n', "measurement.harmonic"),
    ('method = "acceleration"\nharmonic = 2\n', "measurement.acceleration"),
    ('method = "acceleration"\nharmonic = 0\nacceleration = "1e-9"\n', "measurement.harmonic"),
    ('method = "acceleration"\nharmonic = 2.0\nacceleration = "1e-9"\n', "measurement.harmonic"),
    ('method = "acceleration"\nharmonic = 2\nacceleration = "1e-9 m"\n', "measurement.acceleration"),
    ('method = "acceleration"\nharmonic = 2\nacceleration = "1e-9"\ngroup = "nobody"\n', "measurement.group"),
    ('method = "acceleration"\nharmonic = 2\nacceleration = "1e-9"\nperiod = "300 s"\n', "measurement.period"),
    ('method = "acceleration"\nharmonic = 3\nacceleration = "1e-9"\n', "measurement.harmonic"),
    ('method = "servo"\n', "measurement.torque"),
    ('method = "servo"\ntorque = { A = "1e-14 N m", B = "2e-14 N m" }\nvoltage = { A = 1, B = 2 }\n',
     "measurement.voltage"),
    ('method = "servo"\nvoltage = { A = 1, B = 2 }\n', "measurement.torque_per_volt2"),
    ('method = "servo"\ntorque = { A = "1e-14 N m" }\n', "measurement.torque"),
    ('method = "servo"\ntorque = { A = "1e-14 N m", B = "1e-14 s" }\n', "measurement.torque.B"),
    ('method = "servo"\ntorque = { A = "1e-14 N m", C = "2e-14 N m" }\n', "measurement.torque.C"),
    ('method = "servo"\ntorque = { A = "1e-14 N m", B = "2e-14 N m" }\nharmonic = 2\n', "measurement.harmonic"),
    ('method = "servo"\ntorque = { A = "1e-14 N m", B = "2e-14 N m" }\nperiod = "100 s"\n', "measurement.period"),
]


@pytest.mark.parametrize("table, key", BAD)
def test_bad_measurement_tables_exit_2(tmp_path, capsys, table, key):
    path = tmp_path / "bad.toml"
    path.write_text(sm.scene_text("[measurement]\n" + table, positions=PSI))
    assert main(["reduce", str(path), *QUICK]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and key in err[0] and "Traceback" not in err[0]


def test_two_tables_of_one_method_and_an_unknown_method_option_exit_2(tmp_path, capsys):
    t = '[[measurement]]\nmethod = "acceleration"\nharmonic = 2\nacceleration = "1e-9"\n'
    path = tmp_path / "twice.toml"
    path.write_text(sm.scene_text(t + t, positions=PSI))
    assert main(["reduce", str(path), *QUICK]) == 2
    assert "measurement[#2].method" in capsys.readouterr().err
    path.write_text(two_methods_text())
    assert main(["reduce", str(path), "--method", "swing", *QUICK]) == 2
    assert "--method" in capsys.readouterr().err


@pytest.mark.parametrize("method", ["acceleration", "servo"])
def test_the_demos_reduce(method, capsys):
    # the demos' numbers were made with an invented true G of 6.6790e-11 and small invented noise
    # (shapes/make_demo_methods.py): the reduction must land within a few of the stated u
    import truepull.shapes as shapes

    assert main(["reduce", str(shapes.method_demo_path(method)), "--json", "--no-budget", "--no-progress"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["method"] == method
    assert abs(data["G"] / 6.6790e-11 - 1) < 2e-5


def test_report_shows_every_method(tmp_path, capsys):
    path = tmp_path / "two.toml"
    path.write_text(two_methods_text())
    out = tmp_path / "rep"
    code = main(["report", str(path), "--out", str(out), "--no-view", "--no-bias", "--samples", "0", "--workers", "1"])
    assert code in (0, 3)
    md = (out / "report.md").read_text()
    assert "G by acceleration" in md and "G by servo" in md and "servo - acceleration" in md
    assert (out / "budget-acceleration.png").is_file() and (out / "budget-servo.png").is_file()
    info = json.loads((out / "report.json").read_text())
    assert [r["method"] for r in info["sections"]["reduce"]["methods"]] == ["acceleration", "servo"]
