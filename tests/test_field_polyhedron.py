"""Polyhedron field (Werner-Scheeres) against the prism closed form, the point mass, Laplace/Poisson
and finite differences; mesh checks."""

import numpy as np
import pytest
import trimesh

from truepull.geometry.errors import InputError
from truepull.integrate.field_point import point_field
from truepull.integrate.field_polyhedron import (PolyhedronData, polyhedron_field,
                                                 polyhedron_gradient)
from truepull.integrate.field_prism import prism_field, prism_gradient

G = 6.674e-11
RHO = 11340.0
H = np.array([0.04, 0.025, 0.015])
EPS = np.finfo(float).eps


def box_mesh(h, subdivisions=0):
    m = trimesh.creation.box(extents=2 * h)
    for _ in range(subdivisions):
        m = m.subdivide()
    return m


def sample_points(h, n, seed):
    rng = np.random.default_rng(seed)
    return rng.uniform(-2.5, 2.5, size=(n, 3)) * h


def surface_points(h):
    """A vertex, points on edges, on faces, on an edge line and in a face plane beside the box."""
    hx, hy, hz = h
    return np.array([[hx, hy, hz], [hx, hy, 0.3 * hz], [hx, -0.2 * hy, 0.5 * hz],
                     [-0.1 * hx, 0.7 * hy, -hz], [hx, hy, 1.7 * hz], [hx, 1.6 * hy, 0.2 * hz],
                     [0.0, 0.0, hz]])


@pytest.mark.parametrize("subdivisions", [0, 2])
def test_cube_mesh_equals_prism_closed_form(subdivisions):
    # Reference: the Nagy-Papp-Benedek prism closed form (checked against scipy cubature in
    # tests/test_field_prism.py); a 12-triangle and a 192-triangle mesh of the same box.
    data = PolyhedronData(*(lambda m: (m.vertices, m.faces))(box_mesh(H, subdivisions)))
    pts = np.vstack([sample_points(H, 300, 1), surface_points(H)])
    U, g = polyhedron_field(pts, data, RHO, G)
    Up, gp = prism_field(pts, H, RHO, G)
    np.testing.assert_allclose(U, Up, rtol=1e-12)
    err = np.linalg.norm(g - gp, axis=1) / np.linalg.norm(gp, axis=1)
    assert np.all(np.isfinite(g)) and err.max() < 1e-12


def test_cube_gradient_equals_prism_gradient():
    # Reference: the prism gradient tensor closed form (itself checked by differences and Laplace).
    data = PolyhedronData(*(lambda m: (m.vertices, m.faces))(box_mesh(H)))
    pts = sample_points(H, 200, 2)
    T = polyhedron_gradient(pts, data, RHO, G)
    Tp = prism_gradient(pts, H, RHO, G)
    scale = np.abs(Tp).max(axis=(1, 2))[:, None, None]
    assert np.all(np.abs(T - Tp) < 1e-12 * scale)


def test_prepared_data_matches_trimesh():
    # Reference: trimesh's volume and face normals (general-purpose mesh library).
    m = trimesh.creation.icosphere(subdivisions=2, radius=0.03)
    data = PolyhedronData(m.vertices, m.faces)
    np.testing.assert_allclose(data.volume, m.volume, rtol=1e-13)
    np.testing.assert_allclose(data.face_normals, m.face_normals, atol=1e-12)
    assert data.edges.shape[0] == m.edges_unique.shape[0]
    # Edge dyads are symmetric (Werner and Scheeres 1997, sec. 2) and traceless (n_A . n_A12 = 0).
    np.testing.assert_allclose(data.edge_dyads, np.transpose(data.edge_dyads, (0, 2, 1)),
                               atol=1e-15)
    np.testing.assert_allclose(np.trace(data.edge_dyads, axis1=1, axis2=2), 0.0, atol=1e-15)


