"""GUM linear propagation and Monte Carlo propagation against closed forms and scipy.stats.

Statistical checks use bounds computed from the known sampling distribution of the statistic
(several standard errors), so at the fixed seeds they can fail only if the code is wrong.
"""

from __future__ import annotations

import math
import socket

import numpy as np
import pytest

from truepull.geometry.errors import InputError
from truepull.geometry.quantities import Measured
from truepull.integrate.balance.uncertainty import (GumResult, Input, block_size, budget_table, check_surrogate,
                                            gum_linear, monte_carlo, quadratic_surrogate,
                                            surrogate_monte_carlo, validate_gum)


def stats():
    """scipy.stats, imported only by the tests that use it (worker processes import this module
    for its models and need not pay for scipy.stats)."""
    from scipy import stats as scipy_stats

    return scipy_stats


def z975():
    return stats().norm.ppf(0.975)  # scipy.stats.norm.ppf


# top-level models, so worker processes can import them ----------------------------------------

def linear_model(x):
    return 3.0 * x[0] - 2.0 * x[1] + 0.5 * x[2] + 7.0


def product(x):
    return x[0] * x[1]


def product_batch(xs):
    return xs[:, 0] * xs[:, 1]


def ratio_exp(x):
    return x[0] / x[1] * math.exp(x[2])


def ratio_exp_batch(xs):
    return xs[:, 0] / xs[:, 1] * np.exp(xs[:, 2])


def smooth_model(x):
    return math.exp(x[0]) * math.sin(x[1]) / x[2] + x[0] * x[1] ** 2


def smooth_gradient(x):
    e, s, c = math.exp(x[0]), math.sin(x[1]), math.cos(x[1])
    return np.array([e * s / x[2] + x[1] ** 2, e * c / x[2] + 2 * x[0] * x[1], -e * s / x[2] ** 2])


def weighted_sum_batch(xs):
    return 2.0 * xs[:, 0] + xs[:, 1]


def square_sum_batch(xs):
    return xs[:, 0] ** 2 + xs[:, 1] ** 2


def square_batch(xs):
    return xs[:, 0] ** 2


def sum_batch(xs):
    return xs.sum(axis=1)


def log_batch(xs):
    with np.errstate(invalid="ignore"):
        return np.log(xs[:, 0])


# GUM -----------------------------------------------------------------------------------------

def test_gum_of_a_linear_model_is_the_exact_root_sum_square():
    # algebra: for Y = sum a_i X_i + b, u_c = sqrt(sum a_i^2 u_i^2) and c_i = a_i exactly
    inputs = [Input("x1", 1.2, 0.03), Input("x2", -4.0, 0.2), Input("x3", 10.0, 1.5)]
    res = gum_linear(linear_model, inputs)
    a = np.array([3.0, -2.0, 0.5])
    u = np.array([i.u for i in inputs])
    assert res.value == pytest.approx(3 * 1.2 + 8.0 + 5.0 + 7.0, rel=1e-15)
    assert res.u_c == pytest.approx(math.sqrt(np.sum((a * u) ** 2)), rel=1e-12)
    for row, ai in zip(res.rows, a):
        assert abs(row.sensitivity - ai) <= row.sensitivity_error
    assert sum(r.share for r in res.rows) == pytest.approx(1.0, rel=1e-12)  # algebra, uncorrelated


def test_gum_of_a_product_is_first_order():
    # JCGM 100:2008 5.1.2 for Y = X1 X2: u_c^2 = x2^2 u1^2 + x1^2 u2^2
    inputs = [Input("x1", 2.0, 0.5), Input("x2", 3.0, 1.0)]
    res = gum_linear(product, inputs)
    assert res.u_c ** 2 == pytest.approx(3.0 ** 2 * 0.5 ** 2 + 2.0 ** 2 * 1.0 ** 2, rel=1e-12)
    assert res.rows[0].sensitivity == pytest.approx(3.0, rel=1e-12)
    assert res.rows[1].sensitivity == pytest.approx(2.0, rel=1e-12)


