"""Sweeps of a turn or a shift.

Outside reference: Newton's law for point masses and uniform spheres (shell theorem), computed in
each test; a uniform sphere's field outside is a point's. For a STEP cylinder, the exact cylinder by
the engine's band field (itself checked against closed forms, scipy and mpmath in test_field_band).
"""

from __future__ import annotations

import importlib.util
import math

import numpy as np
import pytest

from truepull.geometry.errors import InputError
from truepull.geometry.scene import load_scene_text
from truepull.integrate.scans import Sweep, parse_range, scan

G = 6.6743e-11


def _scene(test_points, source_points, shape="point", radius=None, positions=""):
    """[(mass, (x, y, z))] in the pendulum and attractor groups; spheres of `radius` when given."""
    parts = []
    for group, pts in (("pendulum", test_points), ("attractor", source_points)):
        for k, (m, at) in enumerate(pts):
            size = f"radius = {radius!r}\n" if shape == "sphere" else ""
            parts.append(f'[[body]]\nname = "{group}-{k}"\ngroup = "{group}"\nshape = "{shape}"\n{size}'
                         f'mass = {m!r}\nat = [{at[0]!r}, {at[1]!r}, {at[2]!r}]\n')
    return load_scene_text(f"[scene]\nG = {G!r}\n" + "\n".join(parts) + positions)


def _rot(phi):
    c, s = math.cos(phi), math.sin(phi)
    return np.array([[c, -s, 0], [s, c, 0], [0, 0, 1.0]])


def _newton_torque(test_points, source_points, move_source=np.eye(3), shift=np.zeros(3), move_test=np.eye(3)):
    """Torque about z and force on the test masses (Newton's law), each group moved as given."""
    tau, F = 0.0, np.zeros(3)
    for m, r in test_points:
        r = move_test @ np.asarray(r, float)
        for M, q in source_points:
            q = move_source @ np.asarray(q, float) + shift
            d = q - r
            f = G * m * M * d / np.linalg.norm(d) ** 3
            F += f
            tau += np.cross(r, f)[2]
    return tau, F


TEST = [(0.02, (0.03, 0.0, 0.0)), (0.02, (-0.03, 0.0, 0.0))]
SOURCE = [(1.2, (0.0, 0.08, 0.01)), (1.2, (0.0, -0.08, -0.01))]


def test_parse_range_includes_stop_and_refuses_bad_steps():
    # reference: the documented grid START, START + STEP, ... up to STOP included (CONTRACT.md), counted
    # by hand
    assert parse_range("0:90:30", "--turn") == (0.0, 30.0, 60.0, 90.0)
    assert parse_range("0:359:1", "--turn")[-1] == 359.0 and len(parse_range("0:359:1", "--turn")) == 360
    assert parse_range("1:0:-0.5", "--turn") == (1.0, 0.5, 0.0)
    for bad in ("0:1", "0:1:0", "0:1:-1", "a:1:1", "0:inf:1"):
        with pytest.raises(InputError):
            parse_range(bad, "--turn")


def test_turn_of_point_masses_is_newton_on_the_multipole_path():
    sc = _scene(TEST, SOURCE)
    values = tuple(math.radians(v) for v in range(0, 360, 15))
    res = scan(sc, Sweep("turn", values, "attractor"), workers=1, checks=2)
    assert res.method == "multipole" and len(res.checks) == 2 and all(c.agrees for c in res.checks)
    for row in res.rows:
        tau, F = _newton_torque(TEST, SOURCE, _rot(row.value))  # Newton, computed here
        assert abs(row.exact_torque_axis - tau) <= 1e-9 * 1e-12 + 1e-9 * abs(tau)
        assert abs(row.exact_torque_axis - tau) <= row.error_torque_axis
        assert abs(row.point_torque_axis - tau) <= 1e-12 * abs(tau) + 1e-25
        assert np.linalg.norm(row.force - F) <= row.error_force  # the force cancels at some turns
        # stiffness: -d tau / d theta of the pendulum, by a central difference of Newton
        h = 1e-5
        dtau = (_newton_torque(TEST, SOURCE, _rot(row.value + h))[0]
                - _newton_torque(TEST, SOURCE, _rot(row.value - h))[0]) / (2 * h)
        assert abs(row.exact_stiffness_axis - dtau) <= 1e-7 * max(abs(dtau), 1e-13)


