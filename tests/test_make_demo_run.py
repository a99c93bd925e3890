"""The invented recorded run of the demo (shapes/make_demo_run.py -> shapes/demo_run.csv)."""

import numpy as np
from scipy.integrate import solve_ivp

from truepull.shapes import demo_run_path
from truepull.shapes import make_demo_run as mr


def test_segments_follow_the_damped_oscillator_ode():
    # reference: scipy.integrate.solve_ivp of I x'' + c x' + kappa x = tau(position), one segment at a time
    time, angle, labels = mr.simulate(np.random.default_rng(0), noise=0.0)
    clean = angle - mr.ZERO - mr.DRIFT * time
    kappa, gamma, _ = mr.oscillator_constants()
    state = [0.0, 0.0]
    for k, name in enumerate(mr.SEQUENCE):
        t0 = k * mr.SEGMENT
        rows = (time >= t0) & (time < t0 + mr.SEGMENT)
        tau = mr.TORQUE[name]
        sol = solve_ivp(lambda t, y: [y[1], (tau - kappa * y[0]) / mr.INERTIA - 2 * gamma * y[1]],
                        (t0, t0 + mr.SEGMENT), state, t_eval=time[rows], rtol=1e-11, atol=1e-16,
                        method="DOP853", dense_output=True)
        assert np.allclose(clean[rows], sol.y[0], rtol=0, atol=1e-10)
        assert set(np.array(labels)[rows]) == {name}
        state = sol.sol(t0 + mr.SEGMENT)


def test_decrement_and_period_relation():
    # omega0^2 = omega_d^2 (1 + (delta / 2 pi)^2) (damped oscillator, textbook mechanics, from memory)
    kappa, gamma, omega_d = mr.oscillator_constants()
    omega0_sq = kappa / mr.INERTIA
    assert np.isclose(omega0_sq, omega_d**2 * (1 + (mr.DECREMENT / (2 * np.pi)) ** 2), rtol=1e-14)
    assert np.isclose(2 * np.pi / omega_d, mr.PERIOD, rtol=1e-14)


def test_shipped_csv_is_what_the_script_makes():
    time, angle, labels = mr.simulate(np.random.default_rng(mr.SEED))
    assert demo_run_path().read_text() == mr.csv_text(time, angle, labels)