def test_vectorised_and_parallel_gum_agree_with_scalar():
    inputs = [Input("x1", 2.0, 0.5), Input("x2", 3.0, 1.0)]
    scalar = gum_linear(product, inputs)
    batch = gum_linear(None, inputs, model_batch=product_batch)
    pool = gum_linear(product, inputs, workers=2)
    assert batch.u_c == scalar.u_c == pool.u_c  # the same arithmetic on the same points


def test_sensitivities_against_analytic_derivatives():
    # closed-form gradient of exp(x1) sin(x2) / x3 + x1 x2^2
    x = np.array([0.3, 1.1, 2.5])
    inputs = [Input("a", x[0], 0.01), Input("b", x[1], 0.02), Input("c", x[2], 0.005)]
    res = gum_linear(smooth_model, inputs)
    exact = smooth_gradient(x)
    for row, g in zip(res.rows, exact):
        assert abs(row.sensitivity - g) <= row.sensitivity_error  # the estimate bounds the error
        assert row.sensitivity_error < 1e-6 * abs(g)
    # with large steps the error is visible, and still bounded
    coarse = gum_linear(smooth_model, inputs, steps=[0.2, 0.2, 0.2])
    errors = [abs(row.sensitivity - g) for row, g in zip(coarse.rows, exact)]
    assert max(errors) > 1e-6
    assert all(e <= row.sensitivity_error for e, row in zip(errors, coarse.rows))
    # and the bound on u_c covers the u_c error made with those derivatives
    u = np.array([i.u for i in inputs])
    assert abs(coarse.u_c - math.sqrt(np.sum((exact * u) ** 2))) <= coarse.u_c_error


def test_exact_input_gets_a_sensitivity_but_no_contribution():
    # Y = X1 X2 with u2 = 0: c2 = x1 (calculus), contribution 0, u_c = |x2| u1 (JCGM 100 5.1.2)
    res = gum_linear(product, [Input("x1", 2.0, 0.5), Input("x2", 3.0, 0.0)])
    assert res.rows[1].sensitivity == pytest.approx(2.0, rel=1e-9)
    assert res.rows[1].contribution == 0.0 and res.rows[1].share == 0.0
    assert res.u_c == pytest.approx(1.5, rel=1e-12)


@pytest.mark.parametrize("r", [-0.6, 0.0, 0.4, 1.0])
def test_gum_correlated_sum(r):
    # JCGM 100:2008 5.2.2 (eq. 16) for Y = X1 + X2: u_c^2 = u1^2 + u2^2 + 2 r u1 u2
    inputs = [Input("x1", 1.0, 0.3), Input("x2", 2.0, 0.4)]
    res = gum_linear(lambda x: x[0] + x[1], inputs, correlations=[[1, r], [r, 1]])
    assert res.u_c ** 2 == pytest.approx(0.09 + 0.16 + 2 * r * 0.12, rel=1e-12, abs=1e-15)


def test_budget_table_in_ppm():
    # Y = 3 x1 - 2 x2 + 0.5 x3 + 7: each contribution is |a_i| u_i, in ppm of |y| (arithmetic)
    inputs = [Input("x1", 1.2, 0.03, "m"), Input("x2", -4.0, 0.2, "m"), Input("x3", 10.0, 0.0, "m")]
    res = gum_linear(linear_model, inputs)
    y = 3 * 1.2 + 8.0 + 5.0 + 7.0
    table = budget_table(res)
    assert [row["input"] for row in table] == ["x1", "x2", "x3"]
    assert table[0]["contribution_ppm"] == pytest.approx(3 * 0.03 / y * 1e6, rel=1e-12)
    assert table[1]["contribution_ppm"] == pytest.approx(2 * 0.2 / y * 1e6, rel=1e-12)
    assert table[2]["contribution_ppm"] == 0.0
    assert res.to_ppm() == pytest.approx(math.hypot(0.09, 0.4) / y * 1e6, rel=1e-12)
    scaled = budget_table(res, y_scale=2 * y)
    assert scaled[0]["contribution_ppm"] == pytest.approx(table[0]["contribution_ppm"] / 2, rel=1e-14)
    assert math.isnan(budget_table(res, y_scale=0.0)[0]["contribution_ppm"])
    assert set(table[0]) >= {"input", "value", "u", "sensitivity", "contribution"}  # reduce --json keys


