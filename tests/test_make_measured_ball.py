"""The invented measured ball of the measured-form demo (shapes/make_measured_ball.py ->
shapes/measured_ball.csv) and the demo scene that uses it (shapes/demo_measured.toml)."""

import json
import math
import subprocess
import sys
from pathlib import Path

import numpy as np

from truepull.geometry.measured_form import fit_form, read_measured
from truepull.shapes import make_measured_ball as mb

SHAPES = Path(mb.__file__).parent


def test_the_committed_file_is_what_the_script_makes():
    tp = mb.directions()
    r = mb.measured_radii(tp, np.random.default_rng(mb.SEED))
    data = np.loadtxt(SHAPES / "measured_ball.csv", delimiter=",", skiprows=1)
    assert np.allclose(data[:, :2], tp, atol=1e-4) and np.allclose(data[:, 2], r, atol=1e-8)


def test_the_fit_recovers_the_invented_form_within_its_uncertainty():
    """The script's own amplitudes are the reference (an invented form, not a measurement); the noise
    it added, 0.3 um, is what the RMS residual must find (chi^2, relative sd ~ 2 %)."""
    pts = read_measured(SHAPES / "measured_ball.csv", 1e-3, "test", "file")
    fit = fit_form(pts, None)
    R = fit.coefficient(0, 0)[0] / math.sqrt(4 * math.pi)
    assert abs(R - 1e-3 * mb.RADIUS_MM) < 4 * fit.coefficient(0, 0)[1]
    for (l, m), eps in mb.FORM.items():
        c, u = fit.coefficient(l, m)
        assert abs(c / R - eps) < 4 * u / R
    assert abs(fit.rms / (1e-3 * mb.NOISE_MM) - 1) < 0.1


def test_bias_measured_form_of_the_demo_bob():
    cmd = [sys.executable, "-m", "truepull", "bias", str(SHAPES / "demo_measured.toml"), "--no-table",
           "--measured-form", "bob-east", "--rtol", "1e-5", "--json"]
    p = subprocess.run(cmd, capture_output=True, text=True)
    assert p.returncode == 0, p.stderr
    w = json.loads(p.stdout)["what_if"][0]
    assert w["kind"] == "measured-form" and w["G_ppm"] is not None and w["reached"]
    assert abs(w["d_torque_axis"]) > 10 * w["error_torque"]
    p = subprocess.run(cmd[:-5] + ["--measured-form", "bob-west"], capture_output=True, text=True)
    assert p.returncode == 2 and "--measured-form" in p.stderr and "not a fitted measured form" in p.stderr
    assert len(p.stderr.strip().splitlines()) == 1
