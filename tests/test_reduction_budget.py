"""The uncertainty budget of a reduced G on the closed-form synthetic balance: GUM against Monte
Carlo, sensitivities against exact scaling laws of the balance equations, and the cluster run."""

from __future__ import annotations

import math

import numpy as np
import pytest

import synthetic_balance as sb
from truepull.geometry.scene import load_scene_text
from truepull.integrate.balance.reduction import reduce_measurement
from truepull.integrate.balance.reduction_budget import apply_inputs, reduction_budget, uncertain_inputs


@pytest.fixture(autouse=True, scope="module")
def one_numba_thread():
    """Single-point kernels only: one thread spares OpenMP start-up on a busy machine (same results)."""
    import numba

    before = numba.get_num_threads()
    numba.set_num_threads(1)
    yield
    numba.set_num_threads(before)


def uncertain_deflection():
    """The synthetic deflection run with stated uncertainties on measured values and geometry."""
    theta = {p: sb.equilibrium(psi) for p, psi in (("A", sb.PSI_A), ("B", sb.PSI_B))}
    period = sb.damped_period(sb.PSI_A, 0.05)
    meas = (f'method = "deflection"\nangle = {{ A = "{theta["A"] + 0.2!r} +- 2e-6 rad", '
            f'B = "{theta["B"] + 0.2!r} +- 2e-6 rad" }}\nperiod = "{period!r} +- 0.05 s"\n'
            'decrement = "0.05 +- 0.002"\n')
    text = sb.scene_text({"A": sb.PSI_A, "B": sb.PSI_B}, meas, east_x=f'"{sb.D!r} +- 2e-5"')
    text = text.replace(f"density = {sb.RHO!r}", f'density = "{sb.RHO!r} +- 20"')  # every body's density
    text = text.replace('turn = "0.0 rad"', 'turn = "0.0 +- 2e-4 rad"')
    return text


@pytest.fixture(scope="module")
def deflection():
    text = uncertain_deflection()
    scene = load_scene_text(text)
    return scene, reduce_measurement(scene), text


def test_every_stated_uncertainty_is_an_input(deflection):
    scene, _, _ = deflection
    names = [r.name for r in uncertain_inputs(scene)]
    assert names == ["body[bob-east].at.x", "body[bob-east].density", "body[bob-west].density",
                     "body[ball-1].density", "body[ball-2].density", "position[A].turn",
                     "measurement.angle.A", "measurement.angle.B", "measurement.period", "measurement.decrement"]


def test_inputs_rebuild_the_scene(deflection):
    # moving the east bob's centre by 1 mm moves its centre of mass by exactly that (a translation);
    # a turn of the position by 0.1 rad turns the attractor: ball-1 keeps its distance from the axis
    scene, _, _ = deflection
    refs = uncertain_inputs(scene)
    x = [r.value for r in refs]
    x[0] += 1e-3
    x[5] += 0.1
    moved, measured = apply_inputs(scene, refs, x)
    assert moved.body("bob-east").com[0] == pytest.approx(sb.D + 1e-3, rel=1e-15)
    a0 = scene.at_position("A").body("ball-1").com
    a1 = moved.at_position("A").body("ball-1").com
    assert np.linalg.norm(a1) == pytest.approx(np.linalg.norm(a0), rel=1e-14)
    assert math.atan2(a1[1], a1[0]) - math.atan2(a0[1], a0[0]) == pytest.approx(0.1, rel=1e-12)
    assert measured["measurement.period"] == refs[8].value