def test_gum_interval_uses_the_normal_quantile():
    res = gum_linear(product, [Input("x1", 2.0, 0.5), Input("x2", 3.0, 1.0)])
    low, high = res.interval(0.95)
    assert high - res.value == pytest.approx(z975() * res.u_c, rel=1e-14)  # scipy.stats.norm.ppf


# Monte Carlo ---------------------------------------------------------------------------------

def _product_moments(m1, s1, m2, s2):
    """Exact variance and fourth central moment of X1 X2, X1 ~ N(m1, s1^2), X2 ~ N(m2, s2^2)
    independent: raw moments multiply, and the normal's raw moments are E X = m,
    E X^2 = m^2 + s^2, E X^3 = m^3 + 3 m s^2, E X^4 = m^4 + 6 m^2 s^2 + 3 s^4 (from memory)."""
    def raw(m, s):
        return [1.0, m, m * m + s * s, m ** 3 + 3 * m * s * s, m ** 4 + 6 * m * m * s * s + 3 * s ** 4]
    a, b = raw(m1, s1), raw(m2, s2)
    e = [a[k] * b[k] for k in range(5)]
    var = e[2] - e[1] ** 2
    mu4 = e[4] - 4 * e[1] * e[3] + 6 * e[1] ** 2 * e[2] - 3 * e[1] ** 4
    return var, mu4


def test_mc_product_variance_is_goodmans_exact_variance():
    m1, s1, m2, s2 = 2.0, 0.5, 3.0, 1.0
    n = 200_000
    res = monte_carlo(None, [Input("x1", m1, s1), Input("x2", m2, s2)], samples=n,
                      model_batch=product_batch, seed=7, workers=1)
    # Goodman 1960, JASA 55:708: Var(X1 X2) = m2^2 s1^2 + m1^2 s2^2 + s1^2 s2^2
    exact = m2 ** 2 * s1 ** 2 + m1 ** 2 * s2 ** 2 + s1 ** 2 * s2 ** 2
    var, mu4 = _product_moments(m1, s1, m2, s2)
    assert var == pytest.approx(exact, rel=1e-14)  # the two closed forms agree
    # standard error of a sample variance: sqrt((mu4 - sigma^4) / n) (large-sample result, from memory)
    se = math.sqrt((mu4 - var ** 2) / n)
    assert abs(res.u ** 2 - exact) < 5 * se
    # and the test can tell the exact variance from the first-order GUM value (JCGM 100 5.1.2)
    first_order = m2 ** 2 * s1 ** 2 + m1 ** 2 * s2 ** 2
    assert abs(res.u ** 2 - first_order) > 5 * se
    # the mean is m1 m2 exactly (independence); standard error sqrt(var / n)
    assert abs(res.value - m1 * m2) < 5 * math.sqrt(var / n)


def test_mc_interval_of_a_normal_output():
    # Y = 2 X1 + X2 is normal, sd sqrt(4 u1^2 + u2^2): interval mean -+ norm.ppf(0.975) sd
    n = 100_000
    res = monte_carlo(None, [Input("x1", 1.0, 0.2), Input("x2", -0.5, 0.3)], samples=n,
                      model_batch=weighted_sum_batch, seed=3, workers=1)
    mu, sd = 1.5, math.sqrt(4 * 0.04 + 0.09)
    # standard error of a sample p-quantile: sqrt(p (1 - p) / n) / pdf (asymptotic, from memory)
    se_q = math.sqrt(0.025 * 0.975 / n) / stats().norm.pdf(z975(), scale=sd)
    assert abs(res.interval[0] - (mu - z975() * sd)) < 5 * se_q  # scipy.stats.norm.ppf
    assert abs(res.interval[1] - (mu + z975() * sd)) < 5 * se_q
    # the shortest interval of a symmetric unimodal output is the symmetric one; its ends wander
    # more, so allow 5 of their own block tolerances as well
    for got, want, tol in ((res.shortest[0], mu - z975() * sd, res.tolerance.shortest_low),
                           (res.shortest[1], mu + z975() * sd, res.tolerance.shortest_high)):
        assert abs(got - want) < 5 * se_q + 5 * tol
    assert res.shortest[1] - res.shortest[0] <= res.interval[1] - res.interval[0]
    assert abs(res.u - sd) < 5 * sd / math.sqrt(2 * n)  # standard error of a normal sample's sd


