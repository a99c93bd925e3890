"""`truepull reduce SCENE` from the command line: the contract's JSON, the text report, the cluster
option and the one-line refusals of bad input."""

from __future__ import annotations

import json
import math

import pytest

import synthetic_balance as sb
from truepull.cli.main import main


@pytest.fixture(autouse=True, scope="module")
def one_numba_thread():
    """Single-point kernels only: one thread spares OpenMP start-up on a busy machine (same results)."""
    import numba

    before = numba.get_num_threads()
    numba.set_num_threads(1)
    yield
    numba.set_num_threads(before)


QUICK = ["--samples", "40", "--check-draws", "10", "--workers", "1", "--no-progress"]


def deflection_text():
    theta = {p: sb.equilibrium(psi) for p, psi in (("A", sb.PSI_A), ("B", sb.PSI_B))}
    period = sb.damped_period(sb.PSI_A, 0.04)
    meas = (f'method = "deflection"\nangle = {{ A = "{theta["A"] - 0.5!r} +- 3e-6 rad", '
            f'B = "{theta["B"] - 0.5!r} +- 3e-6 rad" }}\nperiod = "{period!r} +- 0.04 s"\ndecrement = 0.04\n')
    return sb.scene_text({"A": sb.PSI_A, "B": sb.PSI_B}, meas, east_x=f'"{sb.D!r} +- 1e-5"')


def swing_text(extra=""):
    periods = {p: sb.damped_period(psi, 0.0) for p, psi in (("near", sb.PSI_A), ("far", sb.PSI_FAR))}
    meas = (f'method = "swing"\nperiod = {{ near = "{periods["near"]!r} +- 0.01 s", '
            f'far = "{periods["far"]!r} +- 0.01 s" }}\n{extra}')
    return sb.scene_text({"near": sb.PSI_A, "far": sb.PSI_FAR}, meas)


def write(tmp_path, text, name="scene.toml"):
    path = tmp_path / name
    path.write_text(text)
    return str(path)


def run_json(capsys, argv):
    code = main(argv + ["--json"])
    out = capsys.readouterr()
    assert code == 0, out.err
    return json.loads(out.out)


def run_bad(capsys, argv) -> str:
    code = main(argv)
    out = capsys.readouterr()
    assert code == 2, out.err
    assert out.out == ""
    lines = out.err.strip().splitlines()
    assert len(lines) == 1, out.err
    return lines[0]


def test_json_has_the_contract_keys_and_recovers_G(tmp_path, capsys):
    data = run_json(capsys, ["reduce", write(tmp_path, deflection_text())] + QUICK)
    assert list(data)[:5] == ["G", "u_G", "G_point", "corrections", "budget"]
    # truth: the G put into the closed-form experiment (tests/synthetic_balance.py)
    assert data["G"] == pytest.approx(sb.G_TRUE, rel=1e-9)
    assert data["u_G"] > 0
    for c in data["corrections"]:
        assert {"name", "factor"} <= set(c)
    # the product of the factors takes G_point to G
    assert math.prod(c["factor"] for c in data["corrections"]) * data["G_point"] == pytest.approx(data["G"], rel=1e-13)
    for row in data["budget"]:
        assert {"input", "value", "u", "sensitivity", "contribution"} <= set(row)
    assert {r["input"] for r in data["budget"]} == {"body[bob-east].at.x", "measurement.angle.A",
                                                    "measurement.angle.B", "measurement.period"}
    mc = data["monte_carlo"]
    assert mc["draws"] == 40 and mc["u_G"] > 0 and mc["rtol"] == 1e-6
    assert data["method"] == "deflection" and [p["position"] for p in data["positions"]] == ["A", "B"]


def test_text_report_names_corrections_and_budget(tmp_path, capsys):
    assert main(["reduce", write(tmp_path, deflection_text())] + QUICK) == 0
    text = capsys.readouterr().out
    for part in ("G        =", "G_point", "exact (not linearised) equilibrium", "damping",
                 "gravitational stiffness at the period position", "measurement.period", "ppm of G", "Monte Carlo"):
        assert part in text