def test_sensitivities_follow_the_scaling_laws_of_the_balance(deflection):
    scene, result, text = deflection
    budget = reduction_budget(scene, result, text, samples=0, workers=1)
    c = {row["input"]: row["sensitivity"] for row in budget.rows}
    G = result.G
    # every balance equation has omega0^2 ~ T^-2 as a factor of G: G ~ T^-2, so dG/dT = -2 G / T exactly
    period = scene.measurement.period.value
    assert c["measurement.period"] == pytest.approx(-2 * G / period, rel=1e-8)
    # the bob density scales torque, stiffness and inertia alike: G does not depend on it
    assert abs(c["body[bob-east].density"] * sb.RHO) <= 1e-8 * G
    # G multiplies the attractor's mass in every gravitational term: G ~ 1/rho_attractor (Euler's theorem
    # for a homogeneous function of degree -1 in the two densities)
    euler = (c["body[ball-1].density"] + c["body[ball-2].density"]) * sb.RHO
    assert euler == pytest.approx(-G, rel=1e-8)
    # the derivative error bounds are far below the derivatives
    assert all(row["sensitivity_error"] <= 1e-6 * abs(row["sensitivity"]) + 1e-30 for row in budget.rows
               if abs(row["sensitivity"]) * row["u"] > 1e-9 * G)


def test_gum_and_monte_carlo_agree_for_this_nearly_linear_reduction(deflection):
    scene, result, text = deflection
    n = 300
    budget = reduction_budget(scene, result, text, samples=n, seed=7, workers=1)
    mc = budget.monte_carlo
    assert budget.gum_value == pytest.approx(result.G, rel=1e-12)
    # the sample standard deviation of n normal values has a relative standard error of
    # 1/sqrt(2 (n - 1)) (common practice); 4 of those
    assert mc.u / budget.u_G - 1 == pytest.approx(0.0, abs=4 / math.sqrt(2 * (n - 1)))
    # the mean: within 4 standard errors of G (the model's curvature adds far less here)
    assert abs(mc.value - result.G) <= 4 * budget.u_G / math.sqrt(n)
    # the engine ran at the looser tolerance, and the block tolerance of u is stated
    assert budget.mc_rtol == 1e-6 and mc.tolerance.u > 0


def test_budget_shares_add_up_and_ppm_are_of_G(deflection):
    scene, result, text = deflection
    budget = reduction_budget(scene, result, text, samples=0, workers=1)
    assert sum(row["share"] for row in budget.rows) == pytest.approx(1.0, rel=1e-12)
    combined = math.sqrt(sum(row["contribution"] ** 2 for row in budget.rows))
    assert combined == pytest.approx(budget.u_G, rel=1e-12)
    for row in budget.rows:
        assert row["contribution_ppm"] == pytest.approx(row["contribution"] / result.G * 1e6, rel=1e-12)


def test_no_uncertainties_no_budget():
    theta = {p: sb.equilibrium(psi) for p, psi in (("A", sb.PSI_A), ("B", sb.PSI_B))}
    meas = (f'method = "deflection"\nangle = {{ A = "{theta["A"]!r} rad", B = "{theta["B"]!r} rad" }}\n'
            f'period = "{sb.damped_period(sb.PSI_A, 0.0)!r} s"\n')
    text = sb.scene_text({"A": sb.PSI_A, "B": sb.PSI_B}, meas)
    scene = load_scene_text(text)
    budget = reduction_budget(scene, reduce_measurement(scene), text, workers=1)
    assert budget.u_G is None and budget.rows == () and "no uncertainties" in budget.notes[0]


def test_the_same_budget_on_a_dask_cluster(deflection):
    distributed = pytest.importorskip("distributed")
    scene, result, text = deflection
    cluster = distributed.LocalCluster(n_workers=1, threads_per_worker=2, processes=False, protocol="tcp",
                                       host="127.0.0.1", dashboard_address=None)
    client = distributed.Client(cluster, set_as_default=False)
    try:
        remote = reduction_budget(scene, result, text, samples=40, seed=3, scheduler=client)
    finally:
        client.close()
        cluster.close()
    here = reduction_budget(scene, result, text, samples=40, seed=3, workers=1)
    # the draws depend only on the seed: the cluster must give the very same values
    assert np.array_equal(remote.monte_carlo.values, here.monte_carlo.values)
    assert remote.u_G == here.u_G