def l_block_mesh():
    """An L-shaped (non-convex) block: the L polygon (0,0),(2,0),(2,1),(1,1),(1,2),(0,2) times
    0.01 m, extruded over z in [0, 0.01] m, triangulated as a fan from the reflex corner."""
    poly = np.array([[0, 0], [2, 0], [2, 1], [1, 1], [1, 2], [0, 2]], float) * 0.01
    n = len(poly)
    v = np.vstack([np.c_[poly, np.zeros(n)], np.c_[poly, np.full(n, 0.01)]])
    faces = []
    for i in range(n):
        j = (i + 1) % n
        faces += [[i, j, n + j], [i, n + j, n + i]]          # sides, counter-clockwise polygon
    reflex = 3
    for k in range(n - 2):
        a, b = (reflex + 1 + k) % n, (reflex + 2 + k) % n
        faces.append([n + reflex, n + a, n + b])              # top, normal +z
        faces.append([reflex, b, a])                          # bottom, normal -z
    return v, np.array(faces)


def test_non_convex_block_equals_sum_of_two_prisms():
    # Reference: superposition of two prism closed forms, [0,2]x[0,1] and [0,1]x[1,2] (x 0.01 m).
    v, f = l_block_mesh()
    data = PolyhedronData(v, f)
    np.testing.assert_allclose(data.volume, 3e-6, rtol=1e-12)
    rng = np.random.default_rng(4)
    pts = rng.uniform(-0.01, 0.03, size=(300, 3))
    pts = np.vstack([pts, [[0.01, 0.01, 0.005], [0.015, 0.015, 0.005], [0.01, 0.015, 0.01]]])
    U, g = polyhedron_field(pts, data, RHO, G)
    Ua, ga = prism_field(pts - [0.01, 0.005, 0.005], [0.01, 0.005, 0.005], RHO, G)
    Ub, gb = prism_field(pts - [0.005, 0.015, 0.005], [0.005, 0.005, 0.005], RHO, G)
    np.testing.assert_allclose(U, Ua + Ub, rtol=1e-12)
    err = np.linalg.norm(g - ga - gb, axis=1) / np.linalg.norm(ga + gb, axis=1)
    assert err.max() < 1e-11


def test_icosphere_far_field_approaches_point_mass():
    # Newton/shell theorem: far away any bounded mass acts as a point at its centre of mass. The
    # icosphere's quadrupole vanishes (icosahedral symmetry), so the deviation falls fast.
    m = trimesh.creation.icosphere(subdivisions=3, radius=0.05)
    data = PolyhedronData(m.vertices, m.faces)
    mass = RHO * data.volume
    rng = np.random.default_rng(5)
    dirs = rng.normal(size=(10, 3))
    dirs /= np.linalg.norm(dirs, axis=1)[:, None]
    devs = []
    for k in (3.0, 30.0, 300.0):
        p = dirs * k * 0.05
        U, g = polyhedron_field(p, data, RHO, G)
        U0, g0 = point_field(p, np.zeros((1, 3)), [mass], G)
        devs.append(max(np.max(np.abs(U / U0 - 1)),
                        np.max(np.linalg.norm(g - g0, axis=1) / np.linalg.norm(g0, axis=1))))
    assert devs[0] < 1e-4 and devs[1] < 1e-8 and devs[2] < 1e-9
    assert devs[1] < devs[0] * 1e-3


def test_surface_values_are_finite_and_continuous():
    # A finite density gives a continuous potential and field (Kellogg, Foundations of Potential Theory, 1929; from memory): the
    # values on a vertex, edge and face equal the limits from outside and inside.
    m = trimesh.creation.icosphere(subdivisions=2, radius=0.05)
    data = PolyhedronData(m.vertices, m.faces)
    f0 = m.faces[0]
    vtx = m.vertices[f0[0]]
    edge_mid = 0.5 * (m.vertices[f0[0]] + m.vertices[f0[1]])
    face_mid = m.vertices[f0].mean(axis=0)
    on = np.array([vtx, edge_mid, face_mid])
    U0, g0 = polyhedron_field(on, data, RHO, G)
    assert np.all(np.isfinite(U0)) and np.all(np.isfinite(g0))
    out = on / np.linalg.norm(on, axis=1)[:, None]
    for eps in (1e-6, 1e-9):
        for sgn in (1.0, -1.0):
            U, g = polyhedron_field(on + sgn * eps * out, data, RHO, G)
            np.testing.assert_allclose(U, U0, rtol=10 * eps / 0.05)
            rel = np.linalg.norm(g - g0, axis=1) / np.linalg.norm(g0, axis=1)
            assert np.all(rel < 200 * eps / 0.05 * (1 + abs(np.log(eps / 0.05))))


