"""The invented recorded run of the demo (shapes/make_demo_run.py -> shapes/demo_run.csv)."""

import numpy as np
import pytest
from scipy.integrate import solve_ivp
from scipy.interpolate import KroghInterpolator

from truepull.shapes import demo_run_path
from truepull.shapes import make_demo_run as mr


@pytest.fixture(scope="module")
def balance():
    return mr.demo_balance()   # engine samples of the demo scene's torque curves (a few seconds)


def test_segments_follow_the_full_equation_of_motion(balance):
    # reference: scipy.integrate.solve_ivp (Radau, an implicit method, not the generator's DOP853) of
    # I x'' = -kappa (x - zero(t)) - c x' + G Gamma(x), Gamma the Hermite interpolant through the same
    # engine samples built by scipy.interpolate.KroghInterpolator (repeated nodes: value and slope)
    time, angle, labels = mr.simulate(np.random.default_rng(0), noise=0.0, balance=balance)
    state = [mr.ZERO + mr.RELEASE, 0.0]
    b = balance
    for k, name in enumerate(mr.SEQUENCE):
        s = b.curves[name].samples
        xs = np.repeat([p.theta for p in s], 2)
        ys = np.ravel([[p.torque, -p.stiffness] for p in s])
        gamma = KroghInterpolator(xs, ys)

        def rhs(t, y, gamma=gamma):
            zero = mr.ZERO + mr.DRIFT_RATE * t + mr.DRIFT_CURVE * t**2
            return [y[1], (-b.kappa * (y[0] - zero) - b.damping * y[1] + b.G * float(gamma(y[0]))) / b.inertia]

        t0 = k * mr.SEGMENT
        rows = (time >= t0) & (time < t0 + mr.SEGMENT)
        sol = solve_ivp(rhs, (t0, t0 + mr.SEGMENT), state, t_eval=time[rows], rtol=1e-10, atol=1e-15,
                        method="Radau", dense_output=True)
        assert np.allclose(angle[rows], sol.y[0], rtol=0, atol=3e-10)   # 1e-4 of the read-out noise
        assert set(np.array(labels)[rows]) == {name}
        state = sol.sol(t0 + mr.SEGMENT)
    # the swings are a few mrad, well inside the sampled +-8 mrad
    assert 1e-3 < np.ptp(angle) < 7e-3 and np.all(np.abs(angle) < 0.6 * max(mr.NODES))


def test_torque_curve_between_nodes_matches_the_engine(balance):
    # reference: fresh engine samples between the nodes, where the pendulum goes; the curve's error must
    # be within the engine's own error estimate
    from truepull.geometry.scene import load_scene
    from truepull.integrate.balance.reduction import per_unit_g
    from truepull.integrate.balance.torque_curve import sample_pose
    from truepull.shapes import demo_path

    per_g = per_unit_g(load_scene(demo_path()))
    for name, theta in (("A", 4.1e-3), ("B", -1.3e-3)):
        fresh = sample_pose(per_g, name, theta)
        assert abs(float(balance.curves[name].torque(theta)) - fresh.torque) <= 3 * fresh.torque_error
        assert fresh.torque_error < 1e-11 * abs(fresh.torque)


def test_damping_gives_the_decrement():
    # I x'' + c x' + kappa x = 0 has x = exp(-gamma t) cos(omega_d t), gamma = c / 2I, omega_d^2 =
    # kappa / I - gamma^2, decrement = gamma T_d (damped oscillator,
    # Landau and Lifshitz, Mechanics, 3rd ed., sec. 25; from memory);
    # checked against scipy.integrate.solve_ivp of the free oscillator over one damped period
    inertia, kappa = 1.3845e-4, mr.KAPPA
    c = mr.fiber_damping(inertia, kappa, mr.DECREMENT)
    gamma = c / (2 * inertia)
    t_d = 2 * np.pi / np.sqrt(kappa / inertia - gamma**2)
    assert np.isclose(gamma * t_d, mr.DECREMENT, rtol=1e-13)
    sol = solve_ivp(lambda t, y: [y[1], (-kappa * y[0] - c * y[1]) / inertia], (0, t_d), [1.0, -gamma],
                    method="DOP853", rtol=1e-12, atol=1e-15)
    # start x = 1, x' = -gamma is the closed form at t = 0; after T_d it is exp(-decrement)
    assert np.isclose(sol.y[0, -1], np.exp(-mr.DECREMENT), rtol=0, atol=1e-9)
    assert np.isclose(sol.y[1, -1], -gamma * np.exp(-mr.DECREMENT), rtol=0, atol=1e-12)


def test_shipped_csv_is_what_the_script_makes(balance):
    # the shipped file against a fresh run of its own script: header, times and labels identical; the
    # angles agree to 1e-12 rad, a millionth of the read-out noise NOISE (2e-6 rad). Not to the last
    # printed digit (1e-13 rad): the engine's torque samples differ in their last bits between machines
    # (SIMD width, summation order), and the ODE carries that into the tenth significant digit.
    time, angle, labels = mr.simulate(np.random.default_rng(mr.SEED), balance=balance)
    shipped = demo_run_path().read_text().splitlines()
    fresh = mr.csv_text(time, angle, labels).splitlines()
    assert len(shipped) == len(fresh)
    head = [i for i, line in enumerate(fresh) if not line[:1].isdigit() and not line.startswith("-")]
    assert [shipped[i] for i in head] == [fresh[i] for i in head]
    rows = [i for i in range(len(fresh)) if i not in set(head)]
    cells_s = [shipped[i].split(",") for i in rows]
    cells_f = [fresh[i].split(",") for i in rows]
    assert [(c[0], c[2]) for c in cells_s] == [(c[0], c[2]) for c in cells_f]
    diff = np.abs(np.array([float(c[1]) for c in cells_s]) - np.array([float(c[1]) for c in cells_f]))
    assert diff.max() <= 1e-12
