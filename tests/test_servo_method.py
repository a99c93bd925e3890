"""The servo reduction against a synthetic experiment from closed forms (tests/synthetic_balance.py:
Newton's torque of four sphere pairs, shell theorem) with a true G that is not CODATA's: recovery,
independence from the fiber, the voltage form and its budget."""

from __future__ import annotations

import pytest

import synthetic_balance as sb
from truepull.geometry.errors import InputError
from truepull.geometry.scene import load_scene_text
from truepull.integrate.balance.reduction import reduce_measurement

PSI = {"A": sb.PSI_A, "B": sb.PSI_B, "C": sb.PSI_C}


def servo_torques(offset=0.0, names=("A", "B")):
    """The servo torque at each position: tau_i = offset - G Gamma_i (the pendulum held as drawn)."""
    return {p: offset - sb.torque(0.0, PSI[p]) for p in names}


def torque_scene(torques, extra=""):
    body = ", ".join(f'{p} = "{t!r} N m"' for p, t in torques.items())
    return sb.scene_text({p: PSI[p] for p in torques}, f'method = "servo"\ntorque = {{ {body} }}\n' + extra)


def test_recovers_the_true_G():
    result = reduce_measurement(load_scene_text(torque_scene(servo_torques())))
    assert abs(result.G / sb.G_TRUE - 1) < 1e-8
    assert abs(result.G - sb.G_TRUE) <= result.numerical_error + 1e-14 * sb.G_TRUE
    # spheres pull like points: the exact torques equal every pair's point torques
    assert abs(result.corrections[-1].factor - 1) < 1e-9
    # the far attractor's pull against the textbook nearest pairs: 1 / (1 - beta), beta = b^3 / (b^2 +
    # 4 d^2)^(3/2) (teaching-lab manuals; from memory), as in the deflection reduction
    assert result.corrections[0].factor == pytest.approx(1 / (1 - sb.FAR_BETA), rel=1e-12)


@pytest.mark.parametrize("kappa, rest_angle", [(1e-9, 1e-3), (2.5e-8, -0.02), (3e-7, 0.004)])
def test_independent_of_the_fiber(kappa, rest_angle):
    # a fiber of any constant whose rest angle is off the held one adds the same torque kappa (0 - rest)
    # at every position: the servo's G is the same for any fiber (and no period enters at all)
    base = reduce_measurement(load_scene_text(torque_scene(servo_torques()))).G
    held = reduce_measurement(load_scene_text(torque_scene(servo_torques(kappa * rest_angle))))
    assert abs(held.G / base - 1) < 1e-12
    assert abs(held.state[1] - kappa * rest_angle) < 1e-6 * abs(kappa * rest_angle)


def test_three_positions_by_least_squares():
    result = reduce_measurement(load_scene_text(torque_scene(servo_torques(1e-12, ("A", "B", "C")))))
    assert abs(result.G / sb.G_TRUE - 1) < 1e-8


def test_voltage_form_and_its_budget():
    # tau = c V^2: G is proportional to c, so dG/dc = G / c exactly
    from truepull.integrate.balance.reduction_budget import reduction_budget

    c = 4e-12
    offset = 2 * max(abs(sb.torque(0.0, PSI[p])) for p in ("A", "B"))  # every servo torque positive
    volts = {p: ((offset - sb.torque(0.0, PSI[p])) / c) ** 0.5 for p in ("A", "B")}
    body = ", ".join(f'{p} = "{v!r} +- 1e-6 V"' for p, v in volts.items())
    text = sb.scene_text({p: PSI[p] for p in volts},
                         f'method = "servo"\nvoltage = {{ {body} }}\ntorque_per_volt2 = "{c!r} +- {c * 1e-4!r} N m/V^2"\n')
    scene = load_scene_text(text)
    red = reduce_measurement(scene)
    assert abs(red.G / sb.G_TRUE - 1) < 1e-8
    bud = reduction_budget(scene, red, text, samples=0, workers=1)
    row = next(r for r in bud.rows if r["input"] == "measurement.torque_per_volt2")
    assert abs(row["sensitivity"] / (red.G / c) - 1) < 1e-6


def test_servo_pushing_with_the_pull_is_refused():
    bad = {p: -t for p, t in servo_torques().items()}
    with pytest.raises(InputError, match="negative G"):
        reduce_measurement(load_scene_text(torque_scene(bad)))


def test_monte_carlo_agrees_with_the_gum_for_the_servo():
    # G = -(tau_A - tau_B) / (Gamma_A - Gamma_B) is linear in the torques: with normal inputs the
    # Monte Carlo's u equals the GUM's (JCGM 101:2008, 9.2: a linear model of normal inputs)
    from truepull.integrate.balance.reduction_budget import reduction_budget

    tau = servo_torques(2e-13)
    body = ", ".join(f'{p} = "{t!r} +- {abs(t) * 1e-3!r} N m"' for p, t in tau.items())
    text = sb.scene_text({p: PSI[p] for p in tau}, f'method = "servo"\ntorque = {{ {body} }}\n')
    scene = load_scene_text(text)
    red = reduce_measurement(scene)
    bud = reduction_budget(scene, red, text, samples=20000, check_draws=5, workers=1)
    assert bud.monte_carlo.u == pytest.approx(bud.u_G, rel=0.03)
    assert bud.monte_carlo.value == pytest.approx(red.G, rel=1e-4)
