"""Fit of recorded torsion-pendulum runs: checked against an ODE reference, known synthetic truth,
the coverage of stated 1-sigma intervals, and the law of reflection."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp
from scipy.stats import binom, norm

from truepull.geometry.errors import InputError
from truepull.integrate.balance.fitting import (
    SegmentFit,
    fit_record,
    fit_segment,
    split_segments,
    spot_to_angle,
)

FIELDS = ("period", "decrement", "equilibrium", "amplitude", "drift")


def damped_record(t, *, period, decrement, equilibrium, amplitude, drift, phase, t_mid):
    """theta_eq + drift*tau + A exp(-gamma tau) cos(omega_d tau + phi): the damped oscillator
    (Landau and Lifshitz, Mechanics, 3rd ed., sec. 25; from memory)."""
    tau = t - t_mid
    gamma = decrement / period
    return (equilibrium + drift * tau
            + amplitude * np.exp(-gamma * tau) * np.cos(2 * math.pi / period * tau + phase))


def test_damping_relation_against_ode_reference():
    # Reference: I theta'' + b theta' + kappa (theta - theta_eq) = 0 integrated by scipy's solve_ivp
    # (DOP853). Damped oscillator (Landau and Lifshitz, Mechanics, 3rd ed., sec. 25; from memory): omega0 = sqrt(kappa / I), gamma = b / (2 I), and
    # omega0^2 = omega_d^2 (1 + (delta / 2 pi)^2) with delta = gamma T_d the logarithmic decrement.
    inertia, kappa, theta_eq = 1.5e-4, 3.7e-8, 4.0e-3           # kg m^2, N m/rad, rad (invented)
    omega0_true = math.sqrt(kappa / inertia)
    period0 = 2 * math.pi / omega0_true                          # about 400 s
    damping = 2 * inertia * 0.3 / period0                        # b giving delta of about 0.3
    rng = np.random.default_rng(20240611)
    t = np.arange(0.0, 8 * period0, 2.0)

    def rhs(_, s):
        return [s[1], -(damping * s[1] + kappa * (s[0] - theta_eq)) / inertia]

    sol = solve_ivp(rhs, (t[0], t[-1]), [theta_eq + 2.0e-3, 0.0], t_eval=t, method="DOP853",
                    rtol=1e-12, atol=1e-16)
    assert sol.success
    noise = 2.0e-6
    fit = fit_segment(t, sol.y[0] + rng.normal(0.0, noise, t.size))

    # omega0 from the fitted period and decrement by the damping relation, first-order propagation
    omega_d = 2 * math.pi / fit.period
    corr = math.sqrt(1 + (fit.decrement / (2 * math.pi)) ** 2)
    omega0 = omega_d * corr
    d_dT = -omega0 / fit.period
    d_ddelta = omega_d * (fit.decrement / (4 * math.pi ** 2)) / corr
    u_omega0 = math.hypot(d_dT * fit.u_period, d_ddelta * fit.u_decrement)
    assert abs(omega0 - omega0_true) <= 3 * u_omega0
    # the damped frequency alone is far off: the check above does test the damping relation
    assert abs(omega_d - omega0_true) > 20 * u_omega0
    # the decrement itself: delta = gamma T_d with gamma = b / (2 I) (Landau and Lifshitz, Mechanics, 3rd ed., sec. 25; from memory)
    assert abs(fit.decrement - damping / (2 * inertia) * fit.period) <= 3 * fit.u_decrement
    assert abs(fit.equilibrium - theta_eq) <= 3 * fit.u_equilibrium
    assert abs(fit.drift) <= 3 * fit.u_drift
    # residual RMS against the noise we added (chi-square with ~n dof: within 10 %)
    assert abs(fit.residual_rms / noise - 1) < 0.1


def test_recovers_known_parameters_with_drift():
    # Truth: the parameters we put into a synthetic record with seeded Gaussian noise; a correct
    # least-squares fit lands within a few of its own standard uncertainties (normal distribution).
    rng = np.random.default_rng(7)
    truth = dict(period=412.3, decrement=0.05, equilibrium=-1.234e-2, amplitude=3.0e-3, drift=2.0e-8)
    t = np.sort(rng.uniform(0.0, 5000.0, 1500))                  # uneven sampling on purpose
    t_mid = 0.5 * (t[0] + t[-1])
    noise = 1.0e-5
    y = damped_record(t, phase=-1.1, t_mid=t_mid, **truth) + rng.normal(0.0, noise, t.size)
    fit = fit_segment(t, y, "A")
    assert isinstance(fit, SegmentFit) and fit.position == "A" and fit.n_points == t.size
    for name in FIELDS:
        assert abs(getattr(fit, name) - truth[name]) <= 4 * getattr(fit, "u_" + name), name
    assert abs(math.remainder(fit.phase + 1.1, 2 * math.pi)) < 0.01
    # white noise: lag-1 autocorrelation ~ N(0, 1/n), Durbin-Watson near 2 (Durbin and Watson 1950)
    assert abs(fit.lag1_autocorrelation) < 4 / math.sqrt(t.size)
    assert abs(fit.durbin_watson - 2) < 8 / math.sqrt(t.size)
    assert fit.note == ""
    # the model curve reproduces the noise-free record to well within the noise
    assert np.max(np.abs(fit.evaluate(t) - damped_record(t, phase=-1.1, t_mid=t_mid, **truth))) < noise


def test_one_sigma_intervals_cover_truth_about_68_percent():
    # Coverage of 1-sigma intervals of a correct Gaussian fit: P = erf(1/sqrt 2) = 0.6827 (normal
    # distribution, scipy.stats.norm). The hit count over 200 seeded trials must lie inside the
    # 99.9 % binomial interval (scipy.stats.binom) for every reported parameter.
    p_one_sigma = norm.cdf(1.0) - norm.cdf(-1.0)
    lo, hi = binom.interval(0.999, 200, p_one_sigma)
    rng = np.random.default_rng(31415)
    truth = dict(period=30.0, decrement=0.3, equilibrium=2.0e-3, amplitude=1.0e-3, drift=-3.0e-6)
    t = np.linspace(0.0, 150.0, 150)
    hits = dict.fromkeys(FIELDS, 0)
    for _ in range(200):
        y = damped_record(t, phase=rng.uniform(0, 2 * math.pi), t_mid=75.0, **truth)
        fit = fit_segment(t, y + rng.normal(0.0, 5.0e-5, t.size))
        for name in FIELDS:
            hits[name] += abs(getattr(fit, name) - truth[name]) <= getattr(fit, "u_" + name)
    for name in FIELDS:
        assert lo <= hits[name] <= hi, (name, hits[name], (lo, hi))


def test_correlated_residuals_get_a_note():
    # AR(1) noise x_k = rho x_{k-1} + e_k has lag-1 autocorrelation rho and Durbin-Watson about
    # 2 (1 - rho) (Durbin and Watson, Biometrika 37, 409 (1950); the relation from memory).
    rng = np.random.default_rng(99)
    n, rho = 3000, 0.8
    e = rng.normal(0.0, 1.0e-5, n)
    x = np.empty(n)
    x[0] = e[0] / math.sqrt(1 - rho ** 2)
    for k in range(1, n):
        x[k] = rho * x[k - 1] + e[k]
    t = np.arange(n) * 1.0
    y = damped_record(t, period=97.0, decrement=0.02, equilibrium=0.0, amplitude=2e-3, drift=0.0,
                      phase=0.3, t_mid=t[-1] / 2) + x
    fit = fit_segment(t, y)
    assert abs(fit.lag1_autocorrelation - rho) < 0.05
    assert abs(fit.durbin_watson - 2 * (1 - rho)) < 0.1
    assert "too small" in fit.note


def test_optical_lever_factor_two_from_law_of_reflection():
    # Law of reflection in vector form: r = d - 2 (d . n) n (from memory). A mirror turned by
    # alpha moves the spot on a flat scale, perpendicular to the rest beam at distance D, to
    # s = D tan(2 alpha); spot_to_angle must give alpha back, for any incidence angle.
    D = 2.5
    for incidence in (0.0, math.radians(20.0)):
        d = np.array([-math.cos(incidence), math.sin(incidence), 0.0])    # incoming beam direction
        n_rest = np.array([1.0, 0.0, 0.0])
        r_rest = d - 2 * (d @ n_rest) * n_rest
        along = np.cross([0.0, 0.0, 1.0], r_rest)                         # scale direction, in plane
        for alpha in (-0.2, -1e-3, 0.0, 2e-4, 0.05, 0.3):
            n = np.array([math.cos(alpha), math.sin(alpha), 0.0])
            r = d - 2 * (d @ n) * n
            hit = r * (D / (r @ r_rest))                                  # meets the scale plane
            s = hit @ along
            assert spot_to_angle(s, D) == pytest.approx(alpha, abs=1e-14)
    # small angles: the spot moves 2 D per radian of mirror turn (the factor 2)
    assert spot_to_angle(1e-6, 1.0) == pytest.approx(0.5e-6, rel=1e-9)
    with pytest.raises(ValueError):
        spot_to_angle(0.1, 0.0)


def test_split_segments_contiguous_runs():
    # Plain run-length grouping; a label that comes back is a new segment.
    assert split_segments(["A", "A", "B", "B", "B", "A"]) == [("A", 0, 2), ("B", 2, 5), ("A", 5, 6)]
    assert split_segments(["x"]) == [("x", 0, 1)]


def test_fit_record_segments_by_position():
    # Three segments A, B, A with different equilibria (synthetic truth, seeded noise).
    rng = np.random.default_rng(5)
    pieces, labels, truth = [], [], []
    t0 = 0.0
    for label, eq in (("A", 1.0e-3), ("B", -2.0e-3), ("A", 1.1e-3)):
        t = t0 + np.arange(0.0, 600.0, 1.0)
        y = damped_record(t, period=60.0, decrement=0.1, equilibrium=eq, amplitude=1e-3, drift=0.0,
                          phase=0.0, t_mid=0.5 * (t[0] + t[-1]))
        pieces.append((t, y + rng.normal(0.0, 1e-5, t.size)))
        labels += [label] * t.size
        truth.append((label, eq))
        t0 = t[-1] + 1.0
    t = np.concatenate([p[0] for p in pieces])
    y = np.concatenate([p[1] for p in pieces])
    fits = fit_record(t, y, labels)
    assert [f.position for f in fits] == ["A", "B", "A"]
    assert [f.n_points for f in fits] == [600, 600, 600]
    for f, (label, eq) in zip(fits, truth):
        assert abs(f.equilibrium - eq) <= 4 * f.u_equilibrium
        assert abs(f.period - 60.0) <= 4 * f.u_period
    single = fit_record(t[:600], y[:600])
    assert len(single) == 1 and single[0].position is None


def _good(n=400, dt=1.0):
    t = np.arange(n) * dt
    return t, damped_record(t, period=50.0, decrement=0.05, equilibrium=0.0, amplitude=1e-3, drift=0.0,
                            phase=0.0, t_mid=t[-1] / 2) + np.random.default_rng(3).normal(0, 1e-6, n)


def test_bad_input_nan_row_named():
    t, y = _good()
    y[17] = np.nan
    with pytest.raises(InputError, match="row 18") as exc:
        fit_record(t, y, file="run.csv", angle_key="angle")
    assert exc.value.key == "angle" and exc.value.file == "run.csv"
    with pytest.raises(InputError, match="line 39"):
        fit_record(t, y, line_numbers=np.arange(t.size) + 22)


def test_bad_input_times_not_increasing():
    t, y = _good()
    t[100] = t[99]
    with pytest.raises(InputError, match="row 101.*increase") as exc:
        fit_record(t, y)
    assert exc.value.key == "time"


def test_bad_input_too_short_or_too_few():
    t, y = _good()
    with pytest.raises(InputError, match="shorter than about one period"):
        fit_record(t[:30], y[:30])                                  # 0.6 of a period
    with pytest.raises(InputError, match="at least"):
        fit_record(t[:8] * 20, y[:8])


def test_bad_input_no_oscillation():
    rng = np.random.default_rng(11)
    t = np.arange(500.0)
    with pytest.raises(InputError, match="no oscillation"):
        fit_record(t, 1e-3 + 1e-7 * t + rng.normal(0.0, 1e-5, t.size))
    with pytest.raises(InputError, match="no oscillation"):
        fit_record(t, np.full(t.size, 0.25))


def test_record_with_a_gap():
    # Truth: the synthetic parameters; a gap of several periods must not bias the fit (no data are
    # invented inside it).
    rng = np.random.default_rng(17)
    truth = dict(period=400.0, decrement=0.1, equilibrium=3.0e-4, amplitude=1.0e-3, drift=0.0)
    t = np.r_[np.arange(0.0, 1000.0, 2.0), np.arange(2500.0, 4000.0, 2.0)]
    y = damped_record(t, phase=1.0, t_mid=0.5 * (t[0] + t[-1]), **truth) + rng.normal(0.0, 1e-6, t.size)
    fit = fit_segment(t, y)
    for name in FIELDS:
        assert abs(getattr(fit, name) - truth[name]) <= 4 * getattr(fit, "u_" + name), name
