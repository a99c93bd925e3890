"""`truepull fit DATA.csv` from the command line: segments, units, optical lever, --into, bad input."""

from __future__ import annotations

import json
import math
import tomllib

import numpy as np
import pytest

from truepull.cli.main import main

SCENE = """\
# a small scene for the fit tests
[scene]
title = "fit test"   # kept as is

[units]
length = "mm"

[[body]]
name = "bob"
group = "pendulum"
shape = "sphere"
radius = 9
density = 11340
at = [50, 0, 0]

[[body]]
name = "big"
group = "attractor"
shape = "sphere"
radius = 50
density = 11340
at = [120, 60, 0]

[[position]]
name = "near"
group = "attractor"
turn = 0

[measurement]    # to be replaced
method = "deflection"
angle = { near = 0.1, far = 0.2 }
period = 400
fiber_q = 2500

# the second position
[[position]]
name = "far"
group = "attractor"
turn = 90
"""

TRUTH = {"near": 1.5e-3, "far": -0.5e-3}       # equilibrium angles (rad) put into the synthetic run
PERIOD, DECREMENT = 60.0, 0.08


def synthetic_run(labels=("near", "far", "near"), noise=2e-6, seed=1, points=500, dt=1.0):
    """Times (s), angles (rad) and labels of a damped oscillation per segment (seeded noise)."""
    rng = np.random.default_rng(seed)
    ts, ys, ls = [], [], []
    t0 = 0.0
    for label in labels:
        t = t0 + dt * np.arange(points)
        tau = t - t0
        y = (TRUTH[label] + 1e-3 * np.exp(-DECREMENT / PERIOD * tau) * np.cos(2 * math.pi * tau / PERIOD)
             + rng.normal(0.0, noise, t.size))
        ts.append(t)
        ys.append(y)
        ls += [label] * t.size
        t0 = t[-1] + dt
    return np.concatenate(ts), np.concatenate(ys), ls


def write_csv(path, columns: dict[str, list]):
    names = list(columns)
    n = len(columns[names[0]])
    with open(path, "w") as fh:
        fh.write(",".join(names) + "\n")
        for i in range(n):
            fh.write(",".join(str(columns[c][i]) for c in names) + "\n")
    return str(path)


def run_json(capsys, argv):
    code = main(argv + ["--json"])
    out = capsys.readouterr()
    assert code == 0, out.err
    return json.loads(out.out)


def run_bad(capsys, argv) -> str:
    code = main(argv)
    out = capsys.readouterr()
    assert code == 2
    assert out.out == ""
    lines = out.err.strip().splitlines()
    assert len(lines) == 1, out.err
    return lines[0]


def test_segments_by_position_column(tmp_path, capsys):
    # Truth: the equilibria, period and decrement put into the synthetic run (seeded noise).
    t, y, labels = synthetic_run()
    data = write_csv(tmp_path / "run.csv", {"time": list(t), "angle": list(y), "position": labels})
    result = run_json(capsys, ["fit", data])
    segs = result["segments"]
    assert [s["position"] for s in segs] == ["near", "far", "near"]
    for s in segs:
        assert abs(s["equilibrium"] - TRUTH[s["position"]]) <= 4 * s["u_equilibrium"]
        assert abs(s["period"] - PERIOD) <= 4 * s["u_period"]
        assert abs(s["decrement"] - DECREMENT) <= 4 * s["u_decrement"]
        assert set(s) >= {"t_start", "t_end", "n_points", "amplitude", "u_amplitude", "drift", "u_drift",
                          "residual_rms", "lag1_autocorrelation", "durbin_watson", "note"}
    # the text table names its units
    assert main(["fit", data, "--angle-unit", "mrad"]) == 0
    text = capsys.readouterr().out
    assert "period (s)" in text and "equilibrium (mrad)" in text and "far" in text


