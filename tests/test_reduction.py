"""The G reduction against a synthetic experiment made from closed forms (tests/synthetic_balance.py):
deflection and time-of-swing recover the true G, the itemised factors match the two-ball formula of
teaching-lab manuals (from memory) and its far-mass correction, and bad measurements are refused."""

from __future__ import annotations

import math

import numpy as np
import pytest

import synthetic_balance as sb
from truepull.geometry.errors import InputError
from truepull.geometry.scene import load_scene_text
from truepull.integrate.balance.reduction import reduce_measurement

# the reference's own rounding: angles and periods are written with 17 digits and the equilibria are
# solved to ~1e-16 relative; G depends on differences of angles (deflection) or of 1/T^2 (swing), which
# amplify that rounding by value / difference. The recovered G may differ from the truth by this
# much beyond the reduction's numerical error.
REFERENCE_ROUNDING = 1e-15


@pytest.fixture(autouse=True, scope="module")
def one_numba_thread():
    """These scenes need only single-point kernels; one thread spares the start of an OpenMP team per
    call on a busy machine. Results do not depend on the thread count."""
    import numba

    before = numba.get_num_threads()
    numba.set_num_threads(1)
    yield
    numba.set_num_threads(before)


def _rad(value, u=None):
    return f'"{value!r} +- {u!r} rad"' if u else f'"{value!r} rad"'


def deflection_scene(positions=("A", "B"), offset=0.37, decrement=0.05, extra=""):
    """Scene text whose measured angles and period are computed from the closed forms."""
    psi = {"A": sb.PSI_A, "B": sb.PSI_B, "C": sb.PSI_C}
    theta = {p: sb.equilibrium(psi[p]) for p in positions}
    period = sb.damped_period(psi[positions[0]], decrement)
    angles = ", ".join(f"{p} = {_rad(theta[p] + offset)}" for p in positions)
    meas = f'method = "deflection"\nangle = {{ {angles} }}\nperiod = "{period!r} s"\ndecrement = {decrement!r}\n'
    return sb.scene_text({p: psi[p] for p in positions}, meas + extra), theta, period


def swing_scene(amplitude=None, decrement=0.0, extra=""):
    psi = {"near": sb.PSI_A, "far": sb.PSI_FAR}
    if amplitude is None:
        periods = {p: sb.damped_period(v, decrement) for p, v in psi.items()}
    else:  # undamped, finite amplitude, from the ODE
        periods = {p: sb.finite_amplitude_period(v, amplitude) for p, v in psi.items()}
    meas = (f'method = "swing"\nperiod = {{ near = "{periods["near"]!r} s", far = "{periods["far"]!r} s" }}\n'
            f"decrement = {decrement!r}\n")
    if amplitude is not None:
        meas += f'amplitude = "{amplitude!r} rad"\n'
    return sb.scene_text(psi, meas + extra)


def factor(result, start: str) -> float:
    return next(c.factor for c in result.corrections if c.name.startswith(start))


def _amplification(scene):
    m = scene.measurement
    if m.method == "deflection":
        values = np.array([a.value for a in m.angle.values()])
    else:
        values = np.array([p.value ** -2.0 for p in m.period.values()])
    return float(np.max(np.abs(values)) / np.ptp(values)) + 1.0


def reduce_text(text):
    scene = load_scene_text(text)
    return reduce_measurement(scene), _amplification(scene)


def assert_recovers(reduced):
    result, amplification = reduced
    # truth: G_TRUE put into the closed-form experiment
    err = abs(result.G - sb.G_TRUE)
    assert err <= 1e-9 * sb.G_TRUE
    assert err <= result.numerical_error + REFERENCE_ROUNDING * amplification * sb.G_TRUE
    assert result.numerical_error <= 1e-9 * sb.G_TRUE
    # the factors telescope: their product takes G_point to G
    if result.G_point is not None:
        product = math.prod(c.factor for c in result.corrections)
        assert product * result.G_point == pytest.approx(result.G, rel=1e-13)


