"""Scene loading: units, defaults, positions, measurement, and every kind of bad input refused."""

import math

import numpy as np
import pytest
import trimesh

from truepull.geometry.errors import InputError
from truepull.geometry.scene import load_scene, load_scene_text

GOOD = """
[scene]
title = "two bobs"

[units]
length = "mm"
angle = "deg"

[frame]
pivot = [0, 0, 0]
axis = [0, 0, 1]

[[body]]
name = "bob-east"
group = "pendulum"
shape = "sphere"
radius = "10 +- 0.01"
material = "tungsten"
at = [50, 0, 0]

[[body]]
name = "bob-west"
group = "pendulum"
shape = "sphere"
radius = 10
density = "19.25 g/cm^3"
at = [-50, 0, 0]

[[body]]
name = "big-east"
group = "attractor"
shape = "cylinder"
radius = 40
length = 80
mass = "5.0 +- 0.001 kg"
at = [0, 120, 0]
axis = [1, 0, 0]

[[position]]
name = "A"
group = "attractor"
turn = 0

[[position]]
name = "B"
group = "attractor"
turn = 90
shift = [0, 0, 1]

[measurement]
method = "deflection"
angle = { A = "0.0123 rad", B = "-0.0121 rad" }
period = "412.3 +- 0.2 s"
decrement = 0.05
"""


def load(text, tmp_path=None):
    return load_scene_text(text, "scene.toml", str(tmp_path) if tmp_path else None)


def test_good_scene_units_and_values():
    s = load(GOOD)
    assert s.title == "two bobs" and s.length_unit == "mm" and s.length_factor == pytest.approx(1e-3)
    east = s.body("bob-east")
    assert east.shape.radius == pytest.approx(0.010) and east.spec.size["radius"].u == pytest.approx(1e-5)
    np.testing.assert_allclose(east.com, [0.05, 0, 0])
    # 1 g/cm^3 = 1000 kg/m^3 (definition of the units)
    assert s.body("bob-west").density == pytest.approx(19250.0)
    assert s.body("big-east").mass == pytest.approx(5.0)
    assert s.groups() == ("pendulum", "attractor")
    assert [b.name for b in s.group("pendulum")] == ["bob-east", "bob-west"]
    # default G is CODATA 2018 (6.67430(15)e-11, from memory)
    assert s.G.value == pytest.approx(6.67430e-11, rel=1e-12) and s.G.u == pytest.approx(1.5e-15)
    m = s.measurement
    assert m.method == "deflection" and m.angle["B"].value == pytest.approx(-0.0121)
    assert m.period.value == 412.3 and m.period.u == 0.2 and m.decrement.value == 0.05
    b = s.positions[1]
    assert b.turn.value == pytest.approx(math.pi / 2) and b.shift[2].value == pytest.approx(1e-3)


def test_inch_is_exactly_25_4_mm():
    # 1 in = 25.4 mm exactly, by definition (international inch, 1959)
    text = GOOD.replace('length = "mm"', 'length = "in"')
    s = load(text)
    assert s.body("bob-west").shape.radius == pytest.approx(10 * 0.0254, rel=1e-15)
    s2 = load(GOOD.replace('radius = 10\n', 'radius = "1 in"\n'))
    assert s2.body("bob-west").shape.radius == pytest.approx(0.0254, rel=1e-15)


def test_at_position_turns_and_shifts_the_group():
    s = load(GOOD)
    b = s.at_position("B")
    # a right-handed quarter turn about +z takes (0, 120, 0) mm to (-120, 0, 0) mm, then the shift
    np.testing.assert_allclose(b.body("big-east").com, [-0.120, 0, 0.001], atol=1e-15)
    # the attractor's axis (x) turned to y
    np.testing.assert_allclose(b.body("big-east").placement.apply_vector([0, 0, 1]), [0, 1, 0], atol=1e-15)
    np.testing.assert_allclose(b.body("bob-east").com, s.body("bob-east").com)
    assert b.position == "B" and s.at_position(None) is s
    with pytest.raises(InputError):
        s.at_position("nowhere")


