"""The torque's harmonics in the relative turn (integrate/balance/turn_harmonics.py) against numpy's
FFT of Newton's torque for spheres (tests/synthetic_methods.py), by the multipole series and by the
engine's uniform turn grid, and the leakage bound against a wobbling turn."""

from __future__ import annotations

import numpy as np

import synthetic_methods as sm
from truepull.geometry.scene import load_scene_text
from truepull.integrate.balance.reduction import per_unit_g
from truepull.integrate.balance.turn_harmonics import exact_harmonics, leakage_per_radian

TABLE = '[measurement]\nmethod = "acceleration"\nharmonic = 2\nacceleration = "1e-9 rad/s^2"\n'


def test_torque_harmonics_against_numpy_fft_of_newtons_torque():
    # reference: numpy.fft of Newton's point-pair torque (shell theorem for the spheres)
    ref = sm.fft_amplitudes(lambda p: sm.sphere_torque(p, G=1.0))
    scene = per_unit_g(load_scene_text(sm.scene_text(TABLE)))
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
    text = sm.scene_text(TABLE, r=r, z=z, d=d)
    h = exact_harmonics(per_unit_g(load_scene_text(text)), 2, "pendulum", "attractor", 1e-10)
    assert "refused" in h.how and h.turns > 0
    assert abs(h.amplitude(2) - ref[2]) <= h.error
    assert abs(h.amplitude(2) / ref[2] - 1) < 1e-8


def test_leakage_bound_against_a_wobbling_turn():
    # reference: Newton's torque sampled along a turn phi(t) = Omega t + e sin(k Omega t) and numpy's
    # FFT in time; the change of the measured harmonic per radian of e must stay within the stated bound
    scene = per_unit_g(load_scene_text(sm.scene_text(TABLE)))
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