def test_deflection_recovers_the_true_G_and_the_textbook_factors():
    text, theta, period = deflection_scene()
    reduced = reduce_text(text)
    result = reduced[0]
    assert_recovers(reduced)
    # the absolute equilibrium angles (from the fiber's rest) and the fiber constant come back too
    assert result.equilibrium == pytest.approx((theta["A"], theta["B"]), rel=1e-11)
    assert result.fiber_constant == pytest.approx(sb.KAPPA, rel=1e-11)
    # G_point is the two-ball formula G = 2 pi^2 L b^2 theta / (M T^2), L = 2D the beam, theta half
    # the change of the measured angle (common practice in teaching-lab manuals; from memory)
    half_change = (theta["A"] - theta["B"]) / 2
    textbook = 2 * math.pi**2 * (2 * sb.D) * sb.B**2 * half_change / (sb.M_BIG * period**2)
    assert result.G_point == pytest.approx(textbook, rel=1e-12)
    # the far attractor's pull: the two-ball formula without the far-ball term against with it,
    # 1 / (1 - beta), beta = b^3 / (b^2 + 4 d^2)^(3/2) (teaching-lab manuals; from memory)
    assert factor(result, "pull of every attractor body") == pytest.approx(1 / (1 - sb.FAR_BETA), rel=1e-12)
    # spheres act as points (shell theorem): no shape correction
    assert factor(result, "exact torque of the real shapes") == pytest.approx(1.0, abs=1e-13)
    # inertia of spheres about the axis against that of points: 1 + (2/5) r^2 / D^2 (standard
    # sphere inertia plus parallel axis, from memory)
    assert factor(result, "exact moment of inertia") == pytest.approx(1 + 0.4 * sb.R_BOB**2 / sb.D**2, rel=1e-13)
    # damping: omega0^2 / omega_d^2 = 1 + (delta / 2 pi)^2
    assert factor(result, "damping") == pytest.approx(1 + (0.05 / (2 * math.pi)) ** 2, rel=1e-13)


def test_deflection_with_three_positions_is_a_least_squares_fit_that_recovers_G():
    # the balls of C must clear the bobs: centre distance above the sum of radii (plane geometry)
    r = math.hypot(sb.D, sb.B)
    ball = (r * math.cos(sb.ANGLE + sb.PSI_C), r * math.sin(sb.ANGLE + sb.PSI_C))
    assert math.hypot(ball[0] - sb.D, ball[1]) > sb.R_BIG + sb.R_BOB
    text, theta, _ = deflection_scene(positions=("A", "C", "B"), offset=-1.2)
    reduced = reduce_text(text)
    result = reduced[0]
    assert_recovers(reduced)
    assert result.equilibrium == pytest.approx([theta[p] for p in ("A", "C", "B")], rel=1e-10)


def test_exact_equilibrium_matters_and_is_what_recovers_G():
    # The linearised reduction (all but the last factor) misses the truth by about the attractor's
    # share of the stiffness; the exact equilibrium takes it back to G_TRUE.
    reduced = reduce_text(deflection_scene()[0])
    result = reduced[0]
    linear = result.G / factor(result, "exact (not linearised) equilibrium")
    assert abs(linear / sb.G_TRUE - 1) > 1e-3
    assert_recovers(reduced)


def test_swing_recovers_the_true_G():
    reduced = reduce_text(swing_scene(decrement=0.03))
    result = reduced[0]
    assert_recovers(reduced)
    # near (as drawn at A) the pendulum hangs turned; far it does not (no torque by symmetry)
    assert result.equilibrium[0] == pytest.approx(sb.equilibrium(sb.PSI_A), rel=1e-10)
    assert abs(result.equilibrium[1]) < 1e-15
    # the stiffness where it hangs, against the closed form (mpmath.diff of Newton's torque)
    assert result.stiffness[0] == pytest.approx(sb.stiffness(sb.equilibrium(sb.PSI_A), sb.PSI_A), rel=1e-10)
    assert factor(result, "exact stiffness of the real shapes") == pytest.approx(1.0, abs=1e-13)


