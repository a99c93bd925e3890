"""Scene texts shared by tests: each made to show one likely mistake (or none)."""

# a copper cylinder whose density is written in kg/m^3 in a scene that counts densities in g/cm^3
DENSITY_IN_WRONG_UNIT = """
[units]
length = "mm"
density = "g/cm^3"
[[body]]
name = "bob"
group = "pendulum"
shape = "sphere"
radius = 10
density = 19.3
at = [50, 0, 0]
[[body]]
name = "copper"
group = "attractor"
shape = "cylinder"
radius = 50
length = 100
density = 8960
at = [0, 150, 0]
"""

# a 20 mm x 10 mm cylinder (volume 6.283e-6 m^3) whose mass of 50 g is written as 50 kg
MASS_IN_WRONG_UNIT = """
[units]
length = "mm"
[[body]]
name = "bob"
group = "pendulum"
shape = "cylinder"
radius = 10
length = 20
mass = 50
at = [50, 0, 0]
[[body]]
name = "ball"
group = "attractor"
shape = "sphere"
radius = 20
material = "tungsten"
at = [0, 150, 0]
"""

# path swept by an attractor ball that crosses a pendulum bob between positions A and B.
# Bob radius 10 mm at (100, 0, 0); attractor ball radius 15 mm drawn at (0, 100, 0), i.e. at 90 deg
# about z; turned by -60 deg (A) it sits at 30 deg, by -120 deg (B) at -30 deg, by +90 deg (C) at 180 deg.
# Both at 100 mm from the axis, so they meet when the chord 2 * 100 * sin(|phi| / 2) < 25 mm (phi the
# angle between them): at attractor angles |phi| < 14.36 deg, turns between -104.36 and -75.64 deg.
# A and B each leave a chord of 51.8 mm (clear); B -> C the shorter way (-150 deg) goes round
# through -90 deg and meets nothing.
PATH_THROUGH_BOB = """
[units]
length = "mm"
[[body]]
name = "bob"
group = "pendulum"
shape = "sphere"
radius = 10
material = "tungsten"
at = [100, 0, 0]
[[body]]
name = "ball"
group = "attractor"
shape = "sphere"
radius = 15
material = "tungsten"
at = [0, 100, 0]
[[position]]
name = "A"
group = "attractor"
turn = -60
[[position]]
name = "B"
group = "attractor"
turn = -120
[[position]]
name = "C"
group = "attractor"
turn = 90
"""


def mesh_scene(stl_name: str, file_units: str) -> str:
    """A pendulum of two 20 mm balls and an attractor mesh read from `stl_name` in `file_units`."""
    return f"""
[units]
length = "mm"
[[body]]
name = "bob-east"
group = "pendulum"
shape = "sphere"
radius = 10
material = "tungsten"
at = [50, 0, 0]
[[body]]
name = "bob-west"
group = "pendulum"
shape = "sphere"
radius = 10
material = "tungsten"
at = [-50, 0, 0]
[[body]]
name = "block"
group = "attractor"
shape = "mesh"
file = "{stl_name}"
file_units = "{file_units}"
material = "brass"
at = [0, 150, 0]
"""


# "drums-like": two cylindrical bobs (8 mm radius, 16 mm long, 18 g/cm^3) at x = +-56 mm on a box beam,
# two cylindrical attractors (30 mm radius, 60 mm long, lead) at (+-56, +-41) mm, 3 mm from the bobs.
# The pendulum reaches 64 mm from the pivot and the attractors come within 39.4 mm of it, so no sphere
# about the pivot separates them: every turn is integrated directly. Turning the attractor by about
# -3 deg brings them into contact; turning it by positive angles takes them apart.
DRUMS_LIKE = """
[units]
length = "mm"
[[body]]
name = "beam"
group = "pendulum"
shape = "box"
size = [100, 6, 6]
density = 2700
[[body]]
name = "bob-east"
group = "pendulum"
shape = "cylinder"
radius = 8
length = 16
density = 18000
at = [56, 0, 0]
[[body]]
name = "bob-west"
group = "pendulum"
shape = "cylinder"
radius = 8
length = 16
density = 18000
at = [-56, 0, 0]
[[body]]
name = "big-east"
group = "attractor"
shape = "cylinder"
radius = 30
length = 60
density = 11340
at = [56, 41, 0]
[[body]]
name = "big-west"
group = "attractor"
shape = "cylinder"
radius = 30
length = 60
density = 11340
at = [-56, -41, 0]
"""