def test_units_at_the_edge(tmp_path, capsys):
    # Times written in minutes and angles in degrees; the JSON must be SI (1 min = 60 s, 1 deg = pi/180 rad,
    # by definition).
    t, y, _ = synthetic_run(labels=("near",))
    data = write_csv(tmp_path / "run.csv", {"t_min": list(t / 60.0), "theta_deg": list(np.degrees(y))})
    seg = run_json(capsys, ["fit", data, "--time-column", "t_min", "--angle-column", "theta_deg",
                            "--time-unit", "min", "--angle-unit", "deg"])["segments"][0]
    assert seg["position"] is None
    assert abs(seg["period"] - PERIOD) <= 4 * seg["u_period"]
    assert abs(seg["equilibrium"] - TRUTH["near"]) <= 4 * seg["u_equilibrium"]


def test_optical_lever_spot_column(tmp_path, capsys):
    # Law of reflection: the reflected beam turns by twice the mirror angle, so a flat scale at D shows
    # s = D tan(2 theta). Spots made that way, in mm, must fit to the same angles as the angles themselves.
    t, y, labels = synthetic_run(labels=("near", "far"))
    lever = 1.75                                                     # m
    spot_mm = 1000.0 * lever * np.tan(2.0 * y)
    data = write_csv(tmp_path / "spot.csv", {"time": list(t), "spot": list(spot_mm), "angle": list(y),
                                              "position": labels})
    by_spot = run_json(capsys, ["fit", data, "--spot-column", "spot", "--lever-distance", "1750",
                                "--length-unit", "mm"])["segments"]
    by_angle = run_json(capsys, ["fit", data])["segments"]
    for a, b in zip(by_spot, by_angle):
        for key in ("equilibrium", "amplitude", "period", "decrement"):
            assert a[key] == pytest.approx(b[key], rel=1e-8, abs=1e-12)
    # a small-angle reading without the factor 2 would be twice as large: make sure it is not
    naive = spot_mm[:500].mean() / 1000.0 / lever
    assert abs(by_spot[0]["equilibrium"] - naive / 2) < abs(by_spot[0]["equilibrium"] - naive)
    # the lever distance may carry its own unit
    again = run_json(capsys, ["fit", data, "--spot-column", "spot", "--lever-distance", "1.75 m",
                              "--length-unit", "mm"])["segments"]
    assert again[0]["equilibrium"] == pytest.approx(by_spot[0]["equilibrium"], rel=1e-12)


def _scene_and_data(tmp_path):
    scene = tmp_path / "scene.toml"
    scene.write_text(SCENE)
    t, y, labels = synthetic_run()
    data = write_csv(tmp_path / "run.csv", {"time": list(t), "angle": list(y), "position": labels})
    return scene, data


def test_into_writes_new_scene_and_leaves_original(tmp_path, capsys):
    scene, data = _scene_and_data(tmp_path)
    before = scene.read_bytes()
    new = tmp_path / "measured.toml"
    result = run_json(capsys, ["fit", data, "--into", str(scene), "--out", str(new)])
    assert scene.read_bytes() == before
    segs = result["segments"]
    meas = tomllib.loads(new.read_text())["measurement"]
    assert meas["method"] == "deflection"
    assert list(meas["angle"]) == ["near", "far"]
    assert meas["fiber_q"] == 2500                                   # kept from the old table
    # the values written are those of the fit (near: two segments combined)
    far = next(s for s in segs if s["position"] == "far")
    value, _, u = meas["angle"]["far"].removesuffix(" rad").partition(" +- ")
    assert float(value) == pytest.approx(far["equilibrium"], abs=far["u_equilibrium"] / 10)
    assert float(u) == pytest.approx(far["u_equilibrium"], rel=0.05)
    period, _, u_period = meas["period"].removesuffix(" s").partition(" +- ")
    assert abs(float(period) - PERIOD) <= 4 * float(u_period)
    assert "+-" in meas["decrement"]
    # everything outside the [measurement] table is the original text, character for character
    old_lines, new_lines = SCENE.splitlines(), new.read_text().splitlines()
    cut = old_lines.index("[measurement]    # to be replaced")
    assert new_lines[:cut] == old_lines[:cut]
    tail = old_lines[old_lines.index("# the second position") - 1:]
    assert new_lines[-len(tail):] == tail
    old_rest = {k: v for k, v in tomllib.loads(SCENE).items() if k != "measurement"}
    assert {k: v for k, v in tomllib.loads(new.read_text()).items() if k != "measurement"} == old_rest
    # the new scene loads as a scene, with the fitted numbers in SI
    from truepull.geometry.scene import load_scene
    loaded = load_scene(new)
    assert loaded.measurement.angle["far"].value == pytest.approx(far["equilibrium"], abs=far["u_equilibrium"])


