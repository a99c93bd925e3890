"""Shapes: volumes, centroids and inertia tensors against the standard closed forms (from memory), exact polyhedron
formulas and trimesh; inside tests against Monte Carlo volume; size parameters."""

import math

import numpy as np
import pytest
import trimesh
from scipy import integrate

from truepull.geometry.shapes import (Box, Cone, Cylinder, Ellipsoid, MeshShape, Point, Shell, Sphere,
                                      shape_from_size)

PI = math.pi


def diag(t):
    return np.diag(t)


def test_sphere_handbook():
    # standard mechanics handbook table, from memory: V = 4/3 pi R^3, I = 2/5 m R^2
    s = Sphere(0.03)
    m = s.volume()
    assert m == pytest.approx(4 / 3 * PI * 0.03**3, rel=1e-15)
    np.testing.assert_allclose(s.inertia_unit_density(), np.eye(3) * 0.4 * m * 0.03**2, rtol=1e-14)
    assert s.bounding_radius() == 0.03


def test_shell_handbook():
    # standard mechanics handbook table, from memory: thick shell I = 2/5 m (R^5 - r^5) / (R^3 - r^3)
    R, r = 0.05, 0.03
    s = Shell(R, r)
    m = s.volume()
    assert m == pytest.approx(4 / 3 * PI * (R**3 - r**3), rel=1e-14)
    expected = 0.4 * m * (R**5 - r**5) / (R**3 - r**3)
    np.testing.assert_allclose(diag(s.inertia_unit_density()), [expected] * 3, rtol=1e-13)
    # thin-shell limit 2/3 m R^2 (handbook, from memory)
    thin = Shell(1.0, 1.0 - 1e-6)
    assert thin.inertia_unit_density()[0, 0] / thin.volume() == pytest.approx(2 / 3, rel=1e-5)


@pytest.mark.parametrize("R,r,L", [(0.02, 0.0, 0.1), (0.02, 0.015, 0.05), (0.1, 0.01, 0.003)])
def test_cylinder_and_tube_handbook(R, r, L):
    # standard mechanics handbook table, from memory: hollow cylinder
    # I_axis = m (R^2 + r^2) / 2, I_perp (through centre) = m (3 (R^2 + r^2) + L^2) / 12
    c = Cylinder(R, L, r)
    m = c.volume()
    assert m == pytest.approx(PI * (R**2 - r**2) * L, rel=1e-14)
    i = c.inertia_unit_density()
    assert i[2, 2] == pytest.approx(m * (R**2 + r**2) / 2, rel=1e-14)
    assert i[0, 0] == pytest.approx(m * (3 * (R**2 + r**2) + L**2) / 12, rel=1e-14)
    assert i[1, 1] == i[0, 0]
    assert c.bounding_radius() == pytest.approx(math.hypot(R, L / 2))


def test_box_handbook():
    # standard mechanics handbook table, from memory: I_x = m (b^2 + c^2) / 12
    a, b, c = 0.1, 0.2, 0.05
    box = Box((a, b, c))
    m = box.volume()
    assert m == pytest.approx(a * b * c)
    np.testing.assert_allclose(diag(box.inertia_unit_density()),
                               [m * (b * b + c * c) / 12, m * (a * a + c * c) / 12, m * (a * a + b * b) / 12],
                               rtol=1e-14)
    assert box.bounding_radius() == pytest.approx(0.5 * math.sqrt(a * a + b * b + c * c))


def test_cone_handbook():
    # standard mechanics handbook table, from memory, for a solid right circular cone of base R, height h:
    # V = pi R^2 h / 3, centroid h/4 above the base, I_axis = 3/10 m R^2,
    # I_perp about the centroid = 3/80 m (4 R^2 + h^2), about the apex = 3/5 m (R^2/4 + h^2)
    R, h = 0.04, 0.1
    c = Cone(R, h)
    m = c.volume()
    assert m == pytest.approx(PI * R * R * h / 3, rel=1e-14)
    np.testing.assert_allclose(c.centroid(), [0, 0, -h / 2 + h / 4], atol=1e-16)
    i = c.inertia_unit_density()
    assert i[2, 2] == pytest.approx(0.3 * m * R * R, rel=1e-13)
    assert i[0, 0] == pytest.approx(3 / 80 * m * (4 * R * R + h * h), rel=1e-13)
    # parallel-axis theorem to the apex (distance 3h/4 from the centroid)
    assert i[0, 0] + m * (0.75 * h) ** 2 == pytest.approx(0.6 * m * (R * R / 4 + h * h), rel=1e-13)


