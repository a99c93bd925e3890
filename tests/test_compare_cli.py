"""`truepull compare`'s text table: what it shows where a total cancels."""

from truepull.cli.main import main

SYMMETRIC = """
[units]
length = "mm"
[[body]]
name = "east"
group = "pendulum"
shape = "sphere"
radius = 5
density = 11340
at = [43.30127018922193, 25, 0]
[[body]]
name = "west"
group = "pendulum"
shape = "sphere"
radius = 5
density = 11340
at = [-43.30127018922193, -25, 0]
[[body]]
name = "north"
group = "attractor"
shape = "sphere"
radius = 20
density = 11340
at = [-50, 86.60254037844386, 0]
[[body]]
name = "south"
group = "attractor"
shape = "sphere"
radius = 20
density = 11340
at = [50, -86.60254037844386, 0]
"""


def test_shares_of_a_total_that_cancels_are_not_numbers(tmp_path, capsys):
    # reference: symmetry. The scene is a mirror-symmetric layout turned by 30 deg about z (its
    # coordinates rounded to doubles, so the computed total is rounding noise, not exactly zero); the
    # mirror maps it onto itself and reverses the axial torque, so the total is zero; each pair's torque is not (Newton: spheres pull as points), and
    # a "share" of a zero total must be shown as '-', not as a huge percentage.
    path = tmp_path / "symmetric.toml"
    path.write_text(SYMMETRIC)
    assert main(["compare", str(path)]) == 0
    out = capsys.readouterr().out
    pair_rows = [line for line in out.splitlines() if line.startswith(("east ", "west "))]
    assert len(pair_rows) == 4
    for line in pair_rows:
        cells = line.split()
        assert abs(float(cells[2])) > 1e-15        # each pair's axial torque is far from zero (N m)
        assert cells[4] == "-"                     # its share of the cancelling total
        assert "%" not in line