def test_mc_shortest_interval_of_a_skewed_output():
    # X1^2 + X2^2 with standard normal inputs is chi-square with 2 degrees of freedom
    # (scipy.stats.chi2): shortest 95 % interval [0, F^-1(0.95)], symmetric [F^-1(.025), F^-1(.975)]
    n = 100_000
    res = monte_carlo(None, [Input("x1", 0.0, 1.0), Input("x2", 0.0, 1.0)], samples=n,
                      model_batch=square_sum_batch, seed=5, workers=1)
    chi2 = stats().chi2(2)

    def se(p):  # standard error of a sample p-quantile (asymptotic, from memory)
        return math.sqrt(p * (1 - p) / n) / chi2.pdf(chi2.ppf(p))

    assert abs(res.interval[0] - chi2.ppf(0.025)) < 5 * se(0.025)
    assert abs(res.interval[1] - chi2.ppf(0.975)) < 5 * se(0.975)
    assert abs(res.shortest[1] - chi2.ppf(0.95)) < 5 * se(0.95)
    assert 0.0 <= res.shortest[0] < 1e-3


def test_mc_tolerance_of_the_mean_is_the_standard_error():
    # with h blocks of normal values, (h - 1) s_mean^2 / (sd^2 / n) is chi-square with h - 1
    # degrees of freedom (Cochran's theorem); scipy.stats.chi2 gives bounds at 1e-6 each side
    n, sd = 20_000, 0.7
    res = monte_carlo(None, [Input("x", 5.0, sd)], samples=n, model_batch=sum_batch, seed=13,
                      blocks=10, workers=1)
    h = res.blocks
    ratio = (h - 1) * res.tolerance.mean ** 2 / (sd ** 2 / n)
    assert stats().chi2.ppf(1e-6, h - 1) < ratio < stats().chi2.ppf(1 - 1e-6, h - 1)
    assert res.draws == n and h == 10


def test_gum_and_mc_agree_for_a_nearly_linear_model():
    # JCGM 101:2008 section 8: for a model that is linear over the input spread, the GUM interval
    # matches the Monte Carlo one to the numerical tolerance of u_c.
    inputs = [Input("a", 2.0, 0.002), Input("b", 4.0, 0.004), Input("k", 0.1, 0.001)]
    gum = gum_linear(ratio_exp, inputs)
    mc = monte_carlo(None, inputs, samples=100_000, model_batch=ratio_exp_batch, seed=21, workers=1)
    check = validate_gum(gum, mc, digits=2)
    assert check.agrees, check
    assert abs(mc.u - gum.u_c) < 5 * gum.u_c / math.sqrt(2 * mc.draws)  # sd standard error, normal


def test_validation_fails_for_a_strongly_nonlinear_model():
    # Y = X^2 with x = 1, u = 0.5: GUM u_c = 2 x u = 1 but Var = 4 x^2 u^2 + 2 u^4 (normal
    # moments, from memory) and the output is skewed, so the GUM interval must be refused.
    inputs = [Input("x", 1.0, 0.5)]
    gum = gum_linear(lambda x: x[0] ** 2, inputs)
    mc = monte_carlo(None, inputs, samples=50_000, model_batch=square_batch, seed=2, workers=1)
    assert gum.u_c == pytest.approx(1.0, rel=1e-12)
    assert not validate_gum(gum, mc).agrees
    assert abs(mc.u ** 2 - (1.0 + 2 * 0.5 ** 4)) < 0.05


def test_mc_correlated_inputs():
    # Var(X1 + X2) = u1^2 + u2^2 + 2 r u1 u2 (JCGM 100 5.2.2), also for r = 1 (semi-definite)
    for r in (0.7, 1.0):
        res = monte_carlo(None, [Input("x1", 1.0, 0.3), Input("x2", 2.0, 0.4)], samples=50_000,
                          correlations=[[1, r], [r, 1]], model_batch=sum_batch, seed=4, workers=1)
        sd = math.sqrt(0.09 + 0.16 + 2 * r * 0.12)
        assert abs(res.u - sd) < 5 * sd / math.sqrt(2 * res.draws)  # normal output