@pytest.mark.parametrize("R1,R2,L", [(0.04, 0.02, 0.1), (0.01, 0.03, 0.05), (0.02, 0.0199, 0.07)])
def test_frustum_centroid_formula(R1, R2, L):
    # frustum centroid h (R1^2 + 2 R1 R2 + 3 R2^2) / (4 (R1^2 + R1 R2 + R2^2)) above the base
    # (standard result, from memory); volume pi h (R1^2 + R1 R2 + R2^2) / 3 (handbook, from memory)
    c = Cone(R1, L, R2)
    zc = L * (R1**2 + 2 * R1 * R2 + 3 * R2**2) / (4 * (R1**2 + R1 * R2 + R2**2))
    assert c.centroid()[2] + L / 2 == pytest.approx(zc, rel=1e-13)
    assert c.volume() == pytest.approx(PI * L * (R1**2 + R1 * R2 + R2**2) / 3, rel=1e-14)


@pytest.mark.parametrize("R1,R2,L", [(0.04, 0.02, 0.1), (0.01, 0.03, 0.05)])
def test_frustum_inertia_is_big_cone_minus_small_cone(R1, R2, L):
    # a frustum is a whole cone minus the cone cut off its tip; each by the standard cone formulas
    # (I_axis 3/10 m R^2, I_perp 3/80 m (4R^2 + h^2) about its centroid, from memory) and the
    # parallel-axis theorem.
    wide, narrow = max(R1, R2), min(R1, R2)
    H = L * wide / (wide - narrow)  # height of the whole cone
    h = H - L

    def cone_about_base_plane(R, hh):  # perpendicular moment about an axis in its base plane
        m = PI * R * R * hh / 3
        return m, 0.3 * m * R * R, 3 / 80 * m * (4 * R * R + hh * hh) + m * (hh / 4) ** 2

    mb, izb, ixb = cone_about_base_plane(wide, H)
    ms, izs, ixs_own = cone_about_base_plane(narrow, h)
    # the small cone's base plane is L above the big base: shift its base-plane moment there
    ms_centroid_height = L + h / 4
    ixs = ixs_own - ms * (h / 4) ** 2 + ms * ms_centroid_height**2
    m = mb - ms
    zc = (mb * H / 4 - ms * ms_centroid_height) / m  # above the wide base
    ix_centroid = ixb - ixs - m * zc**2
    frustum = Cone(R1, L, R2)
    i = frustum.inertia_unit_density()
    assert frustum.volume() == pytest.approx(m, rel=1e-12)
    assert i[2, 2] == pytest.approx(izb - izs, rel=1e-12)
    assert i[0, 0] == pytest.approx(ix_centroid, rel=1e-10)


def test_frustum_inertia_against_scipy_quadrature():
    # general-purpose reference: scipy.integrate.tplquad of (y^2 + z'^2) over the frustum, cylindrical coords
    R1, R2, L = 0.03, 0.012, 0.08
    c = Cone(R1, L, R2)
    zc = c.centroid()[2]

    def radius(z):
        return R1 + (R2 - R1) * (z + L / 2) / L

    def integrand(rho, phi, z):
        y = rho * math.sin(phi)
        return (y * y + (z - zc) ** 2) * rho

    ixx, _ = integrate.tplquad(integrand, -L / 2, L / 2, 0, 2 * PI, 0, lambda z, phi: radius(z),
                               epsabs=0, epsrel=1e-11)
    assert c.inertia_unit_density()[0, 0] == pytest.approx(ixx, rel=1e-9)


def test_ellipsoid_handbook():
    # standard mechanics handbook table, from memory: V = 4/3 pi a b c, I_x = m (b^2 + c^2) / 5
    a, b, c = 0.03, 0.05, 0.02
    e = Ellipsoid((a, b, c))
    m = e.volume()
    assert m == pytest.approx(4 / 3 * PI * a * b * c)
    np.testing.assert_allclose(diag(e.inertia_unit_density()),
                               [m * (b * b + c * c) / 5, m * (a * a + c * c) / 5, m * (a * a + b * b) / 5],
                               rtol=1e-14)
    assert e.bounding_radius() == b