def test_into_swing_and_refusals(tmp_path, capsys):
    scene, data = _scene_and_data(tmp_path)
    new = tmp_path / "swing.toml"
    assert main(["fit", data, "--into", str(scene), "--out", str(new), "--method", "swing"]) == 0
    capsys.readouterr()
    meas = tomllib.loads(new.read_text())["measurement"]
    assert meas["method"] == "swing" and set(meas["period"]) == {"near", "far"}
    # never the input itself, and no silent overwrite
    assert "never overwritten" in run_bad(capsys, ["fit", data, "--into", str(scene), "--out", str(scene)])
    assert "--force" in run_bad(capsys, ["fit", data, "--into", str(scene), "--out", str(new)])
    assert main(["fit", data, "--into", str(scene), "--out", str(new), "--force"]) == 0
    capsys.readouterr()
    # a position the scene does not define
    t, y, _ = synthetic_run(labels=("near", "far"))
    other = write_csv(tmp_path / "other.csv", {"time": list(t), "angle": list(y),
                                               "position": ["near"] * 500 + ["middle"] * 500})
    msg = run_bad(capsys, ["fit", other, "--into", str(scene), "--out", str(tmp_path / "x.toml")])
    assert "middle" in msg and not (tmp_path / "x.toml").exists()


def test_scene_without_measurement_gets_one_appended(tmp_path, capsys):
    text = SCENE.replace('[measurement]    # to be replaced\nmethod = "deflection"\n'
                         'angle = { near = 0.1, far = 0.2 }\nperiod = 400\nfiber_q = 2500\n', "")
    scene = tmp_path / "bare.toml"
    scene.write_text(text)
    _, data = _scene_and_data(tmp_path)
    new = tmp_path / "filled.toml"
    assert main(["fit", data, "--into", str(scene), "--out", str(new)]) == 0
    capsys.readouterr()
    written = new.read_text()
    assert written.startswith(text)
    assert tomllib.loads(written)["measurement"]["method"] == "deflection"


def test_png_written(tmp_path, capsys):
    _, data = _scene_and_data(tmp_path)
    png = tmp_path / "fit.png"
    assert main(["fit", data, "--png", str(png)]) == 0
    capsys.readouterr()
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"             # PNG signature (PNG specification)


def _bad_files(tmp_path):
    t, y, _ = synthetic_run(labels=("near",))
    good = {"time": list(t), "angle": list(y)}
    files = {}
    files["too short"] = write_csv(tmp_path / "short.csv", {k: v[:30] for k, v in good.items()})
    nan = {"time": list(t), "angle": list(y)}
    nan["angle"][41] = "nan"
    files["nan row"] = write_csv(tmp_path / "nan.csv", nan)
    unsorted = {"time": list(t), "angle": list(y)}
    unsorted["time"][200] = 3.0
    files["unsorted"] = write_csv(tmp_path / "unsorted.csv", unsorted)
    flat = np.random.default_rng(2).normal(0.0, 1e-5, t.size) + 1e-3
    files["no oscillation"] = write_csv(tmp_path / "flat.csv", {"time": list(t), "angle": list(flat)})
    files["missing column"] = write_csv(tmp_path / "nocol.csv", {"time": list(t), "theta": list(y)})
    text = {"time": list(t), "angle": list(y)}
    text["angle"][9] = "n/a"
    files["not a number"] = write_csv(tmp_path / "text.csv", text)
    (tmp_path / "empty.csv").write_text("")
    files["empty"] = str(tmp_path / "empty.csv")
    return files


@pytest.mark.parametrize("case, expected", [
    ("too short", "shorter than about one period"),
    ("nan row", "line 43"),                       # header is line 1, data row 42 is line 43
    ("unsorted", "line 202"),
    ("no oscillation", "no oscillation"),
    ("missing column", "no column named 'angle' (columns present: time, theta)"),
    ("not a number", "line 11: 'n/a'"),
    ("empty", "empty"),
])
def test_bad_input_one_line_exit_2(tmp_path, capsys, case, expected):
    files = _bad_files(tmp_path)
    line = run_bad(capsys, ["fit", files[case]])
    assert line.startswith("truepull fit: ") and files[case] in line
    assert expected in line