def test_with_body():
    s = load(GOOD)
    new = s.body("bob-west").with_density(1000.0)
    s2 = s.with_body("bob-west", new)
    assert s2.body("bob-west").density == 1000.0 and s.body("bob-west").density != 1000.0


def test_defaults_and_other_shapes():
    s = load("""
[[body]]
name = "c"
group = "attractor"
shape = "cone"
radius = 0.1
length = 0.2
density = 1000
[[body]]
name = "e"
group = "attractor"
shape = "ellipsoid"
radii = [0.1, 0.2, 0.3]
density = 1000
at = [1, 0, 0]
[[body]]
name = "bx"
group = "attractor"
shape = "box"
size = ["10 cm", "20 cm", "30 cm"]
density = 1000
at = [3, 0, 0]
rotate = { axis = [0, 0, 1], angle = "90 deg" }
[[body]]
name = "p"
group = "pendulum"
shape = "point"
mass = 2
at = [0, 0, 5]
[[body]]
name = "sh"
group = "pendulum"
shape = "shell"
radius = 0.1
inner_radius = 0.05
material = "aluminum"
at = [0, 0, 7]
""")
    assert s.angle_unit == "deg" and s.length_unit == "m"
    np.testing.assert_allclose(s.frame.axis, [0, 0, 1])
    assert s.body("bx").spec.size["size.y"].value == pytest.approx(0.2)
    assert s.body("e").spec.size["radii.c"].value == pytest.approx(0.3)
    assert s.body("c").shape.radius_top == 0.0
    assert s.body("p").mass == 2 and s.body("sh").density == 2700.0
    np.testing.assert_allclose(s.body("bx").placement.apply_vector([1, 0, 0]), [0, 1, 0], atol=1e-15)
    assert s.positions == () and s.measurement is None


def test_mesh_body_relative_to_scene_file(tmp_path):
    tm = trimesh.creation.box(extents=(10, 20, 30))  # in mm
    (tmp_path / "parts").mkdir()
    tm.export(tmp_path / "parts" / "block.stl")
    text = """
[units]
length = "cm"
[[body]]
name = "m"
group = "attractor"
shape = "mesh"
file = "parts/block.stl"
file_units = "mm"
density = 1000
at = [1, 0, 0]
"""
    path = tmp_path / "s.toml"
    path.write_text(text)
    s = load_scene(path)
    b = s.body("m")
    assert b.volume == pytest.approx(0.01 * 0.02 * 0.03, rel=1e-12)
    np.testing.assert_allclose(b.com, [0.01, 0, 0], atol=1e-15)
    # without file_units the scene's length unit (cm) applies
    path.write_text(text.replace('file_units = "mm"\n', ""))
    assert load_scene(path).body("m").volume == pytest.approx(0.1 * 0.2 * 0.3, rel=1e-12)


def test_swing_measurement_and_extras():
    text = GOOD.split("[measurement]")[0] + """
[measurement]
method = "swing"
period = { A = "400 +- 0.1 s", B = "410 s" }
fiber_q = 3000
amplitude = "2 deg"
"""
    m = load(text).measurement
    assert m.method == "swing" and m.period["B"].value == 410.0
    assert m.extra["fiber_q"].value == 3000 and m.extra["amplitude"].value == pytest.approx(math.radians(2))


# every bad input -> InputError naming the key ------------------------------------------------------

def body_block(extra, shape='shape = "sphere"\nradius = 10', matter='density = 1000'):
    return GOOD + f'\n[[body]]\nname = "x"\ngroup = "attractor"\n{shape}\n{matter}\nat = [0, 300, 0]\n{extra}\n'


