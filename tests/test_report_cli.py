"""`truepull report`: the folder holds what it promises, is written whole or not at all, and a scene
with a measurement carries its G.

The scene here is made of uniform spheres only, so the exact interaction is Newton's law between
centres (shell theorem), and the measurement is synthesised in the test from Newton's law with a G
that is not the CODATA value: the report's G must come back to it.
"""

import json
import math
from pathlib import Path

import numpy as np
import pytest
from scipy.optimize import brentq

from truepull.cli import report as report_cli
from truepull.cli.main import main
from truepull.shapes import demo_run_path

G_TRUE = 6.70e-11          # m^3 kg^-1 s^-2, deliberately not CODATA's 6.674e-11
RHO = 11340.0              # kg/m^3, lead (from memory, typical handbook value)
R_BOB, L_BOB = 0.005, 0.040
R_BIG, D_BIG = 0.015, 0.062   # the big spheres clear the bobs by 2 mm at every turn
TURNS = {"A": -50.0, "B": 50.0}   # deg, turns of the attractor
PERIOD = 300.0             # s, free period at A (invented)


def _sphere_mass(r):
    return RHO * 4.0 / 3.0 * math.pi * r**3   # V = 4/3 pi r^3 (elementary geometry, from memory)


def _rot(deg):
    c, s = math.cos(math.radians(deg)), math.sin(math.radians(deg))
    return np.array([[c, -s, 0.0], [s, c, 0.0], [0.0, 0.0, 1.0]])


def newton_torque(theta, turn_deg, G=1.0):
    """Torque about z on the two bobs, the pendulum turned by theta (rad), the attractor by turn_deg:
    Newton's law between sphere centres (shell theorem, from memory)."""
    m, M = _sphere_mass(R_BOB), _sphere_mass(R_BIG)
    bobs = (_rot(math.degrees(theta)) @ np.array([[L_BOB, 0, 0], [-L_BOB, 0, 0]]).T).T
    bigs = (_rot(turn_deg) @ np.array([[0, D_BIG, 0], [0, -D_BIG, 0]]).T).T
    tau = 0.0
    for r in bobs:
        for q in bigs:
            d = q - r
            F = G * m * M * d / np.linalg.norm(d) ** 3
            tau += np.cross(r, F)[2]
    return tau


def synthetic_measurement():
    """Equilibrium angles at A and B and the free period at A for G_TRUE (exact equilibrium
    kappa theta = G Gamma(theta); I omega^2 = kappa + G k at A, with k = -dGamma/dtheta)."""
    m = _sphere_mass(R_BOB)
    inertia = 2 * (0.4 * m * R_BOB**2 + m * L_BOB**2)   # 2/5 m r^2 plus parallel axis (handbook, from memory)
    kappa = 8.0e-9                                       # N m/rad, the invented fiber
    theta = {}
    for name, turn in TURNS.items():
        theta[name] = brentq(lambda t: kappa * t - newton_torque(t, turn, G_TRUE), -0.05, 0.05, xtol=1e-18,
                             rtol=1e-15)
    h = 1e-5
    k_a = -(newton_torque(theta["A"] + h, TURNS["A"], G_TRUE) - newton_torque(theta["A"] - h, TURNS["A"], G_TRUE)) / (2 * h)
    omega2 = (kappa + k_a) / inertia
    return theta, 2 * math.pi / math.sqrt(omega2)