def test_gradient_matches_central_differences():
    # Central differences of g (Taylor, O(step^2)) on an irregular mesh, inside and outside.
    m = trimesh.creation.icosphere(subdivisions=1, radius=0.05)
    v = m.vertices * [1.0, 0.7, 1.3]
    data = PolyhedronData(v, m.faces)
    pts = np.array([[0.08, 0.01, -0.02], [0.01, 0.02, 0.01], [-0.02, -0.1, 0.05]])
    T = polyhedron_gradient(pts, data, RHO, G)
    step = 1e-6
    for j in range(3):
        e = np.zeros(3)
        e[j] = step
        fd = (polyhedron_field(pts + e, data, RHO, G)[1]
              - polyhedron_field(pts - e, data, RHO, G)[1]) / (2 * step)
        assert np.all(np.abs(T[:, :, j] - fd).max(axis=1) < 1e-7 * np.abs(T).max(axis=(1, 2)))


def test_gradient_obeys_laplace_and_poisson():
    # Laplace: trace T = 0 outside; Poisson: -4 pi G rho inside (Kellogg, Foundations of Potential Theory, 1929; from memory).
    m = trimesh.creation.icosphere(subdivisions=2, radius=0.05)
    data = PolyhedronData(m.vertices, m.faces)
    rng = np.random.default_rng(8)
    pts = rng.uniform(-0.1, 0.1, size=(300, 3))
    r = np.linalg.norm(pts, axis=1)
    inside = r < 0.045                         # the facets lie between r = 0.049 and 0.05
    clear = inside | (r > 0.051)
    T = polyhedron_gradient(pts[clear], data, RHO, G)
    tr = np.trace(T, axis1=1, axis2=2)
    scale = 4 * np.pi * G * RHO
    ins = inside[clear]
    assert ins.sum() > 10 and (~ins).sum() > 10
    np.testing.assert_allclose(tr[ins], -scale, rtol=1e-11)
    assert np.all(np.abs(tr[~ins]) < 1e-11 * scale)


def test_many_points_in_blocks_agree_with_single_points():
    # Blocked evaluation gives the same numbers as one point at a time (including a partial block).
    m = trimesh.creation.icosphere(subdivisions=1, radius=0.05)
    data = PolyhedronData(m.vertices, m.faces)
    pts = np.random.default_rng(9).uniform(-0.1, 0.1, size=(37, 3))
    U, g = polyhedron_field(pts, data, RHO, G)
    for i in (0, 15, 16, 36):
        Ui, gi = polyhedron_field(pts[i:i + 1], data, RHO, G)
        np.testing.assert_allclose(Ui, U[i:i + 1], rtol=1e-14)
        np.testing.assert_allclose(gi, g[i:i + 1], rtol=1e-13)


def test_open_or_badly_wound_meshes_are_input_errors():
    m = box_mesh(H)
    with pytest.raises(InputError, match="watertight"):
        PolyhedronData(m.vertices, m.faces[:-1])
    flipped = m.faces.copy()
    flipped[0] = flipped[0][::-1]
    with pytest.raises(InputError, match="wound"):
        PolyhedronData(m.vertices, flipped)
    with pytest.raises(InputError, match="counter-clockwise"):
        PolyhedronData(m.vertices, m.faces[:, ::-1])
    with pytest.raises(InputError):
        PolyhedronData(m.vertices, m.faces + 100)


@pytest.mark.parametrize("h", [[0.04, 0.025, 0.015], [0.05, 0.005, 0.0005], [0.05, 0.0005, 0.0005]])
def test_rounding_bounds_hold_far_from_boxes_plates_and_rods(h):
    # Reference: the prism closed form, which far away switches to Gauss-Legendre quadrature with its
    # own proven bound (tests/test_field_prism.py); the difference is within the two bounds.
    from truepull.integrate.field_polyhedron import polyhedron_rounding_bounds
    from truepull.integrate.field_prism import prism_rounding_bounds

    h = np.array(h)
    data = PolyhedronData(*(lambda m: (m.vertices, m.faces))(box_mesh(h, 1)))
    rng = np.random.default_rng(13)
    d = rng.normal(size=(60, 3))
    d /= np.linalg.norm(d, axis=1)[:, None]
    pts = d * np.repeat([3.0, 10.0, 100.0, 1000.0], 15)[:, None] * np.linalg.norm(h)
    U, g = polyhedron_field(pts, data, 1.0, 1.0)
    Up, gp = prism_field(pts, h, 1.0, 1.0)
    eU, eg, _ = polyhedron_rounding_bounds(pts, data, 1.0, 1.0)
    eUp, egp, _ = prism_rounding_bounds(pts, h, 1.0, 1.0)
    assert np.all(np.abs(U - Up) <= eU + eUp)
    assert np.all(np.linalg.norm(g - gp, axis=1) <= eg + egp)
    assert np.all(eU < 1e-4 * np.abs(Up))      # and it is not vacuous (relative 1e-10 at 1000 sizes)