BAD = {
    "unknown top section": (GOOD + "\n[extras]\na = 1\n", "extras"),
    "unknown key in scene": (GOOD.replace('title = "two bobs"', 'title = "x"\ntitel = "y"'), "scene.titel"),
    "unknown body key (typo)": (body_block("radus = 3"), "body[x].radus"),
    "key of another shape": (body_block("length = 3"), "body[x].length"),
    "unknown frame key": (GOOD.replace("pivot = [0, 0, 0]", "pivot = [0, 0, 0]\npivit = 1"), "frame.pivit"),
    "unknown units key": (GOOD.replace('angle = "deg"', 'angle = "deg"\nforce = "N"'), "units.force"),
    "bad length unit": (GOOD.replace('length = "mm"', 'length = "furlongz"'), "units.length"),
    "length unit is a mass": (GOOD.replace('length = "mm"', 'length = "kg"'), "units.length"),
    "bad unit in a value": (GOOD.replace('radius = 10\n', 'radius = "10 parsecz"\n'), "body[bob-west].radius"),
    "wrong dimension in a value": (GOOD.replace('radius = 10\n', 'radius = "10 kg"\n'), "body[bob-west].radius"),
    "missing size key": (body_block("", shape='shape = "cylinder"\nradius = 3'), "body[x].length"),
    "zero radius": (body_block("", shape='shape = "sphere"\nradius = 0'), "body[x].radius"),
    "negative length": (body_block("", shape='shape = "cylinder"\nradius = 3\nlength = -1'), "body[x].length"),
    "inverted shell": (body_block("", shape='shape = "shell"\nradius = 3\ninner_radius = 3'),
                       "body[x].inner_radius"),
    "inverted tube": (body_block("", shape='shape = "cylinder"\nradius = 3\nlength = 2\ninner_radius = 4'),
                      "body[x].inner_radius"),
    "negative radius_top": (body_block("", shape='shape = "cone"\nradius = 3\nlength = 2\nradius_top = -1'),
                            "body[x].radius_top"),
    "zero box edge": (body_block("", shape='shape = "box"\nsize = [1, 0, 1]'), "body[x].size"),
    "box size too short": (body_block("", shape='shape = "box"\nsize = [1, 1]'), "body[x].size"),
    "ellipsoid radii negative": (body_block("", shape='shape = "ellipsoid"\nradii = [1, 1, -1]'),
                                 "body[x].radii"),
    "nan": (body_block("", shape='shape = "sphere"\nradius = nan'), "body[x].radius"),
    "inf": (body_block("", shape='shape = "sphere"\nradius = inf'), "body[x].radius"),
    "inf in a string": (body_block("", matter='density = "inf kg/m^3"'), "body[x].density"),
    "zero axis": (body_block('axis = [0, 0, 0]', shape='shape = "cylinder"\nradius = 3\nlength = 2'),
                  "body[x].axis"),
    "axis wrong length": (body_block('axis = [0, 1]', shape='shape = "cylinder"\nradius = 3\nlength = 2'),
                          "body[x].axis"),
    "at wrong length": (GOOD.replace("at = [50, 0, 0]", "at = [50, 0]"), "body[bob-east].at"),
    "at not a list": (GOOD.replace("at = [50, 0, 0]", "at = 50"), "body[bob-east].at"),
    "rotate without angle": (body_block("rotate = { axis = [0, 0, 1] }"), "body[x].rotate.angle"),
    "rotate zero axis": (body_block("rotate = { axis = [0, 0, 0], angle = 3 }"), "body[x].rotate.axis"),
    "rotate unknown key": (body_block("rotate = { axis = [0, 0, 1], angle = 3, about = 1 }"),
                           "body[x].rotate.about"),
    "duplicate body name": (GOOD.replace('name = "bob-west"', 'name = "bob-east"'), "body[bob-east].name"),
    "density and material": (body_block("", matter='density = 1000\nmaterial = "lead"'), "body[x].material"),
    "density and mass": (body_block("", matter='density = 1000\nmass = 3'), "body[x].mass"),
    "none of density material mass": (body_block("", matter=""), "body[x].density"),
    "unknown material": (body_block("", matter='material = "unobtainium"'), "body[x].material"),
    "negative mass": (body_block("", matter='mass = -1'), "body[x].mass"),
    "zero density": (body_block("", matter='density = 0'), "body[x].density"),
    "point with density": (body_block("", shape='shape = "point"', matter='density = 100'), "body[x].density"),
    "unknown shape": (body_block("", shape='shape = "torus"'), "body[x].shape"),
    "no shape": (body_block("", shape=''), "body[x].shape"),
    "no group": (GOOD.replace('group = "pendulum"\nshape = "sphere"\nradius = "10', 'shape = "sphere"\nradius = "10'),
                 "body[bob-east].group"),
    "subtract not bool": (body_block('subtract = "yes"'), "body[x].subtract"),
    "missing mesh file": (body_block("", shape='shape = "mesh"\nfile = "nope.stl"'), "body[x].file"),
    "mesh bad file_units": (body_block("", shape='shape = "mesh"\nfile = "nope.stl"\nfile_units = "kg"'),
                            "body[x].file_units"),
    "no bodies": ("[scene]\ntitle = 'x'\n", "body"),
    "body as a table": ("[body]\nname = 'x'\n", "body"),
    "position unknown group": (GOOD.replace('name = "A"\ngroup = "attractor"', 'name = "A"\ngroup = "atractor"'),
                               "position[A].group"),
    "position duplicated": (GOOD.replace('name = "B"', 'name = "A"'), "position[A].name"),
    "position unknown key": (GOOD.replace("turn = 90", "turn = 90\nspin = 3"), "position[B].spin"),
    "measurement method unknown": (GOOD.replace('method = "deflection"', 'method = "guess"'),
                                   "measurement.method"),
    "measurement angle not a position": (GOOD.replace("B = \"-0.0121 rad\"", "C = \"-0.0121 rad\""),
                                         "measurement.angle.C"),
    "deflection period a table": (GOOD.replace('period = "412.3 +- 0.2 s"', "period = { A = 400, B = 410 }"),
                                  "measurement.period"),
    "swing period a scalar": (GOOD.replace('method = "deflection"', 'method = "swing"'), "measurement.period"),
    "period not a time": (GOOD.replace('period = "412.3 +- 0.2 s"', 'period = "412 m"'), "measurement.period"),
    "negative period": (GOOD.replace('period = "412.3 +- 0.2 s"', 'period = -4'), "measurement.period"),
    "measurement unknown key": (GOOD.replace("decrement = 0.05", "decrement = 0.05\nnoise = 1"),
                                "measurement.noise"),
    "negative uncertainty": (GOOD.replace('"10 +- 0.01"', '"10 +- -0.01"'), "body[bob-east].radius"),
    "G negative": (GOOD.replace('title = "two bobs"', 'title = "x"\nG = -1'), "scene.G"),
    "G wrong unit": (GOOD.replace('title = "two bobs"', 'title = "x"\nG = "6.67e-11 m"'), "scene.G"),
    "frame zero axis": (GOOD.replace("axis = [0, 0, 1]", "axis = [0, 0, 0]"), "frame.axis"),
    "frame axis with an uncertainty": (GOOD.replace("axis = [0, 0, 1]", 'axis = ["0 +- 0.01", 0, 1]'), "frame.axis"),
    "body axis with an uncertainty": (body_block('axis = [0, "0 +- 0.1", 1]', shape='shape = "cylinder"\nradius = 3\nlength = 2'),
                                      "body[x].axis"),
    "not toml": ("this is = = not toml", None),
    "name not a string": (GOOD.replace('name = "bob-west"', "name = 3"), "body[#2].name"),
    "true as a number": (GOOD.replace("radius = 10\n", "radius = true\n"), "body[bob-west].radius"),
    # values beyond the finite ranges of quantities.LIMITS, and nonsense units, at load with file and key
    "radius overflows in SI": (GOOD.replace("radius = 10\n", 'radius = "1e308 km"\n'), "body[bob-west].radius"),
    "radius too large": (GOOD.replace("radius = 10\n", "radius = 1e120\n"), "body[bob-west].radius"),
    "radius subnormal with a mass": (GOOD.replace("radius = 40", "radius = 1e-308"), "body[big-east].radius"),
    "integer too large for a float": (GOOD.replace("radius = 10\n", f"radius = {10**400}\n"),
                                      "body[bob-west].radius"),
    "subnormal box edge": (body_block("", shape='shape = "box"\nsize = [1e-320, 1, 1]'), "body[x].size[0]"),
    "huge box edge": (body_block("", shape='shape = "box"\nsize = [1e200, 1, 1]'), "body[x].size[0]"),
    "subnormal density": (body_block("", matter="density = 1e-320"), "body[x].density"),
    "rotate angle too large": (body_block("rotate = { axis = [0, 0, 1], angle = 1e300 }"), "body[x].rotate.angle"),
    "rotate angle in mm/m": (body_block('rotate = { axis = [0, 0, 1], angle = "3 mm/m" }'), "body[x].rotate.angle"),
    "rotate angle in deg**2": (body_block('rotate = { axis = [0, 0, 1], angle = "90 deg deg" }'),
                               "body[x].rotate.angle"),
    "turn too large": (GOOD.replace("turn = 90", "turn = 1e308"), "position[B].turn"),
    "misplaced +-": (GOOD.replace("radius = 10\n", 'radius = "10 +- mm"\n'), "body[bob-west].radius"),
    "direction with a unit": (GOOD.replace("axis = [0, 0, 1]", 'axis = ["1 deg deg", 0, 1]'), "frame.axis"),
    "direction with pi": (GOOD.replace("axis = [0, 0, 1]", 'axis = ["1 pi", 0, 1]'), "frame.axis"),
    "decrement too large": (GOOD.replace("decrement = 0.05", "decrement = 1e300"), "measurement.decrement"),
    "decrement beyond 10": (GOOD.replace("decrement = 0.05", "decrement = 11"), "measurement.decrement"),
    "nested 1000 deep": ("a = " + "[" * 1000 + "]" * 1000 + "\n", None),
}


