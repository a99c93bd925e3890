"""One interface: the shared options read the same in every verb, take units, and draw progress only
on a terminal."""

import argparse
import io
import math

import pytest

from truepull.cli import options
from truepull.cli.main import VERBS, build_parser
from truepull.cli.output import guarded_ratio
from truepull.geometry.errors import InputError
from truepull.geometry.scene import load_scene_text

SCENE_MM = """
[units]
length = "mm"
[[body]]
name = "bob"
group = "pendulum"
shape = "sphere"
radius = 5
density = 11340
at = [40, 0, 0]
[[body]]
name = "ball"
group = "attractor"
shape = "sphere"
radius = 20
density = 11340
at = [40, 100, 0]
"""


def _actions() -> dict:
    """verb -> {option string: argparse action}."""
    parser = build_parser(list(VERBS))
    sub = next(a for a in parser._actions if isinstance(a, argparse._SubParsersAction))
    return {verb: {s: a for a in p._actions for s in a.option_strings} for verb, p in sub.choices.items()}


@pytest.mark.parametrize("flag", ["--test", "--source", "--position", "--group", "--rtol", "--workers",
                                  "--scheduler", "--quiet", "--json"])
def test_a_shared_option_has_one_metavar_and_one_default_style(flag):
    found = {verb: acts[flag] for verb, acts in _actions().items() if flag in acts}
    assert found, flag
    assert len({a.metavar for a in found.values()}) == 1, {v: a.metavar for v, a in found.items()}
    for verb, a in found.items():
        if a.default not in (None, False):
            # defaults are written one way: "(default: X)" with X the default itself
            assert f"(default: {a.default:g})" in a.help if isinstance(a.default, float) else \
                f"(default: {a.default})" in a.help, (verb, a.help)
        assert "(default " not in a.help, (verb, a.help)


def test_the_group_options_say_the_same_in_every_verb():
    acts = _actions()
    tests = {acts[v]["--test"].help for v in acts if "--test" in acts[v]}
    assert tests == {"group that feels the pull (default: pendulum)"}


def test_work_that_is_spread_takes_workers_scheduler_and_quiet():
    acts = _actions()
    for verb in ("scan", "bias", "reduce", "report"):
        assert {"--workers", "--scheduler", "--quiet"} <= set(acts[verb]), verb


def test_turn_help_says_degrees_and_stop_included():
    acts = _actions()
    for verb in ("scan", "report"):
        h = acts[verb]["--turn"].help
        assert "degrees" in h and "STOP included" in h, verb


def test_lengths_take_units_and_plain_numbers_stay_in_scene_units():
    scene = load_scene_text(SCENE_MM, "s.toml")
    # 1 mm = 1e-3 m and 1 in = 25.4 mm exactly (SI Brochure, 9th ed., 2019; international inch, 1959)
    assert options.length("0.1", scene, "--void") == pytest.approx(1e-4, rel=1e-15)
    assert options.length("0.1 cm", scene, "--void") == pytest.approx(1e-3, rel=1e-15)
    assert options.length_vector("1,0,2 in", scene, "--offset") == pytest.approx([0.0254, 0, 0.0508], rel=1e-15)
    assert options.length_vector("1 mm, 1 cm, 0", scene, "--offset") == pytest.approx([1e-3, 1e-2, 0], rel=1e-15)
    with pytest.raises(InputError, match="--offset"):
        options.length_vector("1,2 mm", scene, "--offset")
    with pytest.raises(InputError, match="uncertainty"):
        options.length("1 +- 0.1 mm", scene, "--void")


def test_sweep_ranges_take_units_and_include_stop():
    si, shown = options.sweep_range("0:90:45", "angle", "deg", "--turn")
    assert shown == (0.0, 45.0, 90.0) and si[2] == pytest.approx(math.pi / 2, rel=1e-15)
    # 1 rad = 180/pi degrees (definition of the radian)
    si, shown = options.sweep_range("0:1:0.5 rad", "angle", "deg", "--turn")
    assert si == pytest.approx((0, 0.5, 1.0)) and shown[2] == pytest.approx(180 / math.pi, rel=1e-15)
    si, shown = options.sweep_range("0:2:1 mm", "length", "cm", "--shift")
    assert si == pytest.approx((0, 1e-3, 2e-3), abs=1e-18) and shown == si


def test_bias_offsets_with_units_equal_the_same_offset_in_scene_units():
    from truepull.cli.bias import parse_what_ifs

    scene = load_scene_text(SCENE_MM, "s.toml")
    ns = argparse.Namespace(offset=["bob:0.1,0,0", "bob:100,0,0 um"], flatten=[], void=["bob:1 mm:0.5,0,0"], gradient=[])
    items = parse_what_ifs(scene, ns)
    assert items[0][2][0] == pytest.approx(items[1][2][0], rel=1e-15)
    assert items[2][2] == (pytest.approx(1e-3), pytest.approx([5e-4, 0, 0]))


class _Stream(io.StringIO):
    def __init__(self, tty):
        super().__init__()
        self._tty = tty

    def isatty(self):
        return self._tty


def test_progress_only_on_a_terminal_and_never_with_quiet():
    loud, quiet = argparse.Namespace(quiet=False), argparse.Namespace(quiet=True)
    assert options.show_progress(loud, _Stream(True))
    assert not options.show_progress(loud, _Stream(False))
    assert not options.show_progress(quiet, _Stream(True))
    assert not options.show_progress(argparse.Namespace(no_progress=True), _Stream(True))


def test_a_ratio_of_two_values_within_their_error_of_zero_is_not_a_number():
    assert guarded_ratio(1e-25, 1e-25 / 10.03125, 1e-21) is None
    assert guarded_ratio(2.0, 0.0, 1e-9) is None
    assert guarded_ratio(3.0, 2.0, 1e-9) == 1.5
    # one of the two clear of zero: the ratio is shown (it says the point model is off)
    assert guarded_ratio(1e-18, 1e-25, 1e-21) == pytest.approx(1e7)


def test_compare_shows_a_dash_for_a_force_that_vanishes_by_symmetry(tmp_path, capsys):
    from truepull.cli.main import main

    path = tmp_path / "s.toml"
    path.write_text(SCENE_MM)
    assert main(["compare", str(path)]) == 0
    out = capsys.readouterr().out
    fz = next(line for line in out.splitlines() if line.startswith("force z (N)"))
    assert fz.split()[-2] == "-"    # all centres at z = 0: F_z is zero on both sides


def test_check_shows_each_stated_uncertainty(tmp_path, capsys):
    from truepull.cli.main import main

    path = tmp_path / "s.toml"
    path.write_text(SCENE_MM.replace("radius = 5", 'radius = "5 +- 0.002"'))
    assert main(["check", str(path)]) == 0
    out = capsys.readouterr().out
    line = next(line for line in out.splitlines() if line.startswith("body[bob].radius"))
    assert "5 +- 0.002" in line and line.endswith("mm")


def test_field_line_ends_take_units():
    from truepull.cli.field import parse_line

    scene = load_scene_text(SCENE_MM, "s.toml")
    # 1 cm = 10 mm (SI prefixes, SI Brochure 9th ed., table 7)
    a, b, n = parse_line("0,0,-5 cm:0,0,5 cm:11", scene)
    a2, b2, n2 = parse_line("0,0,-50:0,0,50:11", scene)
    assert a == pytest.approx(a2, rel=1e-15) and b == pytest.approx(b2, rel=1e-15) and n == n2 == 11