def test_mc_adaptive_reaches_the_stated_tolerance():
    # JCGM 101:2008 7.9: keep adding draws until twice each block tolerance is within delta
    sd = 1.0
    res = monte_carlo(None, [Input("x", 0.0, sd)], samples=4_000, model_batch=sum_batch, seed=8,
                      adaptive=True, digits=2, workers=1)
    assert res.stable and res.draws > 4_000
    assert res.delta == pytest.approx(0.05)  # u = 1.0 to two digits: 10 x 10^-1, delta = 1/2 x 10^-1
    # the stopping rule of JCGM 101:2008 7.9.4 j): 2 s_y, 2 s_u, 2 s_ylow, 2 s_yhigh all within delta
    t = res.tolerance
    assert 2 * max(t.mean, t.u, t.low, t.high) <= res.delta
    # the shortest interval's ends are judged by the same rule and reported beside it
    assert res.shortest_stable == (2 * max(t.shortest_low, t.shortest_high) <= res.delta)
    # the tolerances are honest: errors against the exact normal values (scipy.stats.norm) stay
    # within 6 of them (Student t with h - 1 >= 9 degrees of freedom makes 6 a safe bound)
    t = res.tolerance
    assert abs(res.value) < 6 * t.mean
    assert abs(res.interval[0] + z975() * sd) < 6 * t.low
    assert abs(res.interval[1] - z975() * sd) < 6 * t.high


def test_jcgm101_additive_model_9_2_2():
    # JCGM 101:2008 9.2.2 (from memory): Y = X1 + X2 + X3 + X4, each X_i ~ N(0, 1); the GUM gives
    # u(y) = sqrt(sum u_i^2) = 2 exactly and the 95 % interval -+ 1.96 x 2 = [-3.92, 3.92]; the
    # adaptive Monte Carlo of 7.9.4 (blocks of M = 10^4) must agree within its own stated tolerance
    inputs = [Input(f"x{i}", 0.0, 1.0) for i in range(1, 5)]
    assert block_size(0.95) == 10_000  # M = max(J, 10^4), J = 100 / (1 - p) = 2000 (JCGM 101 7.9.4 b)
    res = monte_carlo(None, inputs, samples=10 * block_size(0.95), blocks=10, step_blocks=1, groups_per_block=1,
                      adaptive=True, digits=2, model_batch=sum_batch, seed=11, workers=1)
    gum = gum_linear(sum_model, inputs)
    assert gum.u_c == pytest.approx(2.0, rel=1e-12)
    assert res.stable and res.delta == pytest.approx(0.05)  # u = 2.0: delta = 1/2 x 10^-1 (7.9.2)
    assert (res.draws - 10 * 10_000) % 10_000 == 0 and res.blocks == res.draws // 10_000
    assert abs(res.u - 2.0) <= res.delta
    assert abs(res.value) <= res.delta
    z = z975() * 2.0  # scipy.stats.norm.ppf
    assert abs(res.interval[0] + z) <= res.delta and abs(res.interval[1] - z) <= res.delta
    assert check_agrees(gum, res)


def check_agrees(gum, mc):
    return validate_gum(gum, mc, digits=2).agrees  # JCGM 101:2008 8.2: a linear model validates the GUM


def test_adaptive_rule_on_the_square_of_a_normal():
    # Y = X^2 with X ~ N(mu, s^2): Var Y = 4 mu^2 s^2 + 2 s^4 (normal moments, from memory); with
    # mu / s = 10 / 3, -sqrt(q) < X < sqrt(q) is X < sqrt(q) but for below 1e-7 at both quantiles, so
    # Y's quantiles are the squares of X's: (mu + s z_p)^2, z_p from scipy.stats.norm
    mu, s = 1.0, 0.3
    res = monte_carlo(None, [Input("x", mu, s)], samples=100_000, blocks=10, step_blocks=1, groups_per_block=1,
                      adaptive=True, digits=2, model_batch=square_batch, seed=17, workers=1)
    exact_u = math.sqrt(4 * mu**2 * s**2 + 2 * s**4)
    t = res.tolerance
    assert res.stable and 2 * max(t.mean, t.u, t.low, t.high) <= res.delta  # JCGM 101 7.9.4 j)
    assert res.delta == pytest.approx(0.005)  # u = 0.6134 -> 0.61 = 61 x 10^-2: delta = 1/2 x 10^-2 (7.9.2)
    assert abs(res.u - exact_u) <= res.delta
    assert abs(res.value - (mu**2 + s**2)) <= res.delta  # E X^2 = mu^2 + s^2
    # the ends: "stable" bounds their block standard deviations (2 s <= delta), not their errors;
    # the errors are Student t with h - 1 >= 9 degrees of freedom in units of s, so within 4 s
    # but for about 0.3 % of seeds (scipy.stats.t)
    low, high = (mu - z975() * s) ** 2, (mu + z975() * s) ** 2
    assert abs(res.interval[0] - low) <= 4 * t.low and abs(res.interval[1] - high) <= 4 * t.high
    assert 4 * max(t.low, t.high) <= 2 * res.delta