# ---------------------------------------------------------------------------------------------
# rigorous rounding bounds of a large mesh (more than 400 edges + faces) at many points
# ---------------------------------------------------------------------------------------------

R_TURN = np.array([[0.36, 0.48, -0.8], [-0.8, 0.6, 0.0], [0.48, 0.64, 0.6]])     # a rotation (3-4-5 rows)


def probe_points(data, rng, n_face=5, n_edge=5, n_vertex=4):
    """Local points near faces (both sides), near edges and near vertices, 1e-9 to 1e-2 of the size
    away (the offsets seeded), and far away (100 to 1000 sizes)."""
    v, f = data.vertices, data.faces
    centre = v.mean(axis=0)
    size = np.linalg.norm(v - centre, axis=1).max()
    pts = []
    for k in rng.choice(len(f), n_face, replace=False):
        sign = rng.choice([-1.0, 1.0])
        pts.append(v[f[k]].mean(axis=0) + sign * size * 10 ** rng.uniform(-9, -2) * data.face_normals[k])
    for k in rng.choice(len(data.edges), n_edge, replace=False):
        mid = v[data.edges[k]].mean(axis=0)
        out = (mid - centre) / np.linalg.norm(mid - centre)
        pts.append(mid + size * 10 ** rng.uniform(-9, -2) * out)
    for k in rng.choice(len(v), n_vertex, replace=False):
        pts.append(v[k] + size * 10 ** rng.uniform(-9, -2) * (v[k] - centre) / np.linalg.norm(v[k] - centre))
    u = rng.normal(size=(4, 3))
    pts.extend(centre + u / np.linalg.norm(u, axis=1)[:, None] * size * np.array([100, 200, 500, 1000])[:, None])
    return np.array(pts)


def large_meshes():
    from scene_fixtures import symmetric_tube

    ico = trimesh.creation.icosphere(subdivisions=2, radius=0.05)
    tube = symmetric_tube(0.03, 0.05, 0.02)
    return {
        # 320 faces + 480 edges; the centre and the plane z = 0 (icosahedral symmetry) as cancelling points
        "icosphere": (ico.vertices, ico.faces, [[0.0, 0.0, 0.0], [0.07, -0.02, 0.0]]),
        # 384 faces + 288 edges; the centre of its hole (the field vanishes exactly there), a point on
        # its axis and one in its mid-plane inside the hole (two components cancel)
        "tube": (*tube, [[0.0, 0.0, 0.0], [0.0, 0.0, 0.011], [0.012, -0.007, 0.0]]),
    }