def test_swing_at_finite_amplitude_against_the_ode():
    amplitude = 0.01
    reduced = reduce_text(swing_scene(amplitude=amplitude))
    result = reduced[0]
    assert_recovers(reduced)
    # the correction is real: without it G would be off by far more than the tolerance
    assert abs(factor(result, "finite amplitude") - 1) > 1e-5
    # the period ratios against the ODE's periods (solve_ivp) over the small-amplitude closed form
    for ratio, psi in zip(result.period_ratio, (sb.PSI_A, sb.PSI_FAR)):
        assert ratio == pytest.approx(sb.finite_amplitude_period(psi, amplitude) / sb.undamped_period(psi), rel=1e-11)


def test_fiber_anelasticity_is_about_one_over_pi_q():
    q = 2000.0
    result = reduce_measurement(load_scene_text(swing_scene(extra=f"fiber_q = {q!r}\n")))
    # Kuroda 1995 (Phys. Rev. Lett. 75:2796; from memory): time-of-swing overestimates G by about 1/(pi Q);
    # "about" because only the fiber's part of the stiffness (here 99.7 %) is anelastic
    f = factor(result, "fiber anelasticity")
    assert (1 - f) == pytest.approx(1 / (math.pi * q), rel=0.01)
    assert result.G == pytest.approx(sb.G_TRUE * f, rel=1e-9)


def test_options_used_by_the_other_method_are_noted_not_silently_used():
    text, _, _ = deflection_scene(extra='fiber_q = 3000\namplitude = "1 mrad"\n')
    reduced = reduce_text(text)
    result = reduced[0]
    assert_recovers(reduced)
    assert any("fiber_q" in n for n in result.notes) and any("amplitude" in n for n in result.notes)


# ---------------------------------------------------------------------------------------------- refusals

def _refused(text, key_part, reason_part):
    with pytest.raises(InputError) as info:
        reduce_measurement(load_scene_text(text))
    assert key_part in (info.value.key or "")
    assert reason_part in info.value.reason
    return info.value


def test_no_measurement_is_refused():
    text = sb.scene_text({"A": 0.0}, 'method = "deflection"\n').split("[measurement]")[0]
    _refused(text, "measurement", "no [measurement]")


def test_positions_with_the_same_torque_cannot_give_a_deflection():
    # A and a copy of A: the torque does not change, so the angles cannot tell G
    meas = 'method = "deflection"\nangle = { A = "1 mrad", A2 = "2 mrad" }\nperiod = "300 s"\n'
    _refused(sb.scene_text({"A": 0.0, "A2": 0.0}, meas), "measurement", "does not change")


def test_swing_with_equal_stiffness_is_refused():
    # turned by half a turn the two balls swap places: the same stiffness at both positions
    meas = 'method = "swing"\nperiod = { near = "300 s", other = "301 s" }\n'
    _refused(sb.scene_text({"near": 0.0, "other": math.pi}, meas), "measurement", "stiffness is the same")


def test_angles_of_the_wrong_sign_are_refused():
    # the measured angles of A and B swapped: the deflection opposes the attractor's pull
    period = sb.damped_period(sb.PSI_A, 0.0)
    meas = (f'method = "deflection"\nangle = {{ A = {_rad(sb.equilibrium(sb.PSI_B))}, '
            f'B = {_rad(sb.equilibrium(sb.PSI_A))} }}\nperiod = "{period!r} s"\n')
    _refused(sb.scene_text({"A": sb.PSI_A, "B": sb.PSI_B}, meas), "measurement", "negative G")


def test_a_position_that_moves_the_pendulum_is_refused():
    text, _, _ = deflection_scene()
    text = text.replace('name = "B"\ngroup = "attractor"', 'name = "B"\ngroup = "pendulum"')
    _refused(text, "position[B].group", "moves the pendulum")


def test_swing_amplitude_table_must_cover_every_position():
    text = swing_scene(extra='amplitude = { near = "5 mrad" }\n')
    _refused(text, "measurement.amplitude", "far")


def test_an_amplitude_that_swings_the_bobs_into_the_attractor_is_refused():
    # turned by 1.5 rad the east bob's centre is 51 mm from ball-1's, less than the 56 mm sum of radii
    _refused(swing_scene(extra='amplitude = "1.5 rad"\n'), "measurement.amplitude", "overlap")