def exp_model(x):
    return math.exp(x[0])


def product_plus(x):
    return x[0] * x[1] + 0.5 * x[0] ** 2


def test_surrogate_of_a_quadratic_model_is_exact_and_the_check_says_so():
    # Y = X1 X2 + X1^2 / 2 is its own second-order Taylor model: the surrogate's error at the check
    # draws is rounding only, and the adaptive run's u is Goodman's exact variance (Goodman 1960,
    # JASA 55:708) plus Var(X1^2 / 2) and the covariance of the two terms (normal moments, from memory)
    m1, s1, m2, s2 = 2.0, 0.3, 3.0, 0.2
    inputs = [Input("x1", m1, s1), Input("x2", m2, s2)]
    gum = gum_linear(product_plus, inputs, steps=[s1 / 10, s2 / 10])
    run = surrogate_monte_carlo(product_plus, inputs, gum, check_draws=60, seed=5)
    assert run.surrogate.pairs == ((0, 1),)
    assert run.surrogate.hessian == pytest.approx(np.array([[1.0, 1.0], [1.0, 0.0]]), abs=1e-6)
    assert run.check.max_error < 1e-9 and run.check.draws == 60 and run.negligible
    var = (m2**2 * s1**2 + m1**2 * s2**2 + s1**2 * s2**2) + 0.5 * s1**4 + m1**2 * s1**2 + 2 * m1 * m2 * s1**2
    assert run.mc.stable and abs(run.mc.u - math.sqrt(var)) <= run.mc.delta


def test_surrogate_without_the_mixed_term_is_caught_by_its_check():
    # leaving out H_12 of X1 X2 leaves an error of exactly (x1 - m1)(x2 - m2) at every draw, whose
    # rms is s1 s2 (independent normals); the check must see it at the level of its sampling error
    m1, s1, m2, s2 = 2.0, 0.5, 3.0, 1.0
    inputs = [Input("x1", m1, s1), Input("x2", m2, s2)]
    gum = gum_linear(product, inputs)
    sur, evaluations = quadratic_surrogate(product, inputs, gum, leading=[])
    assert evaluations == 0 and sur.pairs == ()
    check = check_surrogate(product, sur, inputs, draws=400, seed=3)
    # the mean of n squared products of independent normals has relative standard error
    # sqrt((9 - 1) / n) (E z^4 = 3 for each factor, from memory); 5 of those on the mean square
    assert abs(check.rms_error**2 / (s1 * s2) ** 2 - 1) < 5 * math.sqrt(8 / 400)
    with_pair, evaluations = quadratic_surrogate(product, inputs, gum)
    assert evaluations == 4 and with_pair.pairs == ((0, 1),)
    assert check_surrogate(product, with_pair, inputs, draws=400, seed=3).max_error < 1e-9


