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


# one body of every shape: pendulum of a point, a sphere, a solid cylinder and a box beam about the
# fiber; attractor of a shell, a tube, a frustum, an ellipsoid and a mesh (a 20 mm cube from
# `write_cube_mesh`) on a ring about 110 mm out, all clear of each other (gaps of 20 mm or more).
# Two positions turn the attractor by +-30 deg and a deflection measurement names both.
def all_shapes_scene(mesh_name: str = "cube.stl") -> str:
    return f"""
[units]
length = "mm"
[[body]]
name = "beam"
group = "pendulum"
shape = "box"
size = ["60 +- 0.01", 6, 4]
material = "aluminium"
at = [0, 0, 0]
[[body]]
name = "bob"
group = "pendulum"
shape = "sphere"
radius = "8 +- 0.002"
material = "tungsten"
at = ["45 +- 0.01", 0, 0]
[[body]]
name = "plug"
group = "pendulum"
shape = "cylinder"
radius = 6
length = "12 +- 0.002"
density = "18000 +- 20"
at = [-45, 0, 0]
[[body]]
name = "weight"
group = "pendulum"
shape = "point"
mass = "0.005 +- 1e-6"
at = [0, 0, 15]
[[body]]
name = "shell"
group = "attractor"
shape = "shell"
radius = "20 +- 0.005"
inner_radius = 15
material = "lead"
at = [110, 0, 0]
[[body]]
name = "tube"
group = "attractor"
shape = "cylinder"
radius = 15
inner_radius = 8
length = 30
material = "brass"
at = [0, 110, 0]
[[body]]
name = "frustum"
group = "attractor"
shape = "cone"
radius = 15
radius_top = 8
length = 30
material = "copper"
at = [-110, 0, 0]
[[body]]
name = "egg"
group = "attractor"
shape = "ellipsoid"
radii = [18, 12, 10]
material = "tungsten"
at = [0, -110, 0]
[[body]]
name = "cube"
group = "attractor"
shape = "mesh"
file = "{mesh_name}"
file_units = "mm"
material = "brass"
at = [78, 78, 0]
[[position]]
name = "A"
group = "attractor"
turn = 30
[[position]]
name = "B"
group = "attractor"
turn = -30
[measurement]
method = "deflection"
angle = {{ A = "0.002 rad", B = "-0.002 rad" }}
period = "300 +- 0.1 s"
"""


def write_cube_mesh(path, edge: float = 20.0) -> None:
    """A closed cube mesh of `edge` (file units), centred on its file origin, written as STL."""
    import trimesh

    trimesh.creation.box(extents=(edge, edge, edge)).export(path)


