"""`truepull mesh`: the inspector's numbers against closed forms and trimesh, the unit warning, the
[[body]] block, and bad part files refused with exit 2 and one line."""

import json
import math

import numpy as np
import pytest
import trimesh

from truepull.cli.main import main

PI = math.pi


def run(args, capsys):
    code = main(args)
    out, err = capsys.readouterr()
    return code, out, err


def inspect_json(capsys, *args):
    code, out, err = run(["mesh", *map(str, args), "--json"], capsys)
    assert code == 0 and err == "", err
    return json.loads(out)


def test_box_in_mm_matches_closed_forms(tmp_path, capsys):
    box = trimesh.creation.box(extents=(10.0, 20.0, 30.0))
    box.apply_translation((5.0, -2.0, 7.0))
    path = tmp_path / "block.stl"
    box.export(path)
    f = inspect_json(capsys, path, "--units", "mm", "--density", "8000")
    a, b, c = 0.010, 0.020, 0.030
    V = a * b * c  # box volume (elementary)
    m = 8000.0 * V
    assert f["volume"] == pytest.approx(V, rel=1e-12)
    assert f["mass"] == pytest.approx(m, rel=1e-12)
    # box about its centre: I_x = m (b^2 + c^2) / 12, ... (handbook, e.g. any mechanics text; from memory)
    np.testing.assert_allclose(f["inertia_com"], np.diag([m * (b * b + c * c) / 12, m * (a * a + c * c) / 12,
                                                          m * (a * a + b * b) / 12]), rtol=1e-10, atol=1e-18)
    np.testing.assert_allclose(f["centroid"], [0.005, -0.002, 0.007], atol=1e-15)
    np.testing.assert_allclose(f["centroid_file_units"], [5.0, -2.0, 7.0], atol=1e-12)
    np.testing.assert_allclose(f["bounding_box_file_units"]["min"], [0.0, -12.0, -8.0], atol=1e-12)
    np.testing.assert_allclose(f["bounding_box"]["max"], [0.010, 0.008, 0.022], atol=1e-15)
    assert f["watertight"] and f["winding_consistent"] and not f["per_unit_density"]
    assert f["warnings"] == []


def test_polygon_prism_matches_closed_forms(tmp_path, capsys):
    n, R, L = 12, 0.04, 0.1
    cyl = trimesh.creation.cylinder(radius=R, height=L, sections=n)
    path = tmp_path / "rod.ply"
    cyl.export(path)
    f = inspect_json(capsys, path, "--material", "brass")
    rho = 8500.0  # truepull's brass; the closed forms below are per unit density times this
    assert f["density"] == rho
    th = 2 * PI / n
    area = n / 2 * R**2 * math.sin(th)
    # the file holds float32 coordinates (about 6e-8 relative each), hence rel=1e-6 below
    # regular n-gon prism: V = (n/2) R^2 sin(2 pi/n) L (elementary)
    assert f["volume"] == pytest.approx(area * L, rel=1e-6)
    # polar moment of the n-gon about its centre: n R^4 sin(th) (2 + cos th) / 12, summing the triangles
    # (O, P1, P2) with J = A/6 (|P1|^2 + P1.P2 + |P2|^2) (elementary second moment of a triangle)
    J = n * R**4 * math.sin(th) * (2 + math.cos(th)) / 12
    izz = rho * L * J
    ixx = rho * (L * J / 2 + area * L**3 / 12)  # in-plane moments J/2 by n-fold symmetry, plus the length
    np.testing.assert_allclose(np.diag(f["inertia_com"]), [ixx, ixx, izz], rtol=1e-6)
    np.testing.assert_allclose(f["centroid"], [0, 0, 0], atol=1e-9)


def test_numbers_equal_trimesh_mass_properties(tmp_path, capsys):
    """An off-centre, turned, lumpy part: the inspector's numbers are trimesh's (general-purpose library)."""
    part = trimesh.creation.annulus(r_min=3.0, r_max=9.0, height=12.0, sections=40)
    part = trimesh.util.concatenate([part, trimesh.creation.box(extents=(4, 4, 4)).apply_translation((20, 0, 0))])
    part.apply_transform(trimesh.transformations.rotation_matrix(0.7, (1, 2, 3)))
    part.apply_translation((1.0, 2.0, 3.0))
    path = tmp_path / "lumpy.obj"
    part.export(path)
    f = inspect_json(capsys, path, "--units", "mm", "--density", "2.7 g/cm^3")
    ref = trimesh.load(path, force="mesh")
    ref.apply_scale(1e-3)
    ref.density = 2700.0
    mp = ref.mass_properties
    assert f["density"] == pytest.approx(2700.0, rel=1e-12)
    assert f["volume"] == pytest.approx(mp["volume"], rel=1e-9)
    assert f["mass"] == pytest.approx(mp["mass"], rel=1e-9)
    np.testing.assert_allclose(f["centroid"], mp["center_mass"], rtol=1e-9, atol=1e-15)
    np.testing.assert_allclose(f["inertia_com"], mp["inertia"], rtol=1e-8, atol=1e-8 * np.abs(mp["inertia"]).max())