def test_point():
    p = Point()
    assert p.volume() == 0 and p.bounding_radius() == 0
    assert not np.any(p.inertia_unit_density())
    assert not p.contains(np.zeros((4, 3))).any()


# --- meshes through trimesh against exact polyhedron formulas ----------------------------------

def mesh_of(tm):
    return MeshShape(tm.vertices, tm.faces, "test")


def test_box_mesh_is_exact():
    # a box mesh is the box itself: trimesh's mass properties must match the closed form to rounding
    ext = (0.1, 0.2, 0.05)
    mesh = mesh_of(trimesh.creation.box(extents=ext))
    box = Box(ext)
    assert mesh.volume() == pytest.approx(box.volume(), rel=1e-12)
    np.testing.assert_allclose(mesh.centroid(), 0, atol=1e-15)
    np.testing.assert_allclose(mesh.inertia_unit_density(), box.inertia_unit_density(), rtol=1e-10, atol=1e-18)


def polygon_prism(n, R, L):
    """Exact regular n-gon prism (circumradius R, length L), density 1: volume, I_axis, I_perp.
    Polygon: n triangles fanned from the centre; for a triangle (0, p1, p2) the integral of r^2 dA is
    A/6 (p1.p1 + p1.p2 + p2.p2) (standard result, from memory); in-plane moments are isotropic for
    a regular polygon."""
    alpha = 2 * PI / n
    area = n * R * R * math.sin(alpha) / 2
    polar = n * R**4 * math.sin(alpha) * (2 + math.cos(alpha)) / 12
    return area * L, polar * L, polar / 2 * L + area * L**3 / 12, area, polar


@pytest.mark.parametrize("n", [8, 32, 128])
def test_cylinder_mesh_matches_polygon_prism(n):
    R, L = 0.02, 0.07
    mesh = mesh_of(trimesh.creation.cylinder(radius=R, height=L, sections=n))
    vol, iz, ix, _, _ = polygon_prism(n, R, L)
    i = mesh.inertia_unit_density()
    assert mesh.volume() == pytest.approx(vol, rel=1e-12)
    assert i[2, 2] == pytest.approx(iz, rel=1e-10)
    assert i[0, 0] == pytest.approx(ix, rel=1e-10)
    assert i[1, 1] == pytest.approx(ix, rel=1e-10)
    # and the polygon tends to the circle as n grows: error ~ (2 pi / n)^2 / 6 relative in area
    cyl = Cylinder(R, L)
    assert abs(mesh.volume() / cyl.volume() - 1) < (2 * PI / n) ** 2 / 6 * 1.01


@pytest.mark.parametrize("n", [8, 64])
def test_cone_mesh_matches_polygon_pyramid(n):
    # pyramid on a regular n-gon base (area A, polar moment J), height h, slices scale by (1 - s/h):
    # V = A h / 3, centroid h/4 above the base, I_axis = J h / 5, I_perp(centroid) = J h / 10 + A h^3 / 80
    # (derived by integrating the scaled slices; the circle limit gives the cone's 3/80 m (4R^2+h^2), from memory)
    R, h = 0.03, 0.09
    tm = trimesh.creation.cone(radius=R, height=h, sections=n)
    mesh = mesh_of(tm)
    _, _, _, A, J = polygon_prism(n, R, 1.0)
    assert mesh.volume() == pytest.approx(A * h / 3, rel=1e-12)
    np.testing.assert_allclose(mesh.centroid(), [0, 0, h / 4], atol=1e-14)
    i = mesh.inertia_unit_density()
    assert i[2, 2] == pytest.approx(J * h / 5, rel=1e-10)
    assert i[0, 0] == pytest.approx(J * h / 10 + A * h**3 / 80, rel=1e-10)