def test_slow_checks_go_to_the_workers_and_agree(monkeypatch):
    # a first check slower than the limit sends the others through map_parallel; same Newton values
    import truepull.integrate.scans as scans

    sc = _scene(TEST, SOURCE)
    values = tuple(math.radians(v) for v in range(0, 360, 30))
    calls = []
    real = scans.map_parallel
    monkeypatch.setattr(scans, "SERIAL_CHECK_SECONDS", -1.0)
    monkeypatch.setattr(scans, "map_parallel", lambda *a, **k: calls.append(len(a[1])) or real(*a, **k))
    res = scan(sc, Sweep("turn", values, "attractor"), workers=1, checks=3)
    assert calls == [2] and res.method == "multipole" and len(res.checks) == 3
    for c in res.checks:
        tau, _ = _newton_torque(TEST, SOURCE, _rot(c.value))  # Newton, computed here
        assert c.agrees and abs(c.direct - tau) <= 1e-9 * abs(tau) + 1e-25


def test_turning_the_pendulum_and_direct_integration_of_spheres():
    # spheres are points outside themselves (shell theorem): the direct path gives Newton as well
    sc = _scene(TEST, SOURCE, shape="sphere", radius=0.005)
    values = tuple(math.radians(v) for v in (0, 50, 100))
    direct = scan(sc, Sweep("turn", values, "pendulum"), workers=1, multipoles=False)
    fast = scan(sc, Sweep("turn", values, "pendulum"), workers=1, checks=1)
    assert direct.method == "direct" and fast.method == "multipole"
    for a, b in zip(direct.rows, fast.rows):
        tau, F = _newton_torque(TEST, SOURCE, move_test=_rot(a.value))
        assert abs(a.exact_torque_axis - tau) <= 1e-12 * abs(tau)
        assert abs(b.exact_torque_axis - tau) <= 1e-9 * abs(tau)
        assert np.linalg.norm(a.force - F) <= 1e-12 * np.linalg.norm(F) + 1e-12 * 1e-12
        assert np.linalg.norm(b.force - F) <= b.error_force


def test_shift_scan_and_overlapping_values():
    # reference: Newton's law for uniform spheres (shell theorem), computed here; the last shift puts the
    # source's centre 2 mm from a test sphere's, well inside the sum of their radii (by hand)
    source = [(1.2, (0.03, 0.08, 0.0))]
    sc = _scene(TEST, source, shape="sphere", radius=0.005)
    values = (-0.02, 0.0, 0.02, -0.078)  # the last brings the source sphere into a test sphere
    res = scan(sc, Sweep("shift", values, "attractor", "y"), workers=1)
    assert res.method == "direct"
    for row in res.rows[:3]:
        tau, F = _newton_torque(TEST, source, shift=np.array([0, row.value, 0]))
        assert abs(row.exact_torque_axis - tau) <= 1e-12 * abs(tau)
    last = res.rows[3]
    assert last.overlap and math.isnan(last.exact_torque_axis) and math.isfinite(last.point_torque_axis)
    assert any("overlap" in n for n in res.notes)


def test_interleaved_regions_fall_back_to_direct_integration():
    # reference: Newton's law for the two spheres (points outside themselves, shell theorem), computed here
    sc = _scene([(0.02, (0.05, 0.0, 0.0))], [(1.0, (0.0, 0.04, 0.0))])
    res = scan(sc, Sweep("turn", (0.0, 1.0), "attractor"), workers=1)
    assert res.method == "direct" and any("interleave" in n for n in res.notes)
    for row in res.rows:
        tau, _ = _newton_torque([(0.02, (0.05, 0, 0))], [(1.0, (0, 0.04, 0))], _rot(row.value))
        assert abs(row.exact_torque_axis - tau) <= 1e-12 * abs(tau)


def test_local_processes_and_a_dask_cluster_give_the_same_rows(tmp_path):
    # reference: Newton's law for the spheres, computed here; and the three ways must agree bit for bit
    text = "\n".join(f'[[body]]\nname = "t{k}"\ngroup = "pendulum"\nshape = "sphere"\nradius = 0.004\nmass = {m}\n'
                     f'at = [{r[0]}, {r[1]}, {r[2]}]\n' for k, (m, r) in enumerate(TEST))
    text += "\n".join(f'[[body]]\nname = "s{k}"\ngroup = "attractor"\nshape = "sphere"\nradius = 0.02\nmass = {m}\n'
                      f'at = [{r[0]}, {r[1]}, {r[2]}]\n' for k, (m, r) in enumerate(SOURCE))
    path = tmp_path / "scene.toml"
    path.write_text(text)
    sc = load_scene_text(text, str(path))
    sweep = Sweep("shift", (0.0, 0.01, 0.02, 0.03), "attractor", "z")
    serial = scan(sc, sweep, workers=1)
    pool = scan(sc, sweep, workers=2, scene_path=str(path))  # workers re-load the file
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=1, threads_per_worker=1, processes=False, dashboard_address=None) as cl:
        with distributed.Client(cl) as client:
            dask = scan(sc, sweep, scheduler=client)
    for a, b, c in zip(serial.rows, pool.rows, dask.rows):
        assert a.exact_torque_axis == b.exact_torque_axis == c.exact_torque_axis
        tau, _ = _newton_torque(TEST, SOURCE, shift=np.array([0, 0, a.value]))
        assert abs(a.exact_torque_axis - tau) <= 1e-12 * abs(tau)


