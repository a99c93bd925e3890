"""Mesh files: units, inside-out meshes, refusals, the inspection report, and the winding-number inside test."""

import numpy as np
import pytest
import trimesh

from truepull.geometry.errors import InputError
from truepull.geometry.meshes import load_mesh, mesh_report
from truepull.geometry.shapes import Box, Cylinder, MeshShape


def write(tm, path):
    tm.export(path)
    return path


def test_box_in_mm_scaled_to_metres(tmp_path):
    p = write(trimesh.creation.box(extents=(10, 20, 30)), tmp_path / "b.stl")
    m = load_mesh(p, "mm")
    # exact box: V = a b c, I_x = m (b^2 + c^2) / 12 (handbook, from memory)
    assert m.volume() == pytest.approx(0.01 * 0.02 * 0.03, rel=1e-12)
    np.testing.assert_allclose(m.inertia_unit_density(), Box((0.01, 0.02, 0.03)).inertia_unit_density(),
                               rtol=1e-9, atol=1e-20)
    # 1 in = 25.4 mm exactly (definition)
    assert load_mesh(p, "in").volume() == pytest.approx(10 * 20 * 30 * 0.0254**3, rel=1e-12)


def test_obj_file(tmp_path):
    p = write(trimesh.creation.cylinder(radius=1.0, height=2.0, sections=16), tmp_path / "c.obj")
    # regular 16-gon prism: V = n R^2 sin(2 pi / n) / 2 * L (elementary); OBJ text keeps ~8 digits
    assert load_mesh(p, "m").volume() == pytest.approx(16 * np.sin(2 * np.pi / 16) / 2 * 2.0, rel=1e-7)


def test_inside_out_mesh_is_inverted(tmp_path):
    tm = trimesh.creation.box(extents=(1, 2, 3))
    inv = trimesh.Trimesh(tm.vertices, tm.faces[:, ::-1], process=False)
    p = tmp_path / "inv.ply"
    inv.export(p)
    m = load_mesh(p, "m")
    assert m.volume() == pytest.approx(6.0, rel=1e-12)
    assert m.contains([[0, 0, 0]])[0] and not m.contains([[0, 0, 2]])[0]
    assert mesh_report(p, "m")["inside_out"] is True


def test_open_mesh_refused(tmp_path):
    tm = trimesh.creation.box(extents=(1, 1, 1))
    open_mesh = trimesh.Trimesh(tm.vertices, tm.faces[:-1], process=False)
    p = tmp_path / "open.ply"
    open_mesh.export(p)
    with pytest.raises(InputError, match="not watertight"):
        load_mesh(p, "m", file="s.toml", key="body[x].file")
    rep = mesh_report(p, "m")
    assert rep["watertight"] is False and rep["volume"] is None and rep["notes"]


def test_inconsistent_winding_refused(tmp_path):
    tm = trimesh.creation.box(extents=(1, 1, 1))
    faces = tm.faces.copy()
    faces[0] = faces[0, ::-1]
    p = tmp_path / "flip.ply"
    trimesh.Trimesh(tm.vertices, faces, process=False).export(p)
    with pytest.raises(InputError, match="consistently wound"):
        load_mesh(p, "m")


@pytest.mark.parametrize("content,name", [(b"", "empty.stl"), (b"hello, not a mesh\n" * 3, "junk.stl"),
                                          (b"1 2 3\n", "points.xyz")])
def test_not_a_mesh_refused(tmp_path, content, name):
    p = tmp_path / name
    p.write_bytes(content)
    with pytest.raises(InputError) as exc:
        load_mesh(p, "m", file="s.toml", key="body[x].file")
    assert exc.value.key == "body[x].file" and exc.value.file == "s.toml"


def test_missing_file_and_bad_units(tmp_path):
    with pytest.raises(InputError, match="not found"):
        load_mesh(tmp_path / "none.stl", "m")
    p = write(trimesh.creation.box(extents=(1, 1, 1)), tmp_path / "b.stl")
    with pytest.raises(InputError, match="not a length unit"):
        load_mesh(p, "kg")
    with pytest.raises(InputError):
        mesh_report(tmp_path / "none.stl")


def test_mesh_report_of_a_closed_mesh(tmp_path):
    p = write(trimesh.creation.box(extents=(10, 20, 30)), tmp_path / "b.stl")
    rep = mesh_report(p, "mm")
    assert rep["watertight"] and rep["winding_consistent"] and rep["faces"] == 12
    np.testing.assert_allclose(rep["extent"], [0.01, 0.02, 0.03], rtol=1e-12)
    assert rep["volume"] == pytest.approx(6e-6, rel=1e-12)