def test_bad_options(tmp_path, capsys):
    _, data = _scene_and_data(tmp_path)
    assert "--lever-distance" in run_bad(capsys, ["fit", data, "--spot-column", "angle"])
    assert "time unit" in run_bad(capsys, ["fit", data, "--time-unit", "kg"])
    assert "--into" in run_bad(capsys, ["fit", data, "--out", str(tmp_path / "n.toml")])
    assert "two or more positions" in run_bad(capsys, [
        "fit", write_csv(tmp_path / "one.csv", {"time": list(range(300)),
                                                "angle": [math.sin(i / 5) for i in range(300)],
                                                "position": ["near"] * 300}),
        "--into", str(tmp_path / "scene.toml"), "--out", str(tmp_path / "n.toml")])


def test_run_fit_in_json_states_the_model_and_finds_the_generator_drift(capsys):
    # the generator's drift of the zero r t + q t^2 (shapes/make_demo_run.py: DRIFT_RATE, DRIFT_CURVE)
    # over the run's span T, in Legendre polynomials of u = 2 t / T - 1 (t = T (u + 1) / 2, u^2 =
    # (2 P_2 + 1) / 3; Abramowitz and Stegun 22.2.10, from memory): c_1 = r T / 2 + q T^2 / 2,
    # c_2 = q T^2 / 6. The pendulum follows the zero by kappa / (kappa + G stiffness), 1 - 7e-5 here,
    # and lags it by c / kappa ~ 0.8 s: both far below the fit's uncertainty, so neglected.
    import json

    from truepull.shapes import demo_run_path
    from truepull.shapes import make_demo_run as mr

    assert main(["fit", str(demo_run_path()), "--json"]) == 0
    run = json.loads(capsys.readouterr().out)["run"]
    assert run["model"]["drift_criterion"] == "BIC" and run["model"]["equation_of_motion"] == "linear"
    assert run["model"]["drift_order"] >= 2     # the drift is quadratic and the fit must see it
    span = run["segments"][-1]["t_end"] - run["segments"][0]["t_start"]
    (c1, c2), (u1, u2) = run["drift"]["coefficients"][:2], run["drift"]["u_coefficients"][:2]
    r, q = mr.DRIFT_RATE, mr.DRIFT_CURVE
    assert abs(c1 - (r * span / 2 + q * span**2 / 2)) < 4 * u1
    assert abs(c2 - q * span**2 / 6) < 4 * u2
    assert q * span**2 / 6 > 20 * u2              # the curvature is resolved, not lost in the noise
    assert main(["fit", str(demo_run_path()), "--json", "--drift-order", "3"]) == 0
    run3 = json.loads(capsys.readouterr().out)["run"]
    assert run3["model"]["drift_order"] == 3 and run3["model"]["drift_criterion"] == "given"
    assert len(run3["drift"]["coefficients"]) == 3
    assert main(["fit", str(demo_run_path()), "--drift-order", "-1"]) == 2


def test_into_refuses_a_scene_with_several_measurement_tables(tmp_path, capsys):
    # one [measurement] cannot stand for several [[measurement]] tables: refused, nothing written
    text = SCENE.replace('[measurement]    # to be replaced\nmethod = "deflection"\n'
                         'angle = { near = 0.1, far = 0.2 }\nperiod = 400\nfiber_q = 2500\n',
                         '[[measurement]]\nmethod = "deflection"\nangle = { near = 0.1, far = 0.2 }\nperiod = 400\n'
                         '[[measurement]]\nmethod = "swing"\nperiod = { near = 400, far = 401 }\n')
    assert text != SCENE
    scene = tmp_path / "two.toml"
    scene.write_text(text)
    _, data = _scene_and_data(tmp_path)
    new = tmp_path / "filled.toml"
    msg = run_bad(capsys, ["fit", data, "--into", str(scene), "--out", str(new)])
    assert "[[measurement]]" in msg and "two.toml" in msg and not new.exists()
    assert scene.read_text() == text
