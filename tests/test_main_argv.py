"""The command line's argv pre-pass: a range starting with a minus sign after an option."""

from truepull.cli.main import join_range_values


def test_negative_range_joins_its_option():
    assert join_range_values(["scan", "s.toml", "--turn", "-10:10:1"]) == ["scan", "s.toml", "--turn=-10:10:1"]
    assert join_range_values(["scan", "--shift", "x:-5:5:1"]) == ["scan", "--shift", "x:-5:5:1"]
    assert join_range_values(["report", "--turn", "-1.5e1:10:2.5"]) == ["report", "--turn=-1.5e1:10:2.5"]


def test_other_arguments_untouched():
    for argv in (["scan", "--turn=-10:10:1"], ["compare", "--rtol", "1e-6"], ["check", "--json", "-"],
                 ["scan", "--json", "--turn", "0:10:1"], ["check", "--", "-1:2"]):
        assert join_range_values(argv) == argv