def test_bad_sweeps_are_refused():
    # reference: the contract's rule for bad input (CONTRACT.md): an InputError, never a result
    sc = _scene(TEST, SOURCE)
    with pytest.raises(InputError):
        scan(sc, Sweep("turn", (0.0,), "nobody"))
    with pytest.raises(InputError):
        scan(sc, Sweep("shift", (0.0,), "attractor", "w"))
    with pytest.raises(InputError):
        scan(sc, Sweep("turn", (0.0,), "attractor"), rtol=0.0)
    with pytest.raises(InputError):
        scan(sc, Sweep("turn", (0.0,), "attractor"), position="nowhere")


def test_turn_scan_of_a_measured_ball_carries_its_chord_error():
    """A measured form whose points lie on the exact sphere (scene_fixtures.MEASURED_BALL): on the
    multipole path each row's torque error estimate, which now holds the change against the coarser
    tessellation, bounds the true error against Newton's law (the exact ball pulls as a point: shell
    theorem); the estimate without that change does not, and the rows past the tolerance say so."""
    from tests.scene_fixtures import exact_measured_ball_scene

    sc, test, source = exact_measured_ball_scene(G)
    values = tuple(math.radians(d) for d in range(0, 180, 20))
    res = scan(sc, Sweep("turn", values), rtol=1e-9, workers=1, checks=1)
    assert res.method == "multipole", res.notes
    assert res.checks and res.checks[0].agrees          # direct pairs carry the same chord change
    base = res.series.errors(tessellation=False)["torque_axis"]
    true = np.array([abs(r.exact_torque_axis - _newton_torque(test, source, _rot(r.value))[0]) for r in res.rows])
    est = np.array([r.error_torque_axis for r in res.rows])
    assert np.all(true <= est)                          # reference: Newton's point law (shell theorem)
    assert true.max() > 10 * base                       # the chord error is what the old estimate missed
    assert true.max() > 0.1 * est.max()                 # and not a vast overestimate
    assert not res.reached and any("tessellation" in n and "not reached" in n for n in res.notes)
    assert all(r.reached for r in scan(sc, Sweep("turn", values[1:3]), rtol=1e-6, workers=1, checks=0).rows)


@pytest.mark.skipif(importlib.util.find_spec("cascadio") is None, reason="the CAD extra (cascadio) is not installed")
def test_turn_scan_of_a_step_cylinder_within_its_tessellation_error():
    """The STEP cylinder (shapes/cylinder.step: R 30 mm, H 60 mm, base at the origin; 6,280 triangles,
    its coarse 3,140) in the pendulum, two 20 kg points 0.3 m off: the multipole rows against the exact
    cylinder integrated directly (the band field, checked against the on-axis closed form, ring
    integrals by scipy cubature and 30-digit mpmath in tests/test_field_band.py), within the estimate
    that holds the tessellation change and far outside the one without it."""
    from dataclasses import replace
    from pathlib import Path

    from truepull.geometry.bodies import Body
    from truepull.geometry.meshes import load_mesh
    from truepull.geometry.placement import Placement
    from truepull.geometry.shapes import Cylinder

    R, H, rho, x0 = 0.03, 0.06, 8000.0, 0.03
    shape = load_mesh(Path(__file__).parent.parent / "shapes" / "cylinder.step")
    sc = _scene([(1.0, (x0, 0.0, 0.0))], [(20.0, (0.0, 0.3, 0.01)), (20.0, (0.0, -0.3, -0.01))])

    def with_pendulum(shape, at):
        body = Body("pendulum-0", "pendulum", shape, Placement.shift(np.array(at)), rho)
        return replace(sc, bodies=tuple(body if b.name == "pendulum-0" else b for b in sc.bodies))

    values = tuple(math.radians(d) for d in (20.0, 50.0, 80.0))
    got = scan(with_pendulum(shape, [x0, 0.0, -H / 2]), Sweep("turn", values), rtol=1e-7, workers=1, checks=0)
    ref = scan(with_pendulum(Cylinder(R, H), [x0, 0.0, 0.0]), Sweep("turn", values), rtol=1e-11, workers=1,
               multipoles=False)
    assert got.method == "multipole" and ref.method == "direct"
    base = got.series.errors(tessellation=False)["torque_axis"]
    for g, r in zip(got.rows, ref.rows):
        true = abs(g.exact_torque_axis - r.exact_torque_axis)
        assert true <= g.error_torque_axis + r.error_torque_axis
        assert true > 10 * base                          # the tessellation error is real, and was left out
        assert np.linalg.norm(g.force - r.force) <= g.error_force + r.error_force
    assert not got.reached                               # 2.7e-6 of the torque: past rtol 1e-7