def test_swing_with_a_fiber_q_from_the_command_line(tmp_path, capsys):
    data = run_json(capsys, ["reduce", write(tmp_path, swing_text()), "--fiber-q", "2500 +- 200"] + QUICK)
    names = [c["name"] for c in data["corrections"]]
    assert names[-1] == "fiber anelasticity"
    # Kuroda 1995 (from memory): about 1/(pi Q) on G
    assert 1 - data["corrections"][-1]["factor"] == pytest.approx(1 / (math.pi * 2500), rel=0.01)
    assert "measurement.fiber_q" in {r["input"] for r in data["budget"]}
    assert data["G"] == pytest.approx(sb.G_TRUE * data["corrections"][-1]["factor"], rel=1e-9)


def test_no_budget_option(tmp_path, capsys):
    data = run_json(capsys, ["reduce", write(tmp_path, deflection_text()), "--no-budget"])
    assert data["u_G"] is None and data["budget"] == [] and data["monte_carlo"] is None


def test_the_budget_on_a_dask_cluster_by_address(tmp_path, capsys):
    distributed = pytest.importorskip("distributed")
    cluster = distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False, protocol="tcp",
                                       host="127.0.0.1", dashboard_address=None)
    try:
        data = run_json(capsys, ["reduce", write(tmp_path, deflection_text()), "--scheduler",
                                 cluster.scheduler_address, "--samples", "40", "--no-progress"])
    finally:
        cluster.close()
    local = run_json(capsys, ["reduce", write(tmp_path, deflection_text()), "--samples", "40", "--workers", "1",
                              "--no-progress"])
    # the same seeded draws wherever they run
    assert data["monte_carlo"]["u_G"] == local["monte_carlo"]["u_G"]


# ------------------------------------------------------------------------------------- bad input

def test_no_measurement_table(tmp_path, capsys):
    text = deflection_text().split("[measurement]")[0]
    line = run_bad(capsys, ["reduce", write(tmp_path, text)])
    assert "measurement" in line and "no [measurement]" in line


def test_angle_for_an_unknown_position(tmp_path, capsys):
    text = deflection_text().replace("B = ", "C = ")
    line = run_bad(capsys, ["reduce", write(tmp_path, text)])
    assert "measurement.angle.C" in line and "not a position name" in line


def test_missing_period(tmp_path, capsys):
    text = "\n".join(ln for ln in deflection_text().splitlines() if not ln.startswith("period"))
    line = run_bad(capsys, ["reduce", write(tmp_path, text)])
    assert "measurement.period" in line and "missing period" in line


def test_swing_without_a_stiffness_difference(tmp_path, capsys):
    # half a turn swaps the two balls: the same stiffness at both positions
    meas = 'method = "swing"\nperiod = { near = "300 s", other = "301 s" }\n'
    text = sb.scene_text({"near": 0.0, "other": math.pi}, meas)
    line = run_bad(capsys, ["reduce", write(tmp_path, text)])
    assert "stiffness is the same" in line


def test_bodies_that_overlap_at_a_position(tmp_path, capsys):
    # turned by the attractor's own angle, ball-1 lands on the x axis 86 mm out, over bob-east at 50 mm
    text = deflection_text().replace(f'turn = "{sb.PSI_B!r} rad"', f'turn = "{-sb.ANGLE!r} rad"')
    line = run_bad(capsys, ["reduce", write(tmp_path, text)])
    assert "overlap" in line and "bob-east" in line


@pytest.mark.parametrize("argv, words", [(["--fiber-q", "abc"], "--fiber-q"), (["--fiber-q", "-3"], "--fiber-q"),
                                         (["--samples", "-1"], "--samples"), (["--rtol", "0"], "--rtol"),
                                         (["--samples", "10"], "samples")])
def test_bad_options(tmp_path, capsys, argv, words):
    line = run_bad(capsys, ["reduce", write(tmp_path, deflection_text())] + argv + ["--workers", "1", "--no-progress"])
    assert words in line


def test_missing_scene_file(tmp_path, capsys):
    line = run_bad(capsys, ["reduce", str(tmp_path / "nope.toml")])
    assert "not found" in line


# ------------------------------------------------------------------------ Monte Carlo and notation