def scene_text(with_measurement=True):
    theta, period = synthetic_measurement()
    text = f"""
[scene]
title = "four spheres"

[units]
length = "m"
angle = "deg"

[[body]]
name = "bob-east"
group = "pendulum"
shape = "sphere"
radius = {R_BOB!r}
density = "{RHO!r} +- 5"
at = [{L_BOB!r}, 0, 0]

[[body]]
name = "bob-west"
group = "pendulum"
shape = "sphere"
radius = {R_BOB!r}
density = "{RHO!r} +- 5"
at = [{-L_BOB!r}, 0, 0]

[[body]]
name = "big-north"
group = "attractor"
shape = "sphere"
radius = {R_BIG!r}
density = {RHO!r}
at = [0, "{D_BIG!r} +- 1e-5", 0]

[[body]]
name = "big-south"
group = "attractor"
shape = "sphere"
radius = {R_BIG!r}
density = {RHO!r}
at = [0, {-D_BIG!r}, 0]

[[body]]
name = "table"
group = "stand"
shape = "box"
size = [0.3, 0.3, 0.01]
density = 2700
at = [0, 0, -0.05]

[[position]]
name = "A"
group = "attractor"
turn = {TURNS['A']!r}

[[position]]
name = "B"
group = "attractor"
turn = {TURNS['B']!r}
"""
    if with_measurement:
        text += f"""
[measurement]
method = "deflection"
angle = {{ A = "{theta['A']!r} +- 1e-7 rad", B = "{theta['B']!r} +- 1e-7 rad" }}
period = "{period!r} +- 0.01 s"
"""
    return text


@pytest.fixture(scope="module")
def spheres(tmp_path_factory):
    d = tmp_path_factory.mktemp("scene")
    path = d / "spheres.toml"
    path.write_text(scene_text())
    return path


@pytest.fixture(scope="module")
def plain(tmp_path_factory):
    path = tmp_path_factory.mktemp("plain") / "spheres-no-measurement.toml"
    path.write_text(scene_text(with_measurement=False))
    return path


@pytest.fixture(scope="module")
def full_report(spheres, tmp_path_factory):
    out = tmp_path_factory.mktemp("reports") / "full"
    code = main(["report", str(spheres), "--out", str(out), "--samples", "40", "--check-draws", "10", "--workers", "1",
                 "--turn=-60:60:20",
                 "--data", str(demo_run_path())])
    return code, out


def _load(out):
    return json.loads((out / "report.json").read_text())


def test_report_folder_holds_what_it_promises(full_report):
    code, out = full_report
    assert code == 0
    info = _load(out)
    files = set(p.name for p in out.iterdir())
    assert set(info["files"]) == files
    assert {"report.md", "report.json", "torque_vs_turn.png", "scan.csv", "fit.png", "budget.png", "view.png",
            "bias.png"} <= files
    for section in ("check", "compare", "scan", "bias", "fit", "reduce", "view"):
        assert info["sections"][section]["available"], section
        for fig in info["sections"][section]["figures"]:
            assert (out / fig).stat().st_size > 0
    for png in (p for p in files if p.endswith(".png")):
        assert (out / png).read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    md = (out / "report.md").read_text()
    assert info["tool"]["name"] == "truepull" and info["tool"]["version"] in md
    from truepull.cli.report import CAUTIONS

    assert all(f"- {c}" in md for c in CAUTIONS)  # every caution, word for word as in the README
    assert "engine tolerance: 1e-09" in md and "reached:" in md
    for fig in ("torque_vs_turn.png", "fit.png", "budget.png"):
        assert f"]({fig})" in md
    # no temporary folders left beside the report
    assert not [p for p in out.parent.iterdir() if p.name.startswith(".")]


def test_report_with_a_measurement_carries_its_G(full_report):
    code, out = full_report
    info = _load(out)
    red = info["sections"]["reduce"]
    # synthetic experiment from Newton's law with G_TRUE (this file): the reduction must recover it
    assert red["G"] == pytest.approx(G_TRUE, rel=1e-7)
    assert red["u_G"] > 0 and red["budget"]
    assert f"G = {red['G']:.9g}" in (out / "report.md").read_text()


def test_report_states_the_monte_carlo_and_explains_its_tables(full_report):
    code, out = full_report
    red = _load(out)["sections"]["reduce"]
    mc = red["monte_carlo"]
    md = (out / "report.md").read_text()
    section = md[md.index("## G from the measurement"):]
    section = section[:section.index("\n## ")]
    assert mc["draws"] == 40 and not mc["adaptive"] and mc["model"] == "surrogate"
    assert mc["surrogate"]["check_draws"] == 10
    # 40 draws cannot hold u to two digits (JCGM 101:2008 7.9.4 j): the report must say so
    assert not mc["stable"] and "NOT stable" in section and "40 draws" in section
    assert "probabilistically symmetric" in section and "shortest" in section and "surrogate" in section
    # every table of the section is followed by its columns explained once
    tables = sum(1 for line in section.splitlines() if line.startswith("|") and set(line) <= set("|:-"))
    assert tables >= 3 and section.count("Columns: ") == tables
    from truepull.cli.notation import concise

    assert f"G = {concise(red['G'], red['u_G'])}" in section and "ppm" in section


