"""Thermal expansion of a scene ([conditions] temperature, per-body or material expansion).

Outside reference: the similarity law of Newtonian gravity. Scaling every length by s about a fixed
point with the masses fixed scales the force by s^-2 and the torque, stiffness and energy by s^-1
(F = G m m' / r^2, torque = r x F); here s = 1 + alpha (T - T_ref), the linear expansion law.
"""

from __future__ import annotations

import numpy as np
import pytest

from truepull.geometry.errors import InputError
from truepull.geometry.materials import MATERIALS
from truepull.geometry.scene import load_scene_text
from truepull.integrate.interaction import compare_groups

SCENE = """
[units]
length = "mm"
[frame]
pivot = [1, 2, 0]
{conditions}
[[body]]
name = "bob"
group = "pendulum"
shape = "cylinder"
radius = 6
length = 12
at = [40, 3, 0]
mass = "0.0123 +- 1e-6"
expansion = "{alpha}"
[[body]]
name = "big"
group = "attractor"
shape = "box"
size = [30, 40, 50]
at = [0, 90, 10]
material = "{material}"
"""


def scene(conditions, alpha="16.5e-6 1/K", material="copper"):
    return load_scene_text(SCENE.format(conditions=conditions, alpha=alpha, material=material))


def test_similarity_law_force_s2_torque_s1():
    cold = scene("")
    hot = scene('[conditions]\ntemperature = "45 +- 0.1 degC"\nfixed_point = [1, 2, 0]')
    s = 1 + MATERIALS["copper"].alpha * (45 - 20)  # both parts copper-like: the same s
    assert hot.body("big").mass == pytest.approx(cold.body("big").mass, rel=1e-14)
    a, b = compare_groups(cold, rtol=1e-11), compare_groups(hot, rtol=1e-11)
    assert np.allclose(b.exact.force, a.exact.force / s**2, rtol=2e-10, atol=0)
    assert b.exact.torque_axis == pytest.approx(a.exact.torque_axis / s, rel=2e-10)
    assert b.exact.stiffness_axis == pytest.approx(a.exact.stiffness_axis / s, rel=2e-10)
    assert b.exact.energy == pytest.approx(a.exact.energy / s, rel=2e-10)
    # and the change is real: far above the tolerance
    assert abs(b.exact.torque_axis / a.exact.torque_axis - 1) > 1e-4


def test_temperature_in_kelvin_and_bad_units():
    k = scene('[conditions]\ntemperature = "318.15 K"')
    c = scene('[conditions]\ntemperature = "45 degC"')
    assert np.allclose(k.body("bob").com, c.body("bob").com, rtol=1e-15)
    with pytest.raises(InputError, match="conditions.temperature"):
        scene('[conditions]\ntemperature = "45 degF"')
    with pytest.raises(InputError, match="body\\[bob\\].expansion"):
        scene('[conditions]\ntemperature = 21', alpha="1e-6 m")


MEASURED = """
[[position]]
name = "A"
group = "attractor"
turn = 0
[[position]]
name = "B"
group = "attractor"
turn = 20
[measurement]
method = "deflection"
angle = { A = "0.001 rad", B = "-0.001 rad" }
period = "300 +- 0.1 s"
"""


def test_temperature_enters_the_budget_inputs():
    from truepull.integrate.balance.reduction_budget import uncertain_inputs

    text = SCENE.format(conditions='[conditions]\ntemperature = "21.3 +- 0.1 degC"', alpha="1.2e-6 +- 0.1e-6 1/K",
                        material="tungsten") + MEASURED
    names = [r.name for r in uncertain_inputs(load_scene_text(text))]
    assert "conditions.temperature" in names and "body[bob].expansion" in names


def test_check_notes_a_body_without_expansion(tmp_path, capsys):
    from truepull.cli.main import main

    text = SCENE.format(conditions='[conditions]\ntemperature = 25', alpha="1e-6 1/K", material="lead")
    text = text.replace('expansion = "1e-6 1/K"\n', "")
    path = tmp_path / "s.toml"
    path.write_text(text)
    assert main(["check", str(path)]) == 0
    assert "'bob' has no expansion coefficient" in capsys.readouterr().out