def test_the_pivot_is_an_input_and_moving_it_is_moving_every_part_the_other_way():
    # translation invariance of Newton's law: a pivot moved by d is every body (and the turntable's
    # axis) moved by -d, so dG/d(pivot.x) = -sum over bodies of dG/d(at.x); along the fiber axis the
    # line is the same line, so dG/d(pivot.z) = 0
    import re

    theta = {p: sb.equilibrium(psi) for p, psi in (("A", sb.PSI_A), ("B", sb.PSI_B))}
    meas = (f'method = "deflection"\nangle = {{ A = "{theta["A"]!r} rad", B = "{theta["B"]!r} rad" }}\n'
            f'period = "{sb.undamped_period(sb.PSI_A)!r} s"\n')
    # an unbalanced beam (east bob 20 % farther out), so that the pivot matters to first order; the
    # law holds for any input values, so the angles need not be this scene's equilibria
    text = sb.scene_text({"A": sb.PSI_A, "B": sb.PSI_B}, meas, east_x=repr(1.2 * sb.D))
    text = re.sub(r"at = \[([^,]+), ([^,]+), 0\]", r'at = ["\1 +- 1e-5", "\2 +- 1e-5", 0]', text)
    text = text.replace("[scene]", '[frame]\npivot = ["0 +- 1e-5", "0 +- 1e-5", "0 +- 1e-5"]\n\n[scene]', 1)
    scene = load_scene_text(text)
    assert scene.frame.pivot_u == (1e-5, 1e-5, 1e-5)
    names = [r.name for r in uncertain_inputs(scene)]
    assert {"frame.pivot.x", "frame.pivot.y", "frame.pivot.z"} <= set(names)
    result = reduce_measurement(scene)
    budget = reduction_budget(scene, result, text, samples=0, workers=1)
    c = {row["input"]: row["sensitivity"] for row in budget.rows}
    err = {row["input"]: row["sensitivity_error"] for row in budget.rows}
    bodies = ("bob-east", "bob-west", "ball-1", "ball-2")
    for axis in "xy":
        total = sum(c[f"body[{b}].at.{axis}"] for b in bodies)
        scale = max(abs(c[f"body[{b}].at.{axis}"]) for b in bodies)
        assert abs(c[f"frame.pivot.{axis}"] + total) <= 1e-6 * scale
    assert abs(c["frame.pivot.x"]) > 1e-2 * max(abs(c[f"body[{b}].at.x"]) for b in bodies)
    assert abs(c["frame.pivot.z"]) <= err["frame.pivot.z"] + 1e-9 * abs(c["body[bob-east].at.x"])


def test_surrogate_checked_against_the_full_model_and_the_full_model_path(deflection):
    scene, result, text = deflection
    budget = reduction_budget(scene, result, text, samples=2_000, seed=4, check_draws=30, workers=1)
    run, mc = budget.surrogate, budget.monte_carlo
    # the check draws went through the full model: their spread is the model's u, which a sample sd
    # of 30 normal values estimates within 4 / sqrt(2 x 29) relative (common practice)
    assert abs(run.check.full_u / budget.u_G - 1) < 4 / math.sqrt(2 * 29)
    # the mixed terms of the bob and ball densities (zero first-order effect, so not among the leading
    # inputs) matter here at the level of delta (JCGM 101:2008 7.9.2, two digits): the first check sees
    # it, the surrogate is built again with every pair, and its error falls far below delta
    assert run.refined and run.negligible and run.check.max_error < 0.05 * mc.delta
    assert len(run.surrogate.pairs) == 45  # all pairs of the 10 inputs
    data = budget.to_json(result.G)["monte_carlo"]
    assert data["model"] == "surrogate" and data["surrogate"]["check_draws"] == 30 and data["surrogate"]["refined"]
    full = reduction_budget(scene, result, text, samples=40, seed=4, full_model=True, workers=1)
    assert full.surrogate is None and full.monte_carlo.draws == 40
    assert full.to_json(result.G)["monte_carlo"]["model"] == "full"
    assert full.to_json(result.G)["monte_carlo"]["surrogate"] is None