@pytest.mark.parametrize("case", list(BAD), ids=list(BAD))
def test_bad_input_refused_naming_the_key(case, tmp_path):
    text, key = BAD[case]
    with pytest.raises(InputError) as exc:
        load(text, tmp_path)
    err = exc.value
    assert err.file == "scene.toml"
    if key is not None:
        assert err.key == key, err.one_line()
    assert err.reason and "\n" not in err.one_line()


def test_missing_scene_file(tmp_path):
    with pytest.raises(InputError) as exc:
        load_scene(tmp_path / "none.toml")
    assert "not found" in exc.value.reason


def test_subtract_with_negative_density_is_a_hole():
    s = load(body_block("subtract = true", matter="density = -1000"))
    assert s.body("x").density == -1000.0 and s.body("x").is_hole


def test_extreme_directions_read_as_the_directions_they_name():
    s = load(GOOD.replace("axis = [0, 0, 1]", "axis = [1e-320, 0, 0]"))
    np.testing.assert_array_equal(s.frame.axis, [1.0, 0.0, 0.0])
    s = load(GOOD.replace("axis = [0, 0, 1]", "axis = [1e308, 1e308, 0]"))
    np.testing.assert_allclose(s.frame.axis, [math.sqrt(0.5), math.sqrt(0.5), 0.0], rtol=1e-15)


def test_concise_uncertainty_in_a_scene():
    s = load(GOOD.replace('radius = "10 +- 0.01"', 'radius = "10.000(10)"'))
    east = s.body("bob-east")
    assert east.shape.radius == pytest.approx(0.010) and east.spec.size["radius"].u == pytest.approx(1e-5)


def test_default_G_is_scipys_codata_value():
    # scipy.constants (CODATA 2018 and 2022 agree on G: 6.67430(15)e-11) is the reference
    from scipy.constants import physical_constants

    from truepull.geometry.scene import CODATA_2018_G

    value, _unit, u = physical_constants["Newtonian constant of gravitation"]
    assert CODATA_2018_G == (value, u)


def test_loading_leaves_the_garbage_collector_as_it_was():
    import gc

    assert gc.isenabled()
    load_scene_text(GOOD, "good.toml")
    assert gc.isenabled()
    with pytest.raises(InputError):
        load_scene_text("[[body]]\nname = 3\n", "bad.toml")
    assert gc.isenabled()
    gc.disable()
    try:
        load_scene_text(GOOD, "good.toml")
        assert not gc.isenabled()
    finally:
        gc.enable()