def test_no_density_is_per_unit_density_and_says_so(tmp_path, capsys):
    path = tmp_path / "b.stl"
    trimesh.creation.box(extents=(0.125, 0.25, 0.5)).export(path)  # exact in the file's float32
    f = inspect_json(capsys, path)
    assert f["per_unit_density"] and f["density"] is None
    assert f["mass"] == pytest.approx(0.125 * 0.25 * 0.5, rel=1e-12)  # 1 kg/m^3 times the volume
    code, out, _ = run(["mesh", str(path)], capsys)
    assert code == 0 and "per unit density" in out
    assert "# density = ..." in out  # the block asks for it rather than inventing one


def test_size_suggests_wrong_units(tmp_path, capsys):
    # a 50-metre bracket is probably millimetres (rule of thumb: 0.1 mm .. 5 m; common practice)
    path = tmp_path / "bracket.stl"
    trimesh.creation.box(extents=(50.0, 20.0, 5.0)).export(path)
    f = inspect_json(capsys, path)
    assert len(f["warnings"]) == 1 and "--units mm" in f["warnings"][0]
    assert inspect_json(capsys, path, "--units", "mm")["warnings"] == []


def test_body_block_loads_into_a_scene(tmp_path, capsys):
    from truepull.geometry.scene import load_scene

    parts = tmp_path / "parts"
    parts.mkdir()
    trimesh.creation.box(extents=(10.0, 20.0, 30.0)).export(parts / "weight.stl")
    scene = tmp_path / "scene.toml"
    code, out, err = run(["mesh", str(parts / "weight.stl"), "--units", "mm", "--density", "19.3 g/cm^3",
                          "--name", "weight", "--group", "attractor", "--scene", str(scene)], capsys)
    assert code == 0, err
    block = out[out.index("[[body]]"):]
    assert 'file = "parts/weight.stl"' in block and str(tmp_path) not in block  # relative, no machine folder
    scene.write_text('[units]\nlength = "mm"\n' + block)
    body = load_scene(scene).body("weight")
    assert body.group == "attractor" and body.shape.kind == "mesh"
    assert body.mass == pytest.approx(19300.0 * 0.010 * 0.020 * 0.030, rel=1e-12)  # rho a b c


def test_inside_out_part_is_reported_and_turned(tmp_path, capsys):
    tm = trimesh.creation.box(extents=(1.0, 2.0, 3.0))
    path = tmp_path / "inv.ply"
    trimesh.Trimesh(tm.vertices, tm.faces[:, ::-1], process=False).export(path)
    f = inspect_json(capsys, path)
    assert f["inside_out"] and f["volume"] == pytest.approx(6.0, rel=1e-12)


def _open_box(path):
    tm = trimesh.creation.box(extents=(1.0, 1.0, 1.0))
    trimesh.Trimesh(tm.vertices, tm.faces[:-2], process=False).export(path)


def _miswound_box(path):
    tm = trimesh.creation.box(extents=(1.0, 1.0, 1.0))
    faces = tm.faces.copy()
    faces[0] = faces[0][::-1]
    trimesh.Trimesh(tm.vertices, faces, process=False).export(path)


@pytest.mark.parametrize("name, make, words", [
    ("missing.stl", None, "not found"),
    ("empty.stl", lambda p: p.write_bytes(b""), "empty"),
    ("words.stl", lambda p: p.write_text("this is not a mesh\n"), "mesh"),
    ("noise.ply", lambda p: p.write_bytes(bytes(range(256)) * 4), "mesh"),
    ("open.stl", _open_box, "not watertight"),
    ("miswound.ply", _miswound_box, "wound"),
    ("folder.stl", lambda p: p.mkdir(), "not a file"),
])
def test_bad_part_files_exit_2_with_one_line(tmp_path, capsys, name, make, words):
    path = tmp_path / name
    if make is not None:
        make(path)
    code, out, err = run(["mesh", str(path)], capsys)
    assert code == 2 and out == ""
    lines = err.strip().splitlines()
    assert len(lines) == 1 and words in lines[0] and "Traceback" not in err


@pytest.mark.parametrize("extra, key", [
    (["--units", "kg"], "--units"),
    (["--density", "-5"], "--density"),
    (["--density", "3 kg"], "--density"),
    (["--material", "unobtainium"], "--material"),
])
def test_bad_options_exit_2(tmp_path, capsys, extra, key):
    path = tmp_path / "b.stl"
    trimesh.creation.box(extents=(0.1, 0.1, 0.1)).export(path)
    code, out, err = run(["mesh", str(path), *extra], capsys)
    assert code == 2 and out == "" and key in err and len(err.strip().splitlines()) == 1


def test_body_block_path_is_relative_to_the_current_folder_without_scene(tmp_path, capsys, monkeypatch):
    parts = tmp_path / "parts"
    parts.mkdir()
    trimesh.creation.box(extents=(0.01, 0.02, 0.03)).export(parts / "w.stl")
    monkeypatch.chdir(tmp_path)
    code, out, err = run(["mesh", str(parts / "w.stl")], capsys)
    assert code == 0, err
    block = out[out.index("[[body]]"):]
    assert 'file = "parts/w.stl"' in block and str(tmp_path) not in block


def test_default_unit_is_stated(tmp_path, capsys):
    trimesh.creation.box(extents=(0.01, 0.02, 0.03)).export(tmp_path / "w.stl")
    code, out, err = run(["mesh", str(tmp_path / "w.stl")], capsys)
    assert code == 0 and "file units: m (the default" in out
    code, out, err = run(["mesh", str(tmp_path / "w.stl"), "--units", "mm"], capsys)
    assert "file units: mm (as given by --units)" in out