@pytest.mark.parametrize("name", ["icosphere", "tube"])
def test_stated_errors_bound_the_true_errors_of_a_large_mesh_at_many_points(name):
    # Reference: the Werner-Scheeres closed form at 40 digits in mpmath (engine_references.PolyhedronMP,
    # itself equal to the prism corner sums for a box; its frame change in mpmath, placed_field_mp).
    # The engine's node values for the surface quadrature (field_with_differences, all points in one
    # call) and the field verb's values (group_field_at_points, gradient included) must carry errors
    # that bound the true ones at every point, and not be vacuous.
    from engine_references import PolyhedronMP, body, placed_field_mp

    from truepull.geometry.shapes import MeshShape
    from truepull.integrate.field_at_points import group_field_at_points
    from truepull.integrate.sources import SourceField

    v, f, cancelling = large_meshes()[name]
    data = PolyhedronData(v, f)
    assert len(data.faces) + len(data.edges) > 400
    local = np.vstack([probe_points(data, np.random.default_rng(sum(map(ord, name)))), cancelling])
    src = body("mesh", MeshShape(data.vertices, data.faces, name), (0.11, -0.23, 0.05), R_TURN,
               density=RHO)
    world = local @ R_TURN.T + src.placement.translation
    U, g, dU, dg, rU, rg = SourceField(src, G).field_with_differences(world)
    assert not np.any(dU) and not np.any(dg)
    pf = group_field_at_points([src], world, G)
    ref = PolyhedronMP(data.vertices, data.faces)
    size = np.linalg.norm(data.vertices, axis=1).max()
    scale_g = G * RHO * size                      # the field's interior scale, where it cancels
    worst = 0.0
    for i, p in enumerate(world):
        Ur, gr, Tr = placed_field_mp(lambda q: ref.field(q, RHO, G), src.placement, p)
        tU = abs(float(Ur - U[i]))
        tg = np.linalg.norm([float(gr[k] - g[i, k]) for k in range(3)])
        tT = np.linalg.norm([[float(Tr[k, m] - pf.T[i, k, m]) for m in range(3)] for k in range(3)])
        where = f"{name} point {i} {local[i].tolist()}"
        assert rU[i] >= tU and pf.err_U[i] >= tU, f"potential at {where}: {rU[i]:.3g} < {tU:.3g}"
        assert rg[i] >= tg and pf.err_g[i] >= tg, f"field at {where}: {rg[i]:.3g} < {tg:.3g}"
        assert pf.err_T[i] >= tT, f"gradient at {where}: {pf.err_T[i]:.3g} < {tT:.3g}"
        # not vacuous (our rule): below 1e6 eps (2.2e-10) of the value times 1 + (d / size)^2 (the sums
        # cancel like (d / size)^2 far away; Werner and Scheeres 1997), the field's interior scale
        # G rho size added where it cancels; measured up to 3e4 eps for U and 2e5 eps for g
        d = np.linalg.norm(local[i] - data.vertices.mean(axis=0)) / size
        cond = 1.0 + d * d
        assert rU[i] <= 1e6 * EPS * cond * abs(U[i]), f"potential bound at {where} is loose"
        assert rg[i] <= 1e6 * EPS * cond * (np.linalg.norm(g[i]) + scale_g), f"field bound at {where}"
        worst = max(worst, rg[i] / max(tg, EPS * np.linalg.norm(g[i])))
    print(f"{name}: {len(world)} points, worst stated / max(true, eps |g|) = {worst:.3g}")


def test_bounds_kernel_agrees_with_the_numpy_version():
    # The numba pass (_bounds_kernel) and the vectorised numpy version of the same bound sizes
    # (_rounding_sizes_numpy) agree to rounding off the surface, and the field sums of the pass equal
    # polyhedron_field's; on vertices, edges and faces, where the sizes are quotients of rounding
    # noise, the final bounds agree within a factor 2 (both enormous for the gradient on an edge).
    from truepull.integrate import field_polyhedron as fp

    v, f, _ = large_meshes()["icosphere"]
    data = PolyhedronData(v, f)
    off = np.random.default_rng(21).uniform(-0.12, 0.12, size=(61, 3))
    on = np.vstack([v[:3], v[f[:3]].mean(axis=1), v[data.edges[:3]].mean(axis=1)])
    for pts, rtol in ((off, 1e-12), (on, None)):
        delta = fp._delta(pts, data, 0.0) * np.ones(len(pts))
        out = fp._bounds_kernel(pts, *data._kernel_arrays, data._chunk, *data._bound_arrays, 2 * delta)
        ref = fp._rounding_sizes_numpy(pts, data)
        if rtol is not None:
            np.testing.assert_allclose(out[:, 4:], ref, rtol=rtol)
            U, g = polyhedron_field(pts, data, 1.0, 1.0)
            np.testing.assert_allclose(-0.5 * out[:, 0], U, rtol=1e-14)
            np.testing.assert_allclose(out[:, 1:4], g, rtol=1e-13, atol=1e-15 * np.abs(g).max())
        else:
            mine = fp._finish_bounds(pts, data, out[:, 4:], delta, 1.0)
            theirs = fp._finish_bounds(pts, data, ref, delta, 1.0)
            for a, b in zip(mine, theirs):
                assert np.all((a <= 2 * b) & (b <= 2 * a))