def test_report_asks_what_a_flattened_attractor_sphere_does(full_report):
    # one what-if per attractor sphere; for equal masses at mirror-image places the two agree (symmetry)
    code, out = full_report
    wi = _load(out)["sections"]["bias"]["what_if"]
    assert [w["kind"] for w in wi] == ["flatten", "flatten"]
    for w in wi:
        assert w["torque_ppm"] == pytest.approx(1e6 * (w["torque_after"] / w["torque_before"] - 1), rel=1e-9)
        assert w["G_ppm"] is not None
    assert wi[0]["torque_ppm"] == pytest.approx(wi[1]["torque_ppm"], rel=1e-3)
    assert "What if a sphere is not round" in (out / "report.md").read_text()


def test_report_compare_is_newton_for_spheres(full_report):
    code, out = full_report
    info = _load(out)
    results = info["sections"]["compare"]["results"]
    assert [r["position"] for r in results] == ["A", "B"]
    G = results[0]["G"]
    for r in results:
        # spheres act as points (shell theorem): Newton between centres, computed in this file
        expected = newton_torque(0.0, TURNS[r["position"]], G)
        assert r["exact"]["torque_axis"] == pytest.approx(expected, rel=1e-12)
    rows = info["sections"]["scan"]["rows"]
    assert [row["value"] for row in rows] == [-60.0, -40.0, -20.0, 0.0, 20.0, 40.0, 60.0]
    for row in rows:
        # at the survey tolerance (1e-6), within the row's own error estimate
        err = abs(row["exact_torque_axis"] - newton_torque(0.0, row["value"], G))
        assert err <= row["error_torque_axis"] + 1e-15 * abs(row["exact_torque_axis"])
        assert err <= 1e-6 * abs(row["exact_torque_axis"]) + 1e-25


def test_report_torque_harmonics_sum_to_newton(full_report):
    # the scan's Fourier series in the turn, summed at a few turns, is Newton's torque (this file)
    code, out = full_report
    scan = _load(out)["sections"]["scan"]
    assert scan["method"] == "multipole"
    h = scan["torque_harmonics"]
    G = _load(out)["sections"]["compare"]["results"][0]["G"]
    for turn in (-60.0, -13.0, 35.0):
        phi = math.radians(turn)
        total = sum(t["cos"] * math.cos(t["m"] * phi) + t["sin"] * math.sin(t["m"] * phi) for t in h["terms"])
        expected = newton_torque(0.0, turn, G)
        assert abs(total - expected) <= h["truncation_bound"] + sum(t["error"] for t in h["terms"]) + 1e-12 * abs(expected)
    assert "Fourier series in the turn" in (out / "report.md").read_text()


def test_report_fit_recovers_the_invented_run(full_report):
    from truepull.shapes import make_demo_run as mr

    code, out = full_report
    segs = _load(out)["sections"]["fit"]["segments"]
    assert [s["position"] for s in segs] == list(mr.SEQUENCE)
    # the generator's damped period at each position: omega_d^2 = (kappa + G s) / I - gamma^2, gamma =
    # c / 2I, s the gravitational stiffness per unit G at the equilibrium (damped oscillator,
    # Landau and Lifshitz, Mechanics, 3rd ed., sec. 25; from memory); the equilibrium to first order, zero + G Gamma(0) / kappa, is close enough
    b = mr.demo_balance()
    gamma = b.damping / (2 * b.inertia)
    for s in segs:
        eq = mr.ZERO + b.G * b.torque[s["position"]][0] / b.kappa
        stiff = float(b.curves[s["position"]].stiffness(eq))
        period = 2 * np.pi / np.sqrt((b.kappa + b.G * stiff) / b.inertia - gamma**2)
        # within five standard uncertainties
        assert abs(s["period"] - period) < 5 * s["u_period"]