def small_cylinders_scene(n: int = 50) -> str:
    """`n` small cylinders (radius 3 mm, length 6 mm, tungsten): half on a 40 mm ring about the
    fiber (pendulum), half in a block of rows 12 mm apart centred 100 mm out along +y (attractor),
    one position turning the attractor by 3 deg."""
    import math

    parts = ['[units]\nlength = "mm"\n']
    half = n // 2
    side = max(1, math.ceil(math.sqrt(n - half)))
    for k in range(n):
        if k < half:
            group, phi = "pendulum", 2 * math.pi * k / half
            x, y, z = 40.0 * math.cos(phi), 40.0 * math.sin(phi), 0.0
        else:
            group, m = "attractor", k - half
            x, y, z = 12.0 * (m % side - (side - 1) / 2), 100.0 + 12.0 * (m // side), 0.0
        parts.append(f'[[body]]\nname = "c{k}"\ngroup = "{group}"\nshape = "cylinder"\nradius = 3\nlength = 6\n'
                     f'material = "tungsten"\nat = [{x:.6f}, {y:.6f}, {z}]\n')
    parts.append('[[position]]\nname = "A"\ngroup = "attractor"\nturn = 3\n')
    return "\n".join(parts)


def symmetric_tube(r_inner: float, r_outer: float, half_height: float, per_octant: int = 6):
    """(vertices (4N, 3) m, faces (8N, 3)) of a closed outward-wound tube (N = 8 per_octant sides) whose
    double-precision vertices are exactly symmetric under the quarter turn about z and the mirrors
    x -> -x, y -> -y, z -> -z: the first octant's angles come from cos and sin, the rest by swapping and
    negating coordinates (exact), so the field of this polyhedron vanishes exactly at its centre."""
    import numpy as np

    t = np.arange(per_octant + 1) * (np.pi / 4.0) / per_octant
    c, s = np.cos(t), np.sin(t)
    c[-1] = s[-1]                                   # 45 deg: the same value twice
    quarter = np.concatenate([np.c_[c, s], np.c_[s[-2::-1], c[-2::-1]]])[:-1]     # 0 <= angle < 90 deg
    ring = np.concatenate([quarter, quarter @ [[0.0, 1.0], [-1.0, 0.0]],          # (x, y) -> (-y, x)
                           -quarter, quarter @ [[0.0, -1.0], [1.0, 0.0]]])        # ... by quarter turns
    n = len(ring)
    z = np.full((n, 1), half_height)
    v = np.vstack([np.c_[r_outer * ring, z], np.c_[r_outer * ring, -z],
                   np.c_[r_inner * ring, z], np.c_[r_inner * ring, -z]])
    ot, ob, it, ib = (np.arange(n) + k * n for k in range(4))
    nx = lambda a: np.roll(a, -1)                    # the next side round the axis
    faces = np.concatenate([
        np.c_[ob, nx(ob), nx(ot)], np.c_[ob, nx(ot), ot],          # outer wall, normal outward
        np.c_[ib, nx(it), nx(ib)], np.c_[ib, it, nx(it)],          # inner wall, normal toward the axis
        np.c_[it, ot, nx(ot)], np.c_[it, nx(ot), nx(it)],          # top, normal +z
        np.c_[ib, nx(ob), ob], np.c_[ib, nx(ib), nx(ob)]])         # bottom, normal -z
    return v, faces


GRID_SHAPES = ('shape = "sphere"\nradius = 10', 'shape = "box"\nsize = [18, 18, 18]',
               'shape = "cylinder"\nradius = 9\nlength = 18')
GRID_STATED = ('shape = "sphere"\nradius = "10 +- 0.01"', 'shape = "box"\nsize = ["18 +- 0.01 mm", 18, "1.8 cm"]',
               'shape = "cylinder"\nradius = "9.000(5)"\nlength = 18')


def grid_scene(n: int, move: str = "turn = 0.5") -> str:
    """`n` spheres, boxes and cylinders of about 20 mm on a 30 mm cubic grid (mm), the lower half of
    the grid in x the pendulum, the upper half 200 mm further out the attractor; every 50th body pushed
    15 mm into its neighbour below (an overlap); every 7th states `+-` on its size and first
    coordinate, every 5th is of brass. Positions: A (the attractor as drawn) and B (`move`, a TOML
    line of [[position]], e.g. "turn = 0.5" in deg or "shift = [-245, 0, 0]")."""
    import math

    side = math.ceil(n ** (1 / 3) - 1e-9)
    parts = ['[units]\nlength = "mm"\n']
    k = 0
    for i in range(side):
        for j in range(side):
            for m in range(side):
                if k >= n:
                    break
                group = "pendulum" if i < side / 2 else "attractor"
                x, y, z = 30.0 * i + 200.0 * (group == "attractor"), 30.0 * j, 30.0 * m
                if k % 50 == 1:
                    z -= 15.0
                shape = (GRID_STATED if k % 7 == 3 else GRID_SHAPES)[k % 3]
                at = f'["{x} +- 0.02", {y}, {z}]' if k % 7 == 3 else f"[{x}, {y}, {z}]"
                matter = 'material = "brass"' if k % 5 == 2 else "density = 8000"
                parts.append(f'[[body]]\nname = "b{k}"\ngroup = "{group}"\n{shape}\n{matter}\nat = {at}\n')
                k += 1
    parts.append('[[position]]\nname = "A"\ngroup = "attractor"\nturn = 0\n')
    parts.append(f'[[position]]\nname = "B"\ngroup = "attractor"\n{move}\n')
    return "\n".join(parts)


# invented sizes: a gap of 0.2 mm (1% of the bob's length), the drum 13 mm higher
CLOSE_PARALLEL_CYLINDERS = """
[units]
length = "mm"
[[body]]
name = "bob"
group = "pendulum"
shape = "cylinder"
radius = 12
length = 20
density = 8000
at = [50, 10, 0]
[[body]]
name = "drum"
group = "attractor"
shape = "cylinder"
radius = 20
length = 50
density = 11340
at = [69.32, 35.76, 13]
"""


def write_measured_ball(path, radius_mm: float = 10.0, eps20: float = 1e-3, noise_mm: float = 0.0,
                        n: int = 600, seed: int = 1) -> None:
    """A CSV of theta, phi (deg), r (mm) on a ball r = R (1 + eps20 Y20) on a Fibonacci net, plus normal noise."""
    import math

    import numpy as np

    k = np.arange(n) + 0.5
    z = 1 - 2 * k / n
    phi = math.pi * (1 + 5**0.5) * k
    y20 = math.sqrt(5 / (4 * math.pi)) * 0.5 * (3 * z * z - 1)
    r = radius_mm * (1 + eps20 * y20) + np.random.default_rng(seed).normal(0.0, noise_mm, n)
    rows = np.column_stack([np.degrees(np.arccos(z)), np.degrees(phi) % 360.0, r])
    np.savetxt(path, rows, delimiter=",", header="theta,phi,r", comments="")


def measured_cylinder_points(R, H, eps, tau, noise, rng, n_phi=48, n_z=13, rings=5):
    """Points (N, 3) m on the side and both flat faces of r = R (1 + eps cos 2 phi) + tau z, noisy."""
    import math

    import numpy as np

    rows = []
    for k, z in enumerate(np.linspace(-0.95 * H, 0.95 * H, n_z)):
        phi = (np.arange(n_phi) + 0.5 * (k % 2)) * 2 * math.pi / n_phi
        r = R * (1 + eps * np.cos(2 * phi)) + tau * z + rng.normal(0, noise, n_phi)
        rows.append(np.column_stack([r * np.cos(phi), r * np.sin(phi), np.full(n_phi, z)]))
    for zf in (H, -H):
        for rho in np.linspace(0.15 * R, 0.92 * R, rings):
            a = np.arange(24) * 2 * math.pi / 24 + rho
            rows.append(np.column_stack([rho * np.cos(a), rho * np.sin(a), zf + rng.normal(0, noise, 24)]))
    return np.vstack(rows)


def measured_ball_scene(csv: str, fit_degree=3, period: str = "512.0 s", form: str = "",
                        measured: str = "bob-east", measurement: str | None = None, reach: float = 70) -> str:
    """A small balance with one measured body, the `csv` (mm) as `measured` ("bob-east", a 10 mm pendulum
    ball, or "lead-a", a 25 mm attractor ball; with form = 'cylinder' a measured cylinder, fit_degree
    then '[M, K]'); the attractor balls' centres `reach` mm from the fiber (80 keeps them clear at every
    turn); positions A, B at turns +-35 deg; deflection, unless `measurement` gives the lines of another
    [measurement] table."""
    form_line = f'form = "{form}"' if form else ""
    deflection = f'method = "deflection"\nangle = {{ A = "0.00210 rad", B = "-0.00208 rad" }}\nperiod = "{period}"'

    def ball(name, group, radius, density, x):
        if name == measured:
            kind = f'shape = "mesh"\nfile = "{csv}"\n{form_line}\nfit_degree = {fit_degree}'
        else:
            kind = f'shape = "sphere"\nradius = {radius}'
        return f"""[[body]]
name = "{name}"
group = "{group}"
{kind}
density = {density}
at = [{x}, 0, 0]
"""
    bodies = (ball("bob-east", "pendulum", 10, 18.0, 40) + ball("bob-west", "pendulum", 10, 18.0, -40)
              + ball("lead-a", "attractor", 25, 11.34, reach) + ball("lead-b", "attractor", 25, 11.34, -reach))
    return f"""[units]
length = "mm"
density = "g/cm^3"
angle = "deg"
{bodies}[[position]]
name = "A"
group = "attractor"
turn = 35
[[position]]
name = "B"
group = "attractor"
turn = -35
[measurement]
{measurement or deflection}
"""
# a measured ball (radius 10 mm, steel) whose points lie exactly on the sphere, beside an ideal twin
# 25 mm the other side of the fiber, and two 5 kg points 90 mm off, 4 mm above and below the plane
# (invented); coarse facets (1280 triangles, its coarse 320) make the chord error large
MEASURED_BALL = {"radius": 0.01, "density": 8000.0, "offset": 0.025, "reach": 0.09, "height": 0.004,
                 "source_mass": 5.0, "subdivisions": 3}


def exact_measured_ball_scene(G: float):
    """(scene, test points, source points): the MEASURED_BALL layout as a scene whose 'pendulum-0' is the
    measured form (a MeasuredMesh with its coarse), and the same bodies as [(mass kg, (x, y, z) m)]
    for Newton's law (the exact ball pulls as a point: shell theorem)."""
    import math
    from dataclasses import replace

    import numpy as np

    from truepull.geometry.bodies import Body
    from truepull.geometry.measured_form import MeasuredPoints, fitted_shape
    from truepull.geometry.placement import Placement
    from truepull.geometry.scene import load_scene_text

    p = MEASURED_BALL
    R, x0, y0, z0 = p["radius"], p["offset"], p["reach"], p["height"]
    n = 400  # a Fibonacci lattice of directions, radius R on every one
    k = np.arange(n) + 0.5
    z = 1 - 2 * k / n
    phi = math.pi * (1 + 5**0.5) * k
    u = np.stack([np.sqrt(1 - z * z) * np.cos(phi), np.sqrt(1 - z * z) * np.sin(phi), z], axis=1)
    shape = fitted_shape(MeasuredPoints("ball.csv", u, np.full(n, R), ("ux", "uy", "uz", "r")), 4,
                         subdivisions=p["subdivisions"])
    M = p["density"] * 4 * math.pi * R**3 / 3
    test = [(M, (x0, 0.0, 0.0)), (M, (-x0, 0.0, 0.0))]
    source = [(p["source_mass"], (0.0, y0, z0)), (p["source_mass"], (0.0, -y0, -z0))]
    parts = [f"[scene]\nG = {G!r}\n"]
    for group, pts, shape_text in (("pendulum", test, f'shape = "sphere"\nradius = {R!r}\n'),
                                   ("attractor", source, 'shape = "point"\n')):
        for i, (m, at) in enumerate(pts):
            parts.append(f'[[body]]\nname = "{group}-{i}"\ngroup = "{group}"\n{shape_text}mass = {m!r}\n'
                         f"at = [{at[0]!r}, {at[1]!r}, {at[2]!r}]\n")
    scene = load_scene_text("\n".join(parts))
    ball = Body("pendulum-0", "pendulum", shape, Placement.shift(np.array([x0, 0.0, 0.0])), p["density"])
    scene = replace(scene, bodies=tuple(ball if b.name == "pendulum-0" else b for b in scene.bodies))
    return scene, test, source