def test_winding_number_inside_test_matches_primitive():
    # a box mesh is the box: inside tests agree away from the surface
    rng = np.random.default_rng(3)
    tm = trimesh.creation.box(extents=(0.3, 0.2, 0.1))
    mesh = MeshShape(tm.vertices, tm.faces)
    pts = rng.uniform(-0.2, 0.2, size=(5000, 3))
    near_surface = np.min(np.abs(np.abs(pts) - [0.15, 0.1, 0.05]), axis=1) < 1e-9
    same = mesh.contains(pts) == Box((0.3, 0.2, 0.1)).contains(pts)
    assert np.all(same | near_surface)
    # a polygon-prism mesh agrees with a cylinder inscribed in it, away from the facets
    cyl = trimesh.creation.cylinder(radius=0.1, height=0.2, sections=64)
    mc = MeshShape(cyl.vertices, cyl.faces)
    r_in = 0.1 * np.cos(np.pi / 64)
    inner = Cylinder(r_in * 0.999, 0.199)
    outer = Cylinder(0.1 * 1.001, 0.201)
    inside = mc.contains(pts)
    assert np.all(inside[inner.contains(pts)]) and not np.any(inside[~outer.contains(pts)])


def _cube(side=1.0, at=(0.0, 0.0, 0.0)):
    tm = trimesh.creation.box(extents=(side, side, side))
    tm.apply_translation(at)
    return tm


def test_overlapping_shells_refused(tmp_path):
    p = write(trimesh.util.concatenate([_cube(), _cube(at=(0.5, 0, 0))]), tmp_path / "two.stl")
    with pytest.raises(InputError, match="overlap") as info:
        load_mesh(p, "m", file="s.toml", key="body[x].file")
    assert info.value.file == "s.toml" and info.value.key == "body[x].file"
    with pytest.raises(InputError, match="overlap"):  # `truepull mesh` says so too, not a doubled volume
        mesh_report(p, "m")
    crossed = trimesh.util.concatenate([trimesh.creation.box(extents=(5, 1, 1)), trimesh.creation.box(extents=(1, 5, 1))])
    with pytest.raises(InputError, match="overlap"):
        load_mesh(write(crossed, tmp_path / "cross.stl"), "m")


def test_disjoint_shells_and_a_cavity_are_one_body(tmp_path):
    # volumes of cubes (elementary): two disjoint unit cubes 2; a unit cube with a 0.5 cube cavity 0.875
    p = write(trimesh.util.concatenate([_cube(), _cube(at=(3, 0, 0))]), tmp_path / "apart.stl")
    assert load_mesh(p, "m").volume() == pytest.approx(2.0, rel=1e-12)
    cavity = _cube(0.5)
    cavity.invert()
    p = write(trimesh.util.concatenate([_cube(), cavity]), tmp_path / "hollow.stl")
    assert load_mesh(p, "m").volume() == pytest.approx(0.875, rel=1e-12)
    stray = _cube(at=(3, 0, 0))
    stray.invert()
    p = write(trimesh.util.concatenate([trimesh.creation.box(extents=(2, 2, 2)), stray]), tmp_path / "stray.stl")
    with pytest.raises(InputError, match="inside-out"):
        load_mesh(p, "m")


def test_closed_part_far_from_its_origin_stays_closed(tmp_path, recwarn):
    # OBJ keeps the coordinates in decimal text; at 1e11 trimesh's own absolute merge would overflow
    p = write(_cube(at=(1e11, 0, 0)), tmp_path / "far.obj")
    m = load_mesh(p, "m")
    assert m.volume() == pytest.approx(1.0, rel=1e-4)  # 1e11 +- 0.5 keeps ~5 digits of the edge
    assert not [w for w in recwarn if issubclass(w.category, RuntimeWarning)]
    with pytest.raises(InputError, match="beyond the accepted"):
        load_mesh(write(_cube(at=(1e13, 0, 0)), tmp_path / "farther.obj"), "m")
    # a single-precision STL this far out has really lost its shape: refused, saying why
    with pytest.raises(InputError, match="collapse"):
        load_mesh(write(_cube(at=(1e9, 0, 0)), tmp_path / "far.stl"), "m")