def test_other_groups_are_not_in_the_interaction(full_report):
    code, out = full_report
    pairs = _load(out)["sections"]["compare"]["results"][0]["pairs"]
    assert {p["source"] for p in pairs} == {"big-north", "big-south"}
    assert "table" not in {p["test"] for p in pairs}


def test_no_scene_runs_the_built_in_demo(plain, tmp_path, monkeypatch):
    import os

    import truepull.shapes

    scene = plain
    monkeypatch.setattr(truepull.shapes, "demo_path", lambda: scene)
    out = tmp_path / "r"
    assert main(["report", "--out", str(out), "--no-bias", "--no-view", "--workers", "1", "--turn=-50:50:50"]) == 0
    info = _load(out)
    assert info["scene"]["path"] == os.path.relpath(scene, out).replace(os.sep, "/")  # relative to the report
    assert "reduce" in {m["section"] for m in info["not_included"]}
    assert "reduce" not in info["sections"]


def test_refuses_a_non_empty_folder_without_force(spheres, tmp_path, capsys):
    out = tmp_path / "busy"
    out.mkdir()
    (out / "notes.txt").write_text("mine")
    assert main(["report", str(spheres), "--out", str(out), "--no-bias", "--no-view"]) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and "--force" in err
    assert main(["report", str(spheres), "--out", str(out), "--no-bias", "--no-view", "--force"]) == 2
    assert "not a truepull report" in capsys.readouterr().err
    assert [p.name for p in out.iterdir()] == ["notes.txt"]


def test_force_replaces_an_earlier_report_whole(plain, tmp_path):
    out = tmp_path / "again"
    args = ["report", str(plain), "--out", str(out), "--no-bias", "--no-view", "--samples", "0", "--workers", "1",
            "--turn=-50:50:50"]
    assert main(args) == 0
    (out / "stale.png").write_bytes(b"old")
    assert main(args) == 2                     # not without --force
    assert main(args + ["--force"]) == 0
    assert not (out / "stale.png").exists()
    assert (out / "report.json").is_file()
    assert [p.name for p in tmp_path.iterdir()] == ["again"]


def test_a_failure_leaves_nothing_behind(spheres, tmp_path, monkeypatch):
    def broken(ctx):
        raise RuntimeError("engine exploded")

    monkeypatch.setattr(report_cli, "section_scan", broken)
    out = tmp_path / "never"
    assert main(["report", str(spheres), "--out", str(out), "--no-bias", "--no-view"]) == 1
    assert list(tmp_path.iterdir()) == []


def test_a_missing_piece_is_listed_not_faked(spheres, tmp_path, monkeypatch):
    real = report_cli._need

    def without_scans(module):
        if module == "truepull.integrate.scans":
            raise report_cli.PieceMissing(f"{module} is not part of this build")
        return real(module)

    monkeypatch.setattr(report_cli, "_need", without_scans)
    out = tmp_path / "partial"
    assert main(["report", str(spheres), "--out", str(out), "--no-bias", "--no-view", "--samples", "0", "--workers", "1"]) == 0
    info = _load(out)
    assert info["sections"]["scan"]["available"] is False
    assert not (out / "torque_vs_turn.png").exists()
    md = (out / "report.md").read_text()
    assert "scan: truepull.integrate.scans is not part of this build" in md
    assert "## Torque versus turn" not in md


@pytest.mark.parametrize("extra, key", [
    (["--rtol", "0"], "--rtol"),
    (["--survey-rtol", "nan"], "--survey-rtol"),
    (["--samples", "-1"], "--samples"),
    (["--data", "no-such-run.csv"], "--data"),
])
def test_bad_options_exit_2_with_one_line(spheres, tmp_path, capsys, extra, key):
    out = tmp_path / "x"
    assert main(["report", str(spheres), "--out", str(out)] + extra) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1 and key in err
    assert not out.exists()


