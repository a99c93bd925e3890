"""The angular-acceleration reduction against synthetic experiments from closed forms
(tests/synthetic_methods.py): Newton's torque for spheres and the prism closed form of Nagy et al.
(2000) for a box pendulum, their harmonics by numpy's FFT, handbook moments of inertia, a true G that
is not CODATA's."""

from __future__ import annotations

import pytest

import synthetic_methods as sm
from truepull.geometry.scene import load_scene_text
from truepull.integrate.balance.reduction import per_unit_g, reduce_measurement
from truepull.integrate.balance.turn_harmonics import exact_harmonics


def acceleration_table(alpha, harmonic=2, u=None):
    value = f'"{alpha!r} +- {u!r} rad/s^2"' if u else f'"{alpha!r} rad/s^2"'
    return f'[measurement]\nmethod = "acceleration"\nharmonic = {harmonic}\nacceleration = {value}\n'


def test_torque_harmonics_against_numpy_fft_of_newtons_torque():
    # reference: numpy.fft of Newton's point-pair torque (shell theorem for the spheres)
    ref = sm.fft_amplitudes(lambda p: sm.sphere_torque(p, G=1.0))
    scene = per_unit_g(load_scene_text(sm.scene_text(acceleration_table(1e-9))))
    h = exact_harmonics(scene, 2, "pendulum", "attractor", 1e-11, "series")
    for n in (2, 4, 6):
        assert abs(h.amplitude(n) - ref[n]) <= max(h.error, 1e-14 * ref[2]), n
    assert abs(h.amplitude(2) - ref[2]) <= h.error  # the stated error bounds the true one
    assert h.amplitude(1) < 1e-12 * ref[2] and h.amplitude(3) < 1e-12 * ref[2]  # two-fold symmetry


def test_grid_route_where_the_series_is_refused():
    # the attractor comes nearer the pivot than the pendulum reaches, at another height: the multipole
    # series is refused and the engine's torque on a uniform turn grid goes through an FFT
    # reference: numpy.fft of Newton's torque for this layout
    r, z, d = 0.035, 0.035, 0.06
    ref = sm.fft_amplitudes(lambda p: sm.sphere_torque(p, G=1.0, r=r, z=z, d=d))
    text = sm.scene_text(acceleration_table(1e-9), r=r, z=z, d=d)
    h = exact_harmonics(per_unit_g(load_scene_text(text)), 2, "pendulum", "attractor", 1e-10)
    assert "refused" in h.how and h.turns > 0
    assert abs(h.amplitude(2) - ref[2]) <= h.error
    assert abs(h.amplitude(2) / ref[2] - 1) < 1e-8


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


def test_leakage_bound_against_a_wobbling_turn():
    # reference: Newton's torque sampled along a turn phi(t) = Omega t + e sin(k Omega t) and numpy's
    # FFT in time; the change of the measured harmonic per radian of e must stay within the stated bound
    import numpy as np

    from truepull.integrate.balance.turn_harmonics import leakage_per_radian

    scene = per_unit_g(load_scene_text(sm.scene_text(acceleration_table(1e-9))))
    h = exact_harmonics(scene, 2, "pendulum", "attractor", 1e-11, "series")
    e, n = 1e-5, 256
    t = 2 * np.pi * np.arange(n) / n
    plain = np.fft.rfft([sm.sphere_torque(x, G=1.0) for x in t])[2]
    for k in (1, 2, 3):
        wobbled = np.fft.rfft([sm.sphere_torque(x + e * np.sin(k * x), G=1.0) for x in t])[2]
        change = abs(wobbled - plain) / (e * abs(plain))
        bound = leakage_per_radian(h, 2, k)
        # the harmonic itself shrinks by J0(m e) ~ 1 - (m e)^2 / 4: second order, m^2 e / 4 = e per radian
        assert change <= bound + 2 * e, k
        if k == 2:  # the two-ball layout's harmonics share their phase: the bound is attained
            assert abs(change - bound) < 1e-4
    assert leakage_per_radian(h, 2, 2) > 0.1  # the 4th harmonic leaks into the 2nd with a wobble at 2 Omega


def test_a_named_group_makes_the_signal():
    # the turning masses in their own group, named by the measurement's `group`: same G as before
    amp = sm.fft_amplitudes(lambda p: sm.sphere_torque(p, G=1.0))[2]
    alpha = sm.G_TRUE * amp / sm.INERTIA_SPHERES
    text = sm.scene_text(acceleration_table(alpha) + 'group = "turner"\n').replace('group = "attractor"',
                                                                                     'group = "turner"')
    result = reduce_measurement(load_scene_text(text))
    assert abs(result.G / sm.G_TRUE - 1) < 1e-8
    assert result.method_terms["signal_group"] == "turner"