def test_surrogate_error_of_an_exponential_is_its_taylor_remainder():
    # Y = exp(X), X ~ N(0, 0.05^2): Y is lognormal (quantiles exp(s z_p), scipy.stats.norm); the
    # second-order surrogate misses the remainder exp(d) - (1 + d + d^2 / 2) at each draw, which the
    # check reports; the interval widened by the largest error must hold the exact quantiles
    s = 0.05
    inputs = [Input("x", 0.0, s)]
    gum = gum_linear(exp_model, inputs, steps=[s / 10])
    run = surrogate_monte_carlo(exp_model, inputs, gum, check_draws=200, seed=9)
    check = run.check
    d = np.log(check.values)  # the draws themselves, recovered from the model values
    remainder = check.values - (1 + d + d**2 / 2)
    assert np.allclose(check.errors, remainder, rtol=1e-6, atol=1e-12)
    assert check.max_error == pytest.approx(np.max(np.abs(remainder)), rel=1e-6)
    low, high = math.exp(-z975() * s), math.exp(z975() * s)
    lo_b, hi_b = run.interval_bound
    t = run.mc.tolerance
    assert lo_b - 2 * t.low <= low and high <= hi_b + 2 * t.high
    assert run.u_bound >= run.mc.u


def test_surrogate_check_runs_the_same_on_dask(dask_cluster):
    cluster, client = dask_cluster
    inputs = [Input("a", 2.0, 0.002), Input("b", 4.0, 0.004), Input("k", 0.1, 0.001)]
    gum = gum_linear(ratio_exp, inputs)
    sur, _ = quadratic_surrogate(ratio_exp, inputs, gum)
    here = check_surrogate(ratio_exp, sur, inputs, draws=50, seed=2)
    there = check_surrogate(ratio_exp, sur, inputs, draws=50, seed=2, scheduler=client)
    assert np.array_equal(here.values, there.values) and here.max_error == there.max_error


def test_mc_adaptive_gives_up_at_max_samples():
    res = monte_carlo(None, [Input("x", 0.0, 1.0)], samples=1_000, model_batch=sum_batch,
                      adaptive=True, digits=3, max_samples=3_000, workers=1)
    assert not res.stable and res.draws == 3_000


def test_mc_scalar_and_vectorised_models_draw_the_same():
    inputs = [Input("x1", 2.0, 0.5), Input("x2", 3.0, 1.0)]
    a = monte_carlo(product, inputs, samples=2_000, seed=1, workers=1)
    b = monte_carlo(None, inputs, samples=2_000, seed=1, model_batch=product_batch, workers=1)
    assert np.array_equal(a.values, b.values)


def test_mc_serial_and_process_pool_are_identical():
    inputs = [Input("a", 2.0, 0.002), Input("b", 4.0, 0.004), Input("k", 0.1, 0.001)]
    serial = monte_carlo(ratio_exp, inputs, samples=4_000, seed=99, workers=1)
    pool = monte_carlo(ratio_exp, inputs, samples=4_000, seed=99, workers=2)
    assert np.array_equal(serial.values, pool.values)
    assert serial == pool  # every reported number too


def test_mc_seed_repeats_and_changes_the_draws():
    inputs = [Input("x", 1.0, 0.1)]
    a = monte_carlo(None, inputs, samples=1_000, seed=None, model_batch=sum_batch, workers=1)
    again = monte_carlo(None, inputs, samples=1_000, seed=a.seed, model_batch=sum_batch, workers=1)
    other = monte_carlo(None, inputs, samples=1_000, seed=a.seed + 1, model_batch=sum_batch, workers=1)
    assert np.array_equal(a.values, again.values)
    assert not np.array_equal(a.values, other.values)


def test_adding_an_input_keeps_the_draws_of_the_others():
    # one stream per input and group: a new input does not reshuffle the existing draws
    one = monte_carlo(None, [Input("x", 1.0, 0.1)], samples=1_000, model_batch=sum_batch,
                      seed=6, workers=1)
    two = monte_carlo(None, [Input("x", 1.0, 0.1), Input("y", 0.0, 0.0)], samples=1_000,
                      model_batch=sum_batch, seed=6, workers=1)
    assert np.array_equal(one.values, two.values)


# Dask ----------------------------------------------------------------------------------------

@pytest.fixture(scope="module")
def dask_cluster():
    distributed = pytest.importorskip("distributed")
    cluster = distributed.LocalCluster(n_workers=1, threads_per_worker=2, processes=False,
                                       protocol="tcp", host="127.0.0.1", dashboard_address=None)
    client = distributed.Client(cluster, set_as_default=False)
    yield cluster, client
    client.close()
    cluster.close()