def test_adaptive_monte_carlo_by_default_states_draws_stability_and_surrogate(tmp_path, capsys):
    data = run_json(capsys, ["reduce", write(tmp_path, deflection_text()), "--check-draws", "12", "--workers", "1",
                             "--no-progress"])
    assert list(data)[:5] == ["G", "u_G", "G_point", "corrections", "budget"]
    mc = data["monte_carlo"]
    assert mc["adaptive"] and mc["model"] == "surrogate" and mc["interval_kind"] == "probabilistically symmetric"
    assert mc["shortest_kind"] == "shortest"
    # JCGM 101:2008 7.9.4: blocks of M = 10^4, at least 10 of them; stable means the rule j) holds
    assert mc["draws"] == 10_000 * mc["blocks"] and mc["blocks"] >= 10
    t = mc["tolerance"]
    assert mc["stable"] and 2 * max(t["mean"], t["u"], t["low"], t["high"]) <= mc["delta"]
    # delta from u(G) to two significant digits (JCGM 101 7.9.2): half a unit of u's second digit
    e = math.floor(math.log10(mc["u_G"]))
    assert mc["delta"] == pytest.approx(0.5 * 10.0 ** (e - 1), rel=1e-9)
    # the reduction of this synthetic balance is nearly linear over the input spread, so the Monte
    # Carlo's u agrees with the GUM's to its stated tolerance (JCGM 101:2008 8: the GUM validated)
    assert abs(mc["u_G"] - data["u_G"]) <= mc["delta"]
    sur = mc["surrogate"]
    assert sur["check_draws"] == 12 and sur["negligible"] and sur["max_error"] >= sur["rms_error"] > 0
    assert sur["u_G_bound"] == pytest.approx(mc["u_G"] + sur["rms_error"], rel=1e-12)  # Minkowski
    assert sur["max_error"] / data["G"] * 1e6 == pytest.approx(sur["max_error_ppm"], rel=1e-12)


def test_fixed_samples_say_whether_they_are_stable(tmp_path, capsys):
    assert main(["reduce", write(tmp_path, deflection_text())] + QUICK) == 0
    text = capsys.readouterr().out
    assert "fixed number of draws" in text and "40 draws" in text and "NOT stable" in text
    assert "probabilistically symmetric" in text and "shortest" in text and "surrogate" in text
    assert "10 full-model draws" in text


def _nearest_torque_per_g(psi):
    """Axial torque per unit G of each attractor ball on its nearest bob only, as drawn (Newton's law
    for point pairs, written out from tests/synthetic_balance.py's geometry)."""
    r = math.hypot(sb.D, sb.B)
    total = 0.0
    bobs = [(sb.D, 0.0), (-sb.D, 0.0)]
    for sa in (1, -1):
        ax, ay = sa * r * math.cos(sb.ANGLE + psi), sa * r * math.sin(sb.ANGLE + psi)
        bx, by = min(bobs, key=lambda b: math.hypot(ax - b[0], ay - b[1]))
        dx, dy = ax - bx, ay - by
        total += sb.M_BOB * sb.M_BIG * (bx * dy - by * dx) / math.hypot(dx, dy) ** 3
    return total


def test_the_point_mass_formula_is_written_with_its_numbers(tmp_path, capsys):
    data = run_json(capsys, ["reduce", write(tmp_path, deflection_text()), "--samples", "0", "--workers", "1",
                             "--no-progress"])
    t = data["point_terms"]
    # the point-model inputs: points of the bobs' masses at +-D (I_p = 2 m D^2, point masses, closed form), the measured
    # period and angles, and the nearest pairs' point torques (Newton's law, by hand above)
    assert t["inertia_point"] == pytest.approx(2 * sb.M_BOB * sb.D**2, rel=1e-12)
    assert t["torques_per_G"][0] == pytest.approx(_nearest_torque_per_g(sb.PSI_A), rel=1e-12)
    assert t["torques_per_G"][1] == pytest.approx(_nearest_torque_per_g(sb.PSI_B), rel=1e-12)
    # and they give G_point by the formula written out
    g = t["inertia_point"] * (2 * math.pi / t["periods"][0]) ** 2 * (t["angles"][0] - t["angles"][1]) / (
        t["torques_per_G"][0] - t["torques_per_G"][1])
    assert g == pytest.approx(data["G_point"], rel=1e-12)
    assert main(["reduce", write(tmp_path, deflection_text()), "--samples", "0", "--workers", "1", "--no-progress"]) == 0
    text = capsys.readouterr().out
    assert "G_point = I_p (2 pi / T)^2 (phi_A - phi_B) / (Gamma_A - Gamma_B)" in text
    assert f"{t['inertia_point']:.9g} kg m^2" in text and f"{data['G_point']:.9g}" in text
    # G in concise notation, u to two digits (JCGM 100:2008 7.2.2), beside all digits
    from truepull.cli.notation import concise

    assert f"G = {concise(data['G'], data['u_G'])} m^3 kg^-1 s^-2" in text
