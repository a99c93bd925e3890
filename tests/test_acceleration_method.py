"""The angular-acceleration reduction against synthetic experiments from closed forms
(tests/synthetic_methods.py): Newton's torque for spheres and the prism closed form of Nagy et al.
(2000) for a box pendulum, their harmonics by numpy's FFT, handbook moments of inertia, a true G that
is not CODATA's."""

from __future__ import annotations

import pytest

import synthetic_methods as sm
from truepull.geometry.scene import load_scene_text
from truepull.integrate.balance.reduction import reduce_measurement


def acceleration_table(alpha, harmonic=2, u=None):
    value = f'"{alpha!r} +- {u!r} rad/s^2"' if u else f'"{alpha!r} rad/s^2"'
    return f'[measurement]\nmethod = "acceleration"\nharmonic = {harmonic}\nacceleration = {value}\n'


@pytest.mark.parametrize("layout", ["series", "grid"])
def test_recovers_the_true_G_from_spheres(layout):
    r, z, d = (sm.R, 0.0, sm.D) if layout == "series" else (0.035, 0.035, 0.06)
    amp = sm.fft_amplitudes(lambda p: sm.sphere_torque(p, G=1.0, r=r, z=z, d=d))[2]
    inertia = 2.0 * (0.4 * sm.M_BOB * sm.R_BOB**2 + sm.M_BOB * d**2)   # handbook sphere + parallel axis
    alpha = sm.G_TRUE * amp / inertia
    result = reduce_measurement(load_scene_text(sm.scene_text(acceleration_table(alpha), r=r, z=z, d=d)),
                                rtol=1e-10)
    assert abs(result.G / sm.G_TRUE - 1) < 1e-8
    assert abs(result.G - sm.G_TRUE) <= result.numerical_error + 1e-13 * sm.G_TRUE
    names = [c.name for c in result.corrections]
    assert names[0].startswith("exact torque harmonic") and "leakage" in names[-1]
    # spheres pull like points: the shapes factor is 1; the inertia factor is the spheres' own 2/5 m r^2
    assert abs(result.corrections[0].factor - 1) < 1e-8
    assert abs(result.corrections[1].factor - inertia / (2 * sm.M_BOB * d**2)) < 1e-12


def test_box_pendulum_recovers_the_true_G_by_the_prism_closed_form():
    # reference: the prism closed form (Nagy, Papp and Benedek 2000) for the box's field at the
    # attractor spheres, numpy FFT over 32 turns (the harmonics fall off like (0.034/0.11)^n: the
    # aliases of n = 2 at 30, 34 are far below 1e-12), handbook inertia M (a^2 + b^2) / 12
    amp = sm.fft_amplitudes(lambda p: sm.box_torque(p, G=1.0), n_turns=32)[2]
    alpha = sm.G_TRUE * amp / sm.INERTIA_BOX
    result = reduce_measurement(load_scene_text(sm.scene_text(acceleration_table(alpha), pendulum="box")),
                                rtol=1e-10)
    assert abs(result.G / sm.G_TRUE - 1) < 1e-8
    assert result.G_point is None  # a box on the axis is a point on the axis: no point-model torque
    assert abs(result.inertia / sm.INERTIA_BOX - 1) < 1e-13


def test_budget_sensitivity_to_the_measured_amplitude_is_G_over_alpha():
    # G = alpha I / |T|: dG/dalpha = G / alpha exactly (the formula's own derivative)
    from truepull.integrate.balance.reduction_budget import reduction_budget

    amp = sm.fft_amplitudes(lambda p: sm.sphere_torque(p, G=1.0))[2]
    alpha = sm.G_TRUE * amp / sm.INERTIA_SPHERES
    text = sm.scene_text(acceleration_table(alpha, u=1e-5 * alpha))
    scene = load_scene_text(text)
    red = reduce_measurement(scene)
    bud = reduction_budget(scene, red, text, samples=0, workers=1)
    row = next(r for r in bud.rows if r["input"] == "measurement.acceleration")
    assert abs(row["sensitivity"] / (red.G / alpha) - 1) < 1e-6
    assert abs(bud.u_G / (1e-5 * red.G) - 1) < 1e-6



def test_a_named_group_makes_the_signal():
    # the turning masses in their own group, named by the measurement's `group`: same G as before
    amp = sm.fft_amplitudes(lambda p: sm.sphere_torque(p, G=1.0))[2]
    alpha = sm.G_TRUE * amp / sm.INERTIA_SPHERES
    text = sm.scene_text(acceleration_table(alpha) + 'group = "turner"\n').replace('group = "attractor"',
                                                                                     'group = "turner"')
    result = reduce_measurement(load_scene_text(text))
    assert abs(result.G / sm.G_TRUE - 1) < 1e-8
    assert result.method_terms["signal_group"] == "turner"