def test_mc_on_dask_by_client_and_by_address_is_identical(dask_cluster):
    cluster, client = dask_cluster
    inputs = [Input("a", 2.0, 0.002), Input("b", 4.0, 0.004), Input("k", 0.1, 0.001)]
    serial = monte_carlo(ratio_exp, inputs, samples=2_000, seed=42, workers=1)
    by_client = monte_carlo(ratio_exp, inputs, samples=2_000, seed=42, scheduler=client)
    by_address = monte_carlo(ratio_exp, inputs, samples=2_000, seed=42,
                             scheduler=cluster.scheduler_address)
    assert np.array_equal(serial.values, by_client.values)
    assert np.array_equal(serial.values, by_address.values)
    assert serial == by_client == by_address


def test_mc_bad_scheduler_address_is_an_input_error():
    pytest.importorskip("distributed")
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    with pytest.raises(InputError) as info:
        monte_carlo(product, [Input("x1", 2.0, 0.5), Input("x2", 3.0, 1.0)], samples=200,
                    scheduler=f"tcp://127.0.0.1:{port}")
    assert info.value.key == "--scheduler"


# bad input -----------------------------------------------------------------------------------

@pytest.mark.parametrize("kwargs", [dict(value=float("nan"), u=0.1), dict(value=1.0, u=-0.1),
                                    dict(value=1.0, u=float("inf")), dict(value="x", u=0.1)])
def test_bad_input_quantity(kwargs):
    with pytest.raises(InputError) as info:
        Input("radius", **kwargs)
    assert info.value.key == "input[radius]"


def test_duplicate_names_and_empty_inputs():
    with pytest.raises(InputError, match="unique"):
        gum_linear(product, [Input("x", 1.0, 0.1), Input("x", 2.0, 0.1)])
    with pytest.raises(InputError):
        gum_linear(product, [])


@pytest.mark.parametrize("matrix", [
    [[1, 0.5], [0.4, 1]],                                  # not symmetric
    [[1, 1.2], [1.2, 1]],                                  # |r| > 1
    [[0.9, 0], [0, 1]],                                    # diagonal not one
    [[1, 0.9, 0.9], [0.9, 1, -0.9], [0.9, -0.9, 1]],       # no such joint distribution
    [[1, 0], [0, 1], [0, 0]],                              # wrong shape
])
def test_bad_correlation_matrix(matrix):
    inputs = [Input("x1", 1.0, 0.1), Input("x2", 2.0, 0.1)]
    if len(matrix) == 3 and len(matrix[0]) == 3:
        inputs.append(Input("x3", 3.0, 0.1))
    with pytest.raises(InputError) as info:
        gum_linear(sum_model, inputs, correlations=matrix)
    assert info.value.key == "correlations"


def sum_model(x):
    return float(np.sum(x))


@pytest.mark.parametrize("kwargs, key", [(dict(samples=30), "samples"), (dict(coverage=1.0), "coverage"),
                                         (dict(blocks=1), "blocks"), (dict(samples=2.5), "samples"),
                                         (dict(adaptive=True, max_samples=10), "max_samples")])
def test_bad_monte_carlo_settings(kwargs, key):
    with pytest.raises(InputError) as info:
        monte_carlo(product, [Input("x1", 2.0, 0.5), Input("x2", 3.0, 1.0)], workers=1, **kwargs)
    assert info.value.key == key


def test_model_undefined_for_some_draws_is_an_input_error():
    with pytest.raises(InputError, match="non-finite"):
        monte_carlo(None, [Input("x", 0.1, 1.0)], samples=1_000, model_batch=log_batch, workers=1)


def test_model_undefined_at_a_step_is_an_input_error():
    with pytest.raises(InputError, match="non-finite"):
        gum_linear(lambda x: math.sqrt(x[0]) if x[0] >= 0 else float("nan"),
                   [Input("x", 0.0, 0.1)])


def test_input_from_a_measured_scalar():
    assert Input.from_measured("r", Measured(0.01, 1e-5), "m") == Input("r", 0.01, 1e-5, "m")
    assert Input.from_measured("r", Measured(0.01, None)).u == 0.0


def test_budget_table_wants_a_gum_result():
    assert isinstance(gum_linear(product, [Input("x1", 2.0, 0.5), Input("x2", 3.0, 1.0)]), GumResult)
    with pytest.raises(TypeError):
        budget_table(object())
