"""A measured form's fit uncertainty in the G budget (integrate/balance/form_modes.py).

Outside references:
- The layer rows against closed forms for a ball of radius R: its volume 4 pi R^3 / 3 (with
  R = c00 / sqrt(4 pi)); the shell theorem (a uniform spherical layer pulls as a point at its centre,
  so the Y00 layer's torque and stiffness are Newton's for a point mass); a layer along Y1m is, to
  first order, the ball moved by c Y1m's direction vector, so its torque is Newton's torque
  differentiated along that move; the inertia of a thin shell about a parallel axis (2/3 m R^2 plus
  m d^2, parallel-axis theorem).
- The budget's form modes against the law of propagation of uncertainty for correlated inputs
  (JCGM 100:2008, eq. 13: u^2 = s^T C s with every fitted coefficient an input, C the fit's
  covariance), its sensitivities s by central differences of the same full model: the modes must
  carry all of it but the stated lost fraction.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from tests.scene_fixtures import measured_ball_scene, measured_cylinder_points, write_measured_ball
from truepull.geometry.measured_form import real_harmonics
from truepull.geometry.scene import load_scene_text
from truepull.integrate.balance import reduction_budget as rb
from truepull.integrate.balance.form_modes import layer_net, observation_rows
from truepull.integrate.balance.reduction import per_unit_g, reduce_measurement

R = 0.010
RHO = 18000.0


def _newton_torque(c, pivot, axis, sources):
    """Axial torque per unit G on a unit point mass at c from point masses (mass, position) (Newton)."""
    g = sum(m * (s - c) / np.linalg.norm(s - c) ** 3 for m, s in sources)
    return float(np.cross(c - pivot, g) @ axis)


def _scene(tmp_path, noise_mm=0.0, degree=2, cylinder=False):
    csv = tmp_path / "ball.csv"
    write_measured_ball(csv, 10.0, 0.0 if noise_mm == 0 else 1e-3, noise_mm)
    return load_scene_text(measured_ball_scene(csv.name, degree), str(tmp_path / "s.toml"), str(tmp_path))


def test_layer_rows_match_the_shell_theorem_and_a_moved_ball(tmp_path):
    """J's columns for Y00 and Y1m of a perfect ball (noiseless points) against Newton's point-mass torque,
    stiffness, the thin shell's inertia and the ball's volume (module docstring)."""
    scene = _scene(tmp_path)
    s1 = per_unit_g(scene)
    body = s1.body("bob-east")
    fit = body.shape.form.fit
    net = layer_net(fit)
    J = observation_rows(s1, "bob-east", net, "deflection", ((0.0,), (0.0,)))
    # rows: torque A, stiffness A, torque B, stiffness B, inertia, volume
    pivot, axis = s1.frame.pivot, s1.frame.axis
    c = body.com
    k4pi = math.sqrt(4 * math.pi)
    dm00 = RHO * k4pi * R * R                              # mass of the Y00 layer per unit c00
    mass = RHO * 4 * math.pi * R**3 / 3
    tol = 5e-3    # the one-point rule on the inscribed net: its area falls short of the sphere's by about 2e-3
    assert J[5, 0] == pytest.approx(k4pi * R * R, rel=tol)      # d(4 pi R^3 / 3) / d c00
    d_perp2 = float(c[0] ** 2 + c[1] ** 2)
    assert J[4, 0] == pytest.approx(dm00 * (d_perp2 + 2 * R * R / 3), rel=tol)   # shell, parallel axis
    b = real_harmonics(1, np.eye(3))[:, 1:4].T            # Y1m(u) = b_m . u
    for row, pos in ((0, "A"), (2, "B")):
        placed = s1.at_position(pos)
        sources = [(a.mass, a.com) for a in placed.group("attractor")]
        tau = _newton_torque(c, pivot, axis, sources)
        assert J[row, 0] == pytest.approx(dm00 * tau, rel=tol)
        h = 1e-6                                          # stiffness -d tau / d theta of the turning point
        w = np.cross(axis, c - pivot)
        k = -(_newton_torque(c + h * w, pivot, axis, sources) - _newton_torque(c - h * w, pivot, axis, sources)) / (2 * h)
        assert J[row + 1, 0] == pytest.approx(dm00 * k, rel=tol)
        for m in range(3):                                # columns 1..3: Y1,-1, Y1,0, Y1,1: the ball moved by b_m
            step = 1e-7 * b[m] / np.linalg.norm(b[m])
            moved = (_newton_torque(c + step, pivot, axis, sources)
                     - _newton_torque(c - step, pivot, axis, sources)) / (2e-7 / np.linalg.norm(b[m]))
            scale = max(abs(J[row, 0]), 1e-300) * 1e-3
            assert abs(J[row, 1 + m] - mass * moved) <= tol * abs(mass * moved) + scale


def _cylinder_csv(path):
    pts = measured_cylinder_points(0.010, 0.012, 2e-3, 1e-3, 2e-6, np.random.default_rng(5))
    np.savetxt(path, pts * 1e3, delimiter=",", header="x,y,z", comments="")


SERVO = 'method = "servo"\nvoltage = { A = "1.8 V", B = "2.0 V" }\ntorque_per_volt2 = "2.0e-12 N m/V^2"'
ACCELERATION = 'method = "acceleration"\nharmonic = 2\nacceleration = "2e-7 rad/s^2"'


@pytest.mark.parametrize("form", ["sphere", "cylinder", "attractor sphere", "servo"])
def test_modes_carry_the_whole_correlated_propagation(tmp_path, form):
    """u(G) from the budget's form modes against JCGM 100 eq. 13 over every coefficient: the 9 of a degree-2
    ball fit, the 22 of an order-2, degree-1 cylinder fit (side 5 x 2, faces 6 each), both pendulum bobs
    with 2 um point noise; a 25 mm attractor ball (degree 2, 3 um noise: the reaction's sign); the degree-2
    ball under the servo method (its own rows of J). The acceleration method's full-turn harmonic of a
    20,480-triangle body is too slow to step every coefficient in a test; its rows are checked below."""
    csv = tmp_path / "part.csv"
    measured = "bob-east"
    if form == "sphere":
        write_measured_ball(csv, 10.0, 1e-3, 0.002)
        text = measured_ball_scene(csv.name, 2)
    elif form == "cylinder":
        _cylinder_csv(csv)
        text = measured_ball_scene(csv.name, "[2, 1]", form="cylinder")
    elif form == "attractor sphere":
        measured = "lead-a"
        write_measured_ball(csv, 25.0, 1e-3, 0.003, n=800)
        text = measured_ball_scene(csv.name, 2, measured=measured)
    else:                                   # the servo's torques at each position
        write_measured_ball(csv, 10.0, 1e-3, 0.002)
        text = measured_ball_scene(csv.name, 2, measurement=SERVO, reach=80)
    path = str(tmp_path / "s.toml")
    scene = load_scene_text(text, path, str(tmp_path))
    red = reduce_measurement(scene, rtol=1e-9)
    budget = rb.reduction_budget(scene, red, text, samples=0)
    rows = [r for r in budget.rows if ".form.mode" in r["input"]]
    assert rows and any(f"measured form of '{measured}'" in n for n in budget.notes)
    u_modes = math.sqrt(sum(r["contribution"] ** 2 for r in rows))
    lost = float(next(n for n in budget.notes if "measured form" in n).split("at most ")[1].split(" ")[0])

    fit = scene.body(measured).shape.form.fit
    n = fit.coefficients.size
    std = np.sqrt(np.diag(fit.covariance))
    refs = tuple(rb.InputRef(f"c{i}", "form", measured, str(i), 0.0, std[i], "m", tuple(np.eye(n)[i]))
                 for i in range(n))
    context = rb.ModelContext(text, path, str(tmp_path), "pendulum", "attractor", 1e-9, refs,
                              rb.budget_nodes(scene, red), red.state, None)
    s = np.zeros(n)
    for i in range(n):
        x = np.zeros(n)
        x[i] = std[i]
        up = rb.g_model(context, x)
        x[i] = -std[i]
        s[i] = (up - rb.g_model(context, x)) / (2 * std[i])
    u_all = math.sqrt(s @ fit.covariance @ s)              # JCGM 100:2008 eq. 13
    assert u_all > 1e-8 * red.G                           # the form matters at this noise
    # the modes can only miss part of it (lost), and may exceed it only by the derivatives' own error
    assert u_modes**2 >= (1 - lost) * u_all**2 * (1 - 1e-4)
    assert u_modes <= u_all * (1 + 1e-4)
    assert lost < 1e-2


def test_acceleration_rows_are_newton_at_every_turn(tmp_path):
    """The acceleration method's rows of J (torque at 16 turns of the pendulum, inertia, volume): the Y00
    column against the shell theorem (a uniform layer pulls as a point at its centre) at every turn."""
    from truepull.integrate.balance.form_modes import MIN_ACCELERATION_TURNS

    csv = tmp_path / "ball.csv"
    write_measured_ball(csv, 10.0, 0.0, 0.0)
    scene = load_scene_text(measured_ball_scene(csv.name, 2, measurement=ACCELERATION, reach=80),
                            str(tmp_path / "s.toml"), str(tmp_path))
    s1 = per_unit_g(scene)
    net = layer_net(s1.body("bob-east").shape.form.fit)
    J = observation_rows(s1, "bob-east", net, "acceleration", None)
    k = MIN_ACCELERATION_TURNS                 # 8 per order, at least 16: 16 for harmonic 2
    assert J.shape[0] == k + 2
    pivot, axis = s1.frame.pivot, s1.frame.axis
    sources = [(a.mass, a.com) for a in s1.group("attractor")]
    dm00 = RHO * math.sqrt(4 * math.pi) * R * R
    for j in range(k):
        theta = 2 * math.pi * j / k
        c = s1.frame.turn(theta).apply(s1.body("bob-east").com)
        tau = _newton_torque(c, pivot, axis, sources)
        assert J[j, 0] == pytest.approx(dm00 * tau, rel=5e-3, abs=5e-3 * abs(J[:k, 0]).max())