def test_missing_scene_exits_2(tmp_path, capsys):
    assert main(["report", str(tmp_path / "nope.toml"), "--out", str(tmp_path / "r")]) == 2
    assert "not found" in capsys.readouterr().err


def test_test_and_source_groups_are_chosen_by_options(plain, tmp_path):
    out = tmp_path / "stand"
    assert main(["report", str(plain), "--out", str(out), "--source", "stand", "--no-bias", "--no-view",
                 "--workers", "1", "--turn=0:90:90"]) == 0
    results = _load(out)["sections"]["compare"]["results"]
    assert {p["source"] for p in results[0]["pairs"]} == {"table"}
    assert all(r["source"] == "stand" for r in results)


def test_report_reduces_the_run_beside_the_stated_measurement(full_report):
    code, out = full_report
    sections = _load(out)["sections"]
    assert sections["fit"]["run"]["model"]["equation_of_motion"].startswith("second order")
    run, stated = sections["reduce_run"], sections["reduce"]
    cmp = run["stated_comparison"]
    assert cmp["G_stated"] == stated["G"]
    # the difference in combined standard uncertainties, sqrt(u1^2 + u2^2) (JCGM 100 for independent values)
    assert math.isclose(cmp["in_combined_u"], (run["G"] - stated["G"]) / math.hypot(run["u_G"], stated["u_G"]))
    assert "G from the recorded run" in (out / "report.md").read_text()


def test_report_names_no_folder_of_this_machine_and_follows_the_umask(full_report, spheres):
    import os
    import stat

    code, out = full_report
    info = _load(out)
    assert info["scene"]["path"] == os.path.relpath(spheres, out).replace(os.sep, "/")
    text = (out / "report.md").read_text() + (out / "report.json").read_text()
    assert str(spheres.parent) not in text and str(out) not in text
    mask = os.umask(0)
    os.umask(mask)
    assert stat.S_IMODE(out.stat().st_mode) == 0o777 & ~mask  # POSIX mkdir(2): 0777 & ~umask
    for p in out.iterdir():
        assert stat.S_IMODE(p.stat().st_mode) == 0o666 & ~mask, p.name  # open(2): 0666 & ~umask


def test_cautions_name_the_same_hazards_in_readme_and_report():
    # the hazards named in the lab-safety notes (common practice): each in both places, and the
    # README's list under Cautions is the report's word for word (bold marks and line breaks aside)
    import re

    from truepull.cli.report import CAUTIONS

    readme = (Path(__file__).resolve().parent.parent / "README.md").read_text()
    section = readme.split("## Cautions", 1)[1].split("\n## ", 1)[0]
    items = [" ".join(i.replace("**", "").split()) for i in re.split(r"\n- ", section)[1:]]
    assert items == list(CAUTIONS)
    report = " ".join(CAUTIONS).lower()
    for hazard in ("lead is toxic", "crush", "laser", "eye", "fiber can snap", "tungsten", "dust and chips",
                   "pinch", "implode", "local codes", "safety rules"):
        assert hazard in report, hazard


def test_budget_figure_shows_the_total_above_the_inputs(monkeypatch):
    from truepull.cli import report as report_cli

    figs = []
    monkeypatch.setattr(report_cli, "save_figure_atomic", lambda fig, path, **kw: figs.append(fig))
    rows = [{"input": "a", "contribution": 3e-15, "contribution_ppm": 45.0},
            {"input": "b", "contribution": 4e-15, "contribution_ppm": 60.0}]
    G, u = 6.674e-11, 5.0e-15
    report_cli.budget_png("x.png", rows, G, u)
    ax = figs[0].axes[0]
    labels = [t.get_text() for t in ax.get_yticklabels()]
    assert labels == ["a", "b", report_cli.TOTAL_LABEL]  # largest input nearest the total, at the top
    widths = [p.get_width() for p in ax.patches]
    # the total's bar is u / G in ppm (the definition of a relative uncertainty in ppm), 5e-15 / 6.674e-11
    assert widths[-1] == pytest.approx(u / G * 1e6, rel=1e-12) and widths[:2] == [45.0, 60.0]