def test_icosphere_bracketed_by_inscribed_and_circumscribed_spheres():
    # the polyhedron lies between its inscribed sphere (radius = nearest face-plane distance) and the
    # circumscribed sphere, and volume and moments are monotone in the region: the closed forms bracket it
    R = 0.05
    tm = trimesh.creation.icosphere(subdivisions=3, radius=R)
    mesh = mesh_of(tm)
    tri = tm.triangles
    normals = np.cross(tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0])
    normals /= np.linalg.norm(normals, axis=1)[:, None]
    r_in = np.min(np.abs(np.einsum("ij,ij->i", normals, tri[:, 0])))
    r_out = np.max(np.linalg.norm(tm.vertices, axis=1))
    lo, hi = Sphere(r_in), Sphere(r_out)
    assert lo.volume() <= mesh.volume() <= hi.volume()
    for k in range(3):
        assert lo.inertia_unit_density()[k, k] <= mesh.inertia_unit_density()[k, k] <= hi.inertia_unit_density()[k, k]
    assert mesh.bounding_radius() == pytest.approx(r_out)


def test_scaled_icosphere_bracketed_by_ellipsoids():
    a, b, c = 0.03, 0.05, 0.02
    tm = trimesh.creation.icosphere(subdivisions=3, radius=1.0)
    tri = tm.triangles
    normals = np.cross(tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0])
    normals /= np.linalg.norm(normals, axis=1)[:, None]
    r_in = np.min(np.abs(np.einsum("ij,ij->i", normals, tri[:, 0])))
    mesh = MeshShape(tm.vertices * [a, b, c], tm.faces, "test")
    lo, hi = Ellipsoid((r_in * a, r_in * b, r_in * c)), Ellipsoid((a, b, c))
    assert lo.volume() <= mesh.volume() <= hi.volume()
    for k in range(3):
        assert lo.inertia_unit_density()[k, k] <= mesh.inertia_unit_density()[k, k] <= hi.inertia_unit_density()[k, k]


def test_mesh_arrays_read_only_and_hashable():
    mesh = mesh_of(trimesh.creation.box(extents=(1, 1, 1)))
    with pytest.raises(ValueError):
        mesh.vertices[0, 0] = 5.0
    assert hash(mesh) == hash(mesh) and mesh == mesh
    assert mesh.size_params() == {}
    with pytest.raises(KeyError):
        mesh.with_size("radius", 1.0)


# --- inside tests ------------------------------------------------------------------------------

SHAPES = [
    Sphere(0.5), Shell(0.5, 0.3), Cylinder(0.4, 0.9), Cylinder(0.4, 0.9, 0.25), Box((0.9, 0.5, 0.7)),
    Cone(0.45, 0.9), Cone(0.45, 0.9, 0.2), Cone(0.1, 0.8, 0.45), Ellipsoid((0.5, 0.3, 0.4)),
]


@pytest.mark.parametrize("shape", SHAPES + [MeshShape(trimesh.creation.cylinder(0.4, 0.9, sections=24).vertices,
                                                      trimesh.creation.cylinder(0.4, 0.9, sections=24).faces)],
                         ids=lambda s: s.kind)
def test_contains_monte_carlo_volume(shape):
    # Monte Carlo volume from contains() in the bounding cube agrees with volume() within 5 binomial sigma
    rng = np.random.default_rng(12345)
    r = shape.bounding_radius()
    n = 200_000 if shape.kind != "mesh" else 40_000
    pts = rng.uniform(-r, r, size=(n, 3))
    inside = shape.contains(pts)
    cube = (2 * r) ** 3
    p = shape.volume() / cube
    sigma = math.sqrt(p * (1 - p) / n)
    assert abs(inside.mean() - p) < 5 * sigma
    # nothing inside lies beyond the bounding radius
    assert np.all(np.linalg.norm(pts[inside], axis=1) <= r * (1 + 1e-12))


@pytest.mark.parametrize("shape", SHAPES, ids=lambda s: s.kind)
def test_size_params_round_trip(shape):
    params = shape.size_params()
    assert set(params) == set(type(shape).SIZE_KEYS)
    rebuilt = shape_from_size(shape.kind, params)
    assert rebuilt == shape
    key = next(iter(params))
    bigger = shape.with_size(key, params[key] * 1.1)
    assert bigger.size_params()[key] == pytest.approx(params[key] * 1.1)
    assert shape.size_params()[key] == params[key]  # the original is unchanged (frozen)
    with pytest.raises(KeyError):
        shape.with_size("nonsense", 1.0)
