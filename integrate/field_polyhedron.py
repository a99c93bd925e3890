"""Gravity of a homogeneous closed polyhedron (any watertight, outward-wound triangle mesh), after
Werner and Scheeres (1997, Celest. Mech. Dyn. Astron. 65:313), SI units.

Sign convention: U = -G rho * integral dV'/|x - x'| (J/kg), g = -grad U (m/s^2, toward the mass),
T_ij = d g_i / d x_j (1/s^2). With r_e, r_f vectors from the field point to any point of edge e or
face f:
    U = -(G rho / 2) (sum_e r_e.E_e.r_e L_e - sum_f r_f.F_f.r_f omega_f)
    g = -G rho sum_e E_e.r_e L_e + G rho sum_f F_f.r_f omega_f
    T =  G rho sum_e E_e L_e     - G rho sum_f F_f omega_f          (trace = -G rho sum omega)
with face dyads F_f = n_f n_f^T, edge dyads E_e = n_A n_A12^T + n_B n_B21^T (face normals times the
outward in-plane edge normals of the two faces that share the edge), the edge factor
L_e = ln((a + b + e)/(a + b - e)) and the signed solid angle omega_f of face f seen from the point
(Van Oosterom and Strackee 1983, with the exact triple product 2 A_f n_f.r_f).

Robust evaluation: a + b - e is computed as 2 (a b + r_a.r_b)/(a + b + e), with a b + r_a.r_b
written as |r_a x r_b|^2/(a b - r_a.r_b) when r_a.r_b < 0, so it keeps full relative precision next
to an edge; on an edge or vertex the vanishing coefficient wins (x ln x) and the term is dropped;
in the plane of a face the face term has a zero coefficient. U and g are thus finite and continuous
everywhere. T jumps across faces (on a face the mean of both sides is returned) and diverges
logarithmically on edges (returned as not finite there).

The sums cancel for far points: the result keeps roughly 16 - 2 log10(distance / size) digits
(measured in the tests). `polyhedron_field_and_bounds` returns the field with a rigorous bound on its
rounding (cancellation included) from one numba pass over faces and edges, 1.05-1.9 times the cost of
the field alone (tests/benchmarks/bench_field_polyhedron.py); the kernels sum the faces and then the
edges in chunks of about sqrt(faces + edges) terms, so that the sums' rounding is bounded by about
2 sqrt(faces + edges) ulps of the sum of |terms| (`_summation_ulps`).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numba import njit, prange

from truepull.geometry.errors import InputError
from truepull.integrate.vector_math import atan2_fast, log1p_fast

_BLOCK = 16     # points per parallel work item; the inner loops vectorise over them
_FAST = {"reassoc", "contract"}     # let sums over faces and edges vectorise; no unsafe-math flags
TERM_ULPS = 64.0
"""Rounding of one face or edge term, in ulps of its size (a few operations, an atan2 or log1p of a few
ulps and the vectors' rounding, with a margin); the sums' rounding is added (`_summation_ulps`)."""


@dataclass(frozen=True, eq=False)
class PolyhedronData:
    """Geometry of a closed outward-wound triangle mesh prepared once for the field kernels.

    vertices (V,3) m and faces (F,3) vertex indices are the input; the rest is derived:
    face_normals (F,3) unit outward normals, face_area_normals (F,3) = (v1-v0) x (v2-v0),
    face_dyads (F,3,3), edges (E,2) unique vertex pairs (except those
    between coplanar triangles, whose terms vanish), edge_lengths (E,), edge_dyads (E,3,3),
    volume (m^3)."""

    vertices: np.ndarray
    faces: np.ndarray
    face_normals: np.ndarray
    face_area_normals: np.ndarray
    face_dyads: np.ndarray
    edges: np.ndarray
    edge_lengths: np.ndarray
    edge_dyads: np.ndarray
    volume: float

    def __init__(self, vertices, faces, source: str | None = None, key: str = "mesh"):
        v = np.ascontiguousarray(vertices, dtype=np.float64)
        f = np.asarray(faces)
        if v.ndim != 2 or v.shape[1] != 3 or v.shape[0] < 4:
            raise InputError(source, key, f"a mesh needs an (V, 3) array of at least 4 vertices, "
                                          f"got shape {v.shape}")
        if not np.all(np.isfinite(v)):
            raise InputError(source, key, "the mesh has vertices that are not finite numbers")
        if f.ndim != 2 or f.shape[1] != 3 or f.shape[0] < 4:
            raise InputError(source, key, f"a mesh needs an (F, 3) array of at least 4 triangles, "
                                          f"got shape {f.shape}")
        if not np.issubdtype(f.dtype, np.integer):
            if not np.all(f == np.round(f)):
                raise InputError(source, key, "face vertex indices must be whole numbers")
        f = np.ascontiguousarray(f, dtype=np.int64)
        if f.min() < 0 or f.max() >= v.shape[0]:
            raise InputError(source, key, "a face refers to a vertex that does not exist")

        area_normals = np.cross(v[f[:, 1]] - v[f[:, 0]], v[f[:, 2]] - v[f[:, 0]])
        twice_area = np.linalg.norm(area_normals, axis=1)
        if np.any(twice_area <= 0.0):
            bad = int(np.argmax(twice_area <= 0.0))
            raise InputError(source, key, f"triangle {bad} has zero area (degenerate face)")
        normals = area_normals / twice_area[:, None]

        # Directed half-edges; each undirected edge must appear once in each direction.
        half = np.concatenate([f[:, [0, 1]], f[:, [1, 2]], f[:, [2, 0]]])      # (3F, 2)
        owner = np.concatenate([np.arange(f.shape[0])] * 3)
        n_vert = v.shape[0]
        directed = half[:, 0] * n_vert + half[:, 1]
        if np.unique(directed).shape[0] != directed.shape[0]:
            raise InputError(source, key, "the mesh is not consistently wound or not a closed "
                                          "surface (an edge is used twice in the same direction)")
        lo = np.minimum(half[:, 0], half[:, 1])
        hi = np.maximum(half[:, 0], half[:, 1])
        undirected = lo * n_vert + hi
        order = np.argsort(undirected, kind="stable")
        und_sorted = undirected[order]
        counts = np.unique(und_sorted, return_counts=True)[1]
        if np.any(counts != 2):
            raise InputError(source, key, "the mesh is not watertight: every edge must be shared "
                                          "by exactly two triangles (merge duplicate vertices first)")
        first = order[0::2]
        second = order[1::2]
        # Orient each edge as traversed in its first face (face A); face B traverses it backwards.
        a_idx = half[first, 0]
        b_idx = half[first, 1]
        face_a = owner[first]
        face_b = owner[second]
        d = v[b_idx] - v[a_idx]
        length = np.linalg.norm(d, axis=1)
        unit = d / length[:, None]
        nA = normals[face_a]
        nB = normals[face_b]
        edge_normal_a = np.cross(unit, nA)          # in face A's plane, pointing out of face A
        edge_normal_b = np.cross(-unit, nB)         # in face B's plane, pointing out of face B
        edge_dyads = nA[:, :, None] * edge_normal_a[:, None, :] + \
            nB[:, :, None] * edge_normal_b[:, None, :]

        # an edge between two coplanar triangles has a zero dyad (n_A12 = -n_B21): in exact arithmetic
        # it adds nothing anywhere, and on its line 0 * inf would spoil the gradient, so it is dropped
        keep = np.linalg.norm(edge_dyads.reshape(-1, 9), axis=1) > 1e-14
        a_idx, b_idx, length, edge_dyads = a_idx[keep], b_idx[keep], length[keep], edge_dyads[keep]

        volume = float(np.einsum("ij,ij->", v[f[:, 0]], area_normals) / 6.0)
        scale = np.abs(v).max() ** 3
        if volume <= 1e-12 * scale:
            raise InputError(source, key, "the mesh encloses no positive volume: its triangles must "
                                          "be wound counter-clockwise seen from outside")

        object.__setattr__(self, "vertices", v)
        object.__setattr__(self, "faces", f)
        object.__setattr__(self, "face_normals", np.ascontiguousarray(normals))
        object.__setattr__(self, "face_area_normals", np.ascontiguousarray(area_normals))
        object.__setattr__(self, "face_dyads", normals[:, :, None] * normals[:, None, :])
        object.__setattr__(self, "edges", np.ascontiguousarray(np.stack([a_idx, b_idx], axis=1)))
        object.__setattr__(self, "edge_lengths", np.ascontiguousarray(length))
        object.__setattr__(self, "edge_dyads", np.ascontiguousarray(edge_dyads))
        object.__setattr__(self, "volume", volume)
        for name in ("vertices", "faces", "face_normals", "face_area_normals", "face_dyads",
                     "edges", "edge_lengths", "edge_dyads"):
            getattr(self, name).setflags(write=False)
        # structure-of-arrays copies for the vectorised kernels
        c = np.ascontiguousarray
        object.__setattr__(self, "_kernel_arrays", (
            c(v[:, 0]), c(v[:, 1]), c(v[:, 2]), c(f[:, 0]), c(f[:, 1]), c(f[:, 2]),
            c(normals.T), c(area_normals.T), c(a_idx), c(b_idx), c(length),
            c(edge_dyads.reshape(-1, 9).T)))
        sides = np.stack([np.linalg.norm(v[f[:, (k + 1) % 3]] - v[f[:, k]], axis=1) for k in range(3)])
        object.__setattr__(self, "_bound_arrays", (
            c(1.0 / sides), c(np.linalg.norm(edge_dyads.reshape(-1, 9), axis=1))))
        # terms per summation chunk: sqrt(F + E) keeps chunk length + number of chunks least
        object.__setattr__(self, "_chunk", max(1, int(np.ceil(np.sqrt(f.shape[0] + a_idx.shape[0])))))


@njit(cache=True, inline="always", error_model="numpy")
def _edge_factor(ax, ay, az, a, bx, by, bz, b, e):
    """L = ln((a + b + e)/(a + b - e)) for an edge of length e whose ends are at r_a, r_b (lengths
    a, b) from the point; +inf on the edge itself. With q = a b + r_a.r_b, a + b - e = 2 q/(a + b + e)
    and the ratio is 1 + e (a + b + e)/q, taken by log1p so that L keeps full relative precision
    when it is small (far points). Branch-free, so that loops over edges vectorise."""
    dot = ax * bx + ay * by + az * bz
    cx = ay * bz - az * by
    cy = az * bx - ax * bz
    cz = ax * by - ay * bx
    # q = a b + dot, or |r_a x r_b|^2 / (a b - dot) without cancellation when dot < 0
    pos = dot >= 0.0
    num = e * (a + b + e) * (1.0 if pos else a * b - dot)
    den = a * b + dot if pos else cx * cx + cy * cy + cz * cz
    x = num / den if den > 0.0 else 0.0
    L = log1p_fast(x)
    return L if den > 0.0 else np.inf


@njit(cache=True, inline="always", error_model="numpy")
def _face_angle(ax, ay, az, a, bx, by, bz, b, cx, cy, cz, c, triple):
    """Signed solid angle of a triangle (corners r_a, r_b, r_c from the point, lengths a, b, c),
    positive when the point is on the inner side; zero in the face's plane (Van Oosterom and
    Strackee 1983)."""
    den = (a * b * c + (ax * bx + ay * by + az * bz) * c
           + (ax * cx + ay * cy + az * cz) * b + (bx * cx + by * cy + bz * cz) * a)
    om = 2.0 * atan2_fast(triple, den)
    return om if triple != 0.0 else 0.0


@njit(cache=True, inline="always", error_model="numpy", fastmath=_FAST)
def _load_block(points, c, vx, vy, vz, px, py, pz, rn):
    """Points c*_BLOCK ... of block c (the last point repeated to fill it) and their distances to
    every vertex, rn[vertex, j]."""
    n = points.shape[0]
    for j in range(_BLOCK):
        i = min(c * _BLOCK + j, n - 1)
        px[j] = points[i, 0]
        py[j] = points[i, 1]
        pz[j] = points[i, 2]
    for k in range(vx.shape[0]):
        for j in range(_BLOCK):
            x = vx[k] - px[j]
            y = vy[k] - py[j]
            z = vz[k] - pz[j]
            rn[k, j] = np.sqrt(x * x + y * y + z * z)


@njit(cache=True, inline="always", error_model="numpy", fastmath=_FAST)
def _block_face_angles(f, fa, fb, fc, vx, vy, vz, fan, px, py, pz, rn, om):
    """om[j] = signed solid angle of face f seen from point j of the block."""
    ia = fa[f]
    ib = fb[f]
    ic = fc[f]
    Nx = fan[0, f]
    Ny = fan[1, f]
    Nz = fan[2, f]
    for j in range(_BLOCK):
        ax = vx[ia] - px[j]
        ay = vy[ia] - py[j]
        az = vz[ia] - pz[j]
        triple = ax * Nx + ay * Ny + az * Nz
        om[j] = _face_angle(ax, ay, az, rn[ia, j], vx[ib] - px[j], vy[ib] - py[j], vz[ib] - pz[j],
                            rn[ib, j], vx[ic] - px[j], vy[ic] - py[j], vz[ic] - pz[j], rn[ic, j], triple)


@njit(cache=True, inline="always", error_model="numpy", fastmath=_FAST)
def _block_edge_factors(e, ea, eb, vx, vy, vz, elen, px, py, pz, rn, L):
    """L[j] = edge factor of edge e seen from point j of the block (inf on the edge's line)."""
    ia = ea[e]
    ib = eb[e]
    le = elen[e]
    for j in range(_BLOCK):
        L[j] = _edge_factor(vx[ia] - px[j], vy[ia] - py[j], vz[ia] - pz[j], rn[ia, j],
                            vx[ib] - px[j], vy[ib] - py[j], vz[ib] - pz[j], rn[ib, j], le)


@njit(cache=True, inline="always", error_model="numpy", fastmath=_FAST)
def _add_part(part, pot, gx, gy, gz):
    """Adds one chunk's partial sums (part[0] potential, part[1:4] field) to the block's totals."""
    for j in range(_BLOCK):
        pot[j] += part[0, j]
        gx[j] += part[1, j]
        gy[j] += part[2, j]
        gz[j] += part[3, j]


@njit(cache=True, parallel=True, error_model="numpy", fastmath=_FAST)
def _field_kernel(points, vx, vy, vz, fa, fb, fc, fn, fan, ea, eb, elen, ed, chunk):
    """Sums S_U = sum_e r.E.r L - sum_f (n.r)^2 omega and S_g = sum_f n (n.r) omega - sum_e E r L
    at each point; fn (3,F) unit normals, fan (3,F) area normals, ed (9,E) edge dyads row-major.
    Work is split in blocks of _BLOCK points; the inner loops run over the points of a block, so
    they vectorise without gathers while each face and edge is loaded once per block. The faces and
    then the edges are summed in chunks of `chunk` terms whose partial sums are then added, which
    bounds the summation's rounding (see _summation_ulps)."""
    n = points.shape[0]
    nv = vx.shape[0]
    S_U = np.zeros(n)
    S_g = np.zeros((n, 3))
    n_blocks = (n + _BLOCK - 1) // _BLOCK
    for c in prange(n_blocks):
        px = np.empty(_BLOCK)
        py = np.empty(_BLOCK)
        pz = np.empty(_BLOCK)
        rn = np.empty((nv, _BLOCK))
        pot = np.zeros(_BLOCK)
        gx = np.zeros(_BLOCK)
        gy = np.zeros(_BLOCK)
        gz = np.zeros(_BLOCK)
        _load_block(points, c, vx, vy, vz, px, py, pz, rn)
        om = np.empty(_BLOCK)
        L = np.empty(_BLOCK)
        part = np.zeros((4, _BLOCK))
        for f0 in range(0, fa.shape[0], chunk):
            part[:] = 0.0
            for f in range(f0, min(f0 + chunk, fa.shape[0])):
                _block_face_angles(f, fa, fb, fc, vx, vy, vz, fan, px, py, pz, rn, om)
                ia = fa[f]
                nx = fn[0, f]
                ny = fn[1, f]
                nz = fn[2, f]
                for j in range(_BLOCK):
                    hn = nx * (vx[ia] - px[j]) + ny * (vy[ia] - py[j]) + nz * (vz[ia] - pz[j])
                    h = hn * om[j]
                    part[0, j] -= hn * h
                    part[1, j] += nx * h
                    part[2, j] += ny * h
                    part[3, j] += nz * h
            _add_part(part, pot, gx, gy, gz)
        for e0 in range(0, ea.shape[0], chunk):
            part[:] = 0.0
            for e in range(e0, min(e0 + chunk, ea.shape[0])):
                _block_edge_factors(e, ea, eb, vx, vy, vz, elen, px, py, pz, rn, L)
                ia = ea[e]
                # the edge dyads are symmetric (all four normals lie in the plane normal to the edge)
                d0 = ed[0, e]
                d1 = ed[1, e]
                d2 = ed[2, e]
                d4 = ed[4, e]
                d5 = ed[5, e]
                d8 = ed[8, e]
                for j in range(_BLOCK):
                    ax = vx[ia] - px[j]
                    ay = vy[ia] - py[j]
                    az = vz[ia] - pz[j]
                    Lj = L[j] if L[j] != np.inf else 0.0   # on the edge: the coefficient vanishes faster
                    ex = d0 * ax + d1 * ay + d2 * az
                    ey = d1 * ax + d4 * ay + d5 * az
                    ez = d2 * ax + d5 * ay + d8 * az
                    part[0, j] += (ax * ex + ay * ey + az * ez) * Lj
                    part[1, j] -= ex * Lj
                    part[2, j] -= ey * Lj
                    part[3, j] -= ez * Lj
            _add_part(part, pot, gx, gy, gz)
        for j in range(_BLOCK):
            i = c * _BLOCK + j
            if i < n:
                S_U[i] = pot[j]
                S_g[i, 0] = gx[j]
                S_g[i, 1] = gy[j]
                S_g[i, 2] = gz[j]
    return S_U, S_g


@njit(cache=True, parallel=True, error_model="numpy", fastmath=_FAST)
def _gradient_kernel(points, vx, vy, vz, fa, fb, fc, fn, fan, ea, eb, elen, ed, chunk):
    """S_T = sum_e E L - sum_f n n^T omega at each point, (N, 9) row-major; blocked as
    _field_kernel."""
    n = points.shape[0]
    nv = vx.shape[0]
    S_T = np.zeros((n, 9))
    n_blocks = (n + _BLOCK - 1) // _BLOCK
    for c in prange(n_blocks):
        px = np.empty(_BLOCK)
        py = np.empty(_BLOCK)
        pz = np.empty(_BLOCK)
        rn = np.empty((nv, _BLOCK))
        t = np.zeros((6, _BLOCK))
        _load_block(points, c, vx, vy, vz, px, py, pz, rn)
        om = np.empty(_BLOCK)
        L = np.empty(_BLOCK)
        part = np.zeros((6, _BLOCK))
        for f0 in range(0, fa.shape[0], chunk):
            part[:] = 0.0
            for f in range(f0, min(f0 + chunk, fa.shape[0])):
                _block_face_angles(f, fa, fb, fc, vx, vy, vz, fan, px, py, pz, rn, om)
                nx = fn[0, f]
                ny = fn[1, f]
                nz = fn[2, f]
                for j in range(_BLOCK):
                    part[0, j] -= nx * nx * om[j]
                    part[1, j] -= nx * ny * om[j]
                    part[2, j] -= nx * nz * om[j]
                    part[3, j] -= ny * ny * om[j]
                    part[4, j] -= ny * nz * om[j]
                    part[5, j] -= nz * nz * om[j]
            t += part
        for e0 in range(0, ea.shape[0], chunk):
            part[:] = 0.0
            for e in range(e0, min(e0 + chunk, ea.shape[0])):
                _block_edge_factors(e, ea, eb, vx, vy, vz, elen, px, py, pz, rn, L)
                d0 = ed[0, e]
                d1 = ed[1, e]
                d2 = ed[2, e]
                d4 = ed[4, e]
                d5 = ed[5, e]
                d8 = ed[8, e]
                for j in range(_BLOCK):
                    part[0, j] += d0 * L[j]
                    part[1, j] += d1 * L[j]
                    part[2, j] += d2 * L[j]
                    part[3, j] += d4 * L[j]
                    part[4, j] += d5 * L[j]
                    part[5, j] += d8 * L[j]
            t += part
        for j in range(_BLOCK):
            i = c * _BLOCK + j
            if i < n:
                S_T[i, 0] = t[0, j]
                S_T[i, 1] = t[1, j]
                S_T[i, 2] = t[2, j]
                S_T[i, 3] = t[1, j]
                S_T[i, 4] = t[3, j]
                S_T[i, 5] = t[4, j]
                S_T[i, 6] = t[2, j]
                S_T[i, 7] = t[4, j]
                S_T[i, 8] = t[5, j]
    return S_T


@njit(cache=True, parallel=True, error_model="numpy", fastmath=_FAST)
def _bounds_kernel(points, vx, vy, vz, fa, fb, fc, fn, fan, ea, eb, elen, ed, chunk, inv_side, enorm,
                   tol):
    """The sums of _field_kernel (same terms, same chunks) and, in the same pass, the sizes that bound
    their rounding (see polyhedron_rounding_bounds), (N, 11): [S_U, S_g (3), sU, sg, sT (sums of
    |terms|), dU, dg, dT (sums of |term gradients|), near (1 within tol (N,) of a face's triangle)].
    inv_side (3,F): inverse lengths of the sides v0v1, v1v2, v2v0; enorm (E,): |E| (Frobenius)."""
    n = points.shape[0]
    nv = vx.shape[0]
    nf = fa.shape[0]
    ne = ea.shape[0]
    out = np.zeros((n, 11))
    n_blocks = (n + _BLOCK - 1) // _BLOCK
    for c in prange(n_blocks):
        px = np.empty(_BLOCK)
        py = np.empty(_BLOCK)
        pz = np.empty(_BLOCK)
        tl = np.empty(_BLOCK)
        rn = np.empty((nv, _BLOCK))
        _load_block(points, c, vx, vy, vz, px, py, pz, rn)
        for j in range(_BLOCK):
            tl[j] = tol[min(c * _BLOCK + j, n - 1)]
        pot = np.zeros(_BLOCK)
        gx = np.zeros(_BLOCK)
        gy = np.zeros(_BLOCK)
        gz = np.zeros(_BLOCK)
        acc = np.zeros((7, _BLOCK))
        part = np.zeros((4, _BLOCK))
        for f0 in range(0, nf, chunk):
            part[:] = 0.0
            for f in range(f0, min(f0 + chunk, nf)):
                ia = fa[f]
                ib = fb[f]
                ic = fc[f]
                Nx = fan[0, f]
                Ny = fan[1, f]
                Nz = fan[2, f]
                nx = fn[0, f]
                ny = fn[1, f]
                nz = fn[2, f]
                i0 = inv_side[0, f]
                i1 = inv_side[1, f]
                i2 = inv_side[2, f]
                for j in range(_BLOCK):
                    ax = vx[ia] - px[j]
                    ay = vy[ia] - py[j]
                    az = vz[ia] - pz[j]
                    bx = vx[ib] - px[j]
                    by = vy[ib] - py[j]
                    bz = vz[ib] - pz[j]
                    cx = vx[ic] - px[j]
                    cy = vy[ic] - py[j]
                    cz = vz[ic] - pz[j]
                    a = rn[ia, j]
                    b = rn[ib, j]
                    cc = rn[ic, j]
                    triple = ax * Nx + ay * Ny + az * Nz
                    om = _face_angle(ax, ay, az, a, bx, by, bz, b, cx, cy, cz, cc, triple)
                    hs = nx * ax + ny * ay + nz * az
                    h = hs * om
                    part[0, j] -= hs * h
                    part[1, j] += nx * h
                    part[2, j] += ny * h
                    part[3, j] += nz * h
                    # the bound's sizes (as _solid_angle_sizes and polyhedron_rounding_bounds)
                    ab = ax * bx + ay * by + az * bz
                    ac = ax * cx + ay * cy + az * cz
                    bc = bx * cx + by * cy + bz * cz
                    abc = a * b * cc
                    den = abc + ab * cc + ac * b + bc * a
                    dsum = abc + abs(ab) * cc + abs(ac) * b + abs(bc) * a
                    hn = abs(hs)
                    on = hn > 0.0
                    oma = abs(om) if on else 0.0
                    cond = 2.0 * abs(triple) * dsum / (triple * triple + den * den) if triple != 0.0 else 0.0
                    omr = oma + cond if on else 0.0
                    # r_a x r_b, r_b x r_c, r_c x r_a: |.| / side = distance to the side's line
                    k1x = ay * bz - az * by
                    k1y = az * bx - ax * bz
                    k1z = ax * by - ay * bx
                    k2x = by * cz - bz * cy
                    k2y = bz * cx - bx * cz
                    k2z = bx * cy - by * cx
                    k3x = cy * az - cz * ay
                    k3y = cz * ax - cx * az
                    k3z = cx * ay - cy * ax
                    gom = (2.0 / (np.sqrt(k1x * k1x + k1y * k1y + k1z * k1z) * i0)
                           + 2.0 / (np.sqrt(k2x * k2x + k2y * k2y + k2z * k2z) * i1)
                           + 2.0 / (np.sqrt(k3x * k3x + k3y * k3y + k3z * k3z) * i2))
                    gf = gom if gom < np.inf else 0.0
                    acc[0, j] += hn * hn * omr
                    acc[1, j] += hn * omr
                    acc[2, j] += omr
                    acc[3, j] += 2.0 * hn * oma + hn * hn * gf
                    acc[4, j] += oma + hn * gf
                    acc[5, j] += gom
                    s1 = (k1x * nx + k1y * ny + k1z * nz) * i0
                    s2 = (k2x * nx + k2y * ny + k2z * nz) * i1
                    s3 = (k3x * nx + k3y * ny + k3z * nz) * i2
                    t = tl[j]
                    near = hn <= t and (min(s1, min(s2, s3)) >= -t or max(s1, max(s2, s3)) <= t)
                    acc[6, j] = 1.0 if near else acc[6, j]
            _add_part(part, pot, gx, gy, gz)
        for e0 in range(0, ne, chunk):
            part[:] = 0.0
            for e in range(e0, min(e0 + chunk, ne)):
                ia = ea[e]
                ib = eb[e]
                le = elen[e]
                d0 = ed[0, e]
                d1 = ed[1, e]
                d2 = ed[2, e]
                d4 = ed[4, e]
                d5 = ed[5, e]
                d8 = ed[8, e]
                nE = enorm[e]
                for j in range(_BLOCK):
                    ax = vx[ia] - px[j]
                    ay = vy[ia] - py[j]
                    az = vz[ia] - pz[j]
                    bx = vx[ib] - px[j]
                    by = vy[ib] - py[j]
                    bz = vz[ib] - pz[j]
                    a = rn[ia, j]
                    b = rn[ib, j]
                    Lj = _edge_factor(ax, ay, az, a, bx, by, bz, b, le)
                    fin = Lj != np.inf
                    Lc = Lj if fin else 0.0      # on the edge: the coefficient vanishes faster
                    ex = d0 * ax + d1 * ay + d2 * az
                    ey = d1 * ax + d4 * ay + d5 * az
                    ez = d2 * ax + d5 * ay + d8 * az
                    rs = ax * ex + ay * ey + az * ez
                    part[0, j] += rs * Lc
                    part[1, j] -= ex * Lc
                    part[2, j] -= ey * Lc
                    part[3, j] -= ez * Lc
                    # q = a b + r_a.r_b = (a+b+e)(a+b-e)/2 without cancellation, and
                    # |grad L| <= 2/(a+b+e) + |unit r_a + unit r_b|/(a+b-e) = 2/s + s/sqrt(2 q a b)
                    dot = ax * bx + ay * by + az * bz
                    wx = ay * bz - az * by
                    wy = az * bx - ax * bz
                    wz = ax * by - ay * bx
                    pab = a * b
                    q = pab + dot if dot >= 0.0 else (wx * wx + wy * wy + wz * wz) / (pab - dot)
                    s = a + b + le
                    gL = 2.0 / s + s / np.sqrt(2.0 * q * pab)
                    gLc = gL if fin else 0.0
                    nEr = np.sqrt(ex * ex + ey * ey + ez * ez)
                    rEr = abs(rs)
                    acc[0, j] += rEr * Lc
                    acc[1, j] += nEr * Lc
                    acc[2, j] += nE * Lj
                    acc[3, j] += nEr * Lc + rEr * gLc
                    acc[4, j] += nE * Lc + nEr * gLc
                    acc[5, j] += nE * gL
            _add_part(part, pot, gx, gy, gz)
        for j in range(_BLOCK):
            i = c * _BLOCK + j
            if i < n:
                out[i, 0] = pot[j]
                out[i, 1] = gx[j]
                out[i, 2] = gy[j]
                out[i, 3] = gz[j]
                for m in range(7):
                    out[i, 4 + m] = acc[m, j]
    return out


def _points(points):
    p = np.ascontiguousarray(points, dtype=np.float64)
    if p.ndim == 1 and p.shape[0] == 3:
        p = p.reshape(1, 3)
    if p.ndim != 2 or p.shape[1] != 3:
        raise InputError(None, "points", f"expected an (N, 3) array of positions, got {p.shape}")
    return p


def _run(kernel, points, data: PolyhedronData):
    return kernel(_points(points), *data._kernel_arrays, data._chunk)


def polyhedron_field(points, data: PolyhedronData, rho, G):
    """Potential U (N,) in J/kg and field g (N,3) in m/s^2 of the homogeneous polyhedron `data`
    of density `rho` (kg/m^3, negative for a hole), at `points` (N,3) in m in the mesh's frame."""
    pot, gsum = _run(_field_kernel, points, data)
    s = float(G) * float(rho)
    return -0.5 * s * pot, s * gsum


def polyhedron_gradient(points, data: PolyhedronData, rho, G):
    """Gradient tensor T (N,3,3) in 1/s^2, T_ij = d g_i / d x_j, of the polyhedron `data`:
    trace 0 outside, -4 pi G rho inside, the mean of both sides on a face, not finite on edges."""
    tsum = _run(_gradient_kernel, points, data)
    return float(G) * float(rho) * tsum.reshape(-1, 3, 3)


def _summation_ulps(data: PolyhedronData) -> float:
    """Bound, in units of eps times the sum of |terms|, on the rounding of the kernels' sums: the faces
    and then the edges are summed in chunks of K terms (K - 1 additions each) whose m partial sums
    are added to the total, so each term meets at most K - 1 + m roundings of u = eps/2
    (Higham, Accuracy and Stability of Numerical Algorithms, 2nd ed., 2002, sec. 4.2: the error of
    a recursive sum is at most gamma_(n-1) times the sum of |terms|)."""
    K = data._chunk
    m = -(-len(data.faces) // K) + -(-len(data.edges) // K)
    k = K - 1 + m
    u = 0.5 * np.finfo(float).eps
    return (k * u / (1.0 - k * u)) / np.finfo(float).eps


def _delta(p, data, position_error):
    """How far each vector from the point to a vertex may be off by rounding (m), the point's own
    rounding `position_error` included."""
    eps = np.finfo(float).eps
    return eps * (np.abs(p).max(axis=1) + np.abs(data.vertices).max()) + position_error


def polyhedron_field_and_bounds(points, data: PolyhedronData, rho, G, position_error=0.0):
    """(U (N,) J/kg, g (N,3) m/s^2, eU, eg, eT (N,)) at `points` (N,3), mesh frame: the field of
    `polyhedron_field` and the rigorous rounding bounds of `polyhedron_rounding_bounds` (on these
    U, g and on `polyhedron_gradient`'s T), from one numba pass over the faces and edges."""
    from truepull.integrate.threads import kernel_threads

    p = _points(points)
    delta = _delta(p, data, position_error) * np.ones(len(p))
    with kernel_threads(len(p) * (len(data.faces) + len(data.edges)) // 100):
        out = _bounds_kernel(p, *data._kernel_arrays, data._chunk, *data._bound_arrays, 2.0 * delta)
    s = float(G) * float(rho)
    eU, eg, eT = _finish_bounds(p, data, out[:, 4:], delta, abs(s))
    return -0.5 * s * out[:, 0], s * out[:, 1:4], eU, eg, eT


def polyhedron_rounding_bounds(points, data: PolyhedronData, rho, G, position_error=0.0):
    """Absolute error bounds (eU (N,) J/kg, eg (N,) m/s^2 as a vector norm, eT (N,) 1/s^2 as a
    Frobenius norm) of `polyhedron_field` and `polyhedron_gradient` at `points` (N,3), mesh frame.

    Condition-number bounds over the Werner-Scheeres sums, so that their cancellation (far away, for
    thin bodies, or where the field cancels by symmetry) is covered: C eps times the sum over edges
    and faces of the absolute values of the terms (|r.E.r| |L|, |E r| |L|, |E| |L| and the same with
    the face dyads and |omega|; C = TERM_ULPS for each term's own rounding plus _summation_ulps for
    the sums'), plus the effect of rounding the vectors from the point to the
    vertices (delta = eps (|p| + |v|)) through each term's gradient: |grad L| <= 2/(a+b+e) +
    |unit r_a + unit r_b|/(a+b-e) and, for a face's solid angle, at most 2 / (distance to the
    edge's line) per edge (its gradient is a line integral around the face), which is where the
    gradient loses digits next to an edge. Within 2 delta of a face's plane the gradient may be on
    either side of its jump (4 pi G rho n n^T), so that jump is added there. One numba pass over
    points x (faces + edges) (`_bounds_kernel`); `_rounding_sizes_numpy` is the same in numpy.
    `position_error` (m): how far the point itself may be off by rounding (the frame change)."""
    return polyhedron_field_and_bounds(points, data, rho, G, position_error)[2:]


def _finish_bounds(p, data, sizes, delta, s):
    """(eU, eg, eT) from the per-point sizes (N, 7) [sU, sg, sT, dU, dg, dT, near] of the terms."""
    eps = np.finfo(float).eps
    C = TERM_ULPS + _summation_ulps(data)
    sU, sg, sT, dU, dg, dT, near = sizes.T
    v = data.vertices
    # Far from the mesh the vectors to the vertices round like a consistent move of the vertices
    # by delta (each vector is formed once per vertex), so their effect is at most that of a
    # surface layer of thickness 2 delta (the second delta for the face planes' offsets taken from
    # one vertex each): G rho A 2 delta / d^k, far below the term-by-term sum there.
    centre = v.mean(axis=0)
    radius = np.linalg.norm(v - centre, axis=1).max()
    area = 0.5 * np.linalg.norm(data.face_area_normals, axis=1).sum()
    dmin = np.linalg.norm(p - centre, axis=1) - radius
    far = dmin > radius
    dm = np.where(far, dmin, 1.0)
    with np.errstate(invalid="ignore"):
        dU = np.where(far, np.minimum(0.5 * dU, 4.0 * area / dm), 0.5 * dU)
        dg = np.where(far, np.minimum(dg, 4.0 * area / dm ** 2), dg)
        dT = np.where(far, np.minimum(dT, 12.0 * area / dm ** 3), dT)
        eU = s * (C * eps * 0.5 * sU + 2.0 * delta * dU)
        eg = s * (C * eps * sg + 2.0 * delta * dg)
        eT = s * (C * eps * sT + 2.0 * delta * dT)
    # within 2 delta of a face (on the triangle, not elsewhere in its plane) T may be on either side
    eT = eT + s * 2.0 * np.pi * (near > 0)
    return eU, eg, eT


def _solid_angle_sizes(v, f, area_normals, p):
    """(|omega|, its sensitivity) (N, F) of each triangle seen from each point (Van Oosterom and
    Strackee 1983); the sensitivity to rounding is: the atan2 of (triple, den) moves by at most
    |triple| * (sum of |den terms|) / (triple^2 + den^2) per unit relative error of den."""
    ra = v[f[:, 0]][None] - p[:, None]
    rb = v[f[:, 1]][None] - p[:, None]
    rc = v[f[:, 2]][None] - p[:, None]
    a = np.linalg.norm(ra, axis=2)
    b = np.linalg.norm(rb, axis=2)
    c = np.linalg.norm(rc, axis=2)
    ab = np.einsum("nfk,nfk->nf", ra, rb)
    ac = np.einsum("nfk,nfk->nf", ra, rc)
    bc = np.einsum("nfk,nfk->nf", rb, rc)
    triple = np.einsum("nfk,fk->nf", ra, area_normals)
    den = a * b * c + ab * c + ac * b + bc * a
    dsum = a * b * c + np.abs(ab) * c + np.abs(ac) * b + np.abs(bc) * a
    with np.errstate(divide="ignore", invalid="ignore"):
        cond = np.where(triple != 0.0, np.abs(triple) * dsum / (triple ** 2 + den ** 2), 0.0)
    return np.abs(2.0 * np.arctan2(triple, den)), 2.0 * cond


def _rounding_sizes_numpy(points, data: PolyhedronData, position_error=0.0):
    """The per-point sizes (N, 7) [sU, sg, sT, dU, dg, dT, near] of `_bounds_kernel` in vectorised
    numpy over points x (faces + edges): the reference the kernel is tested against."""
    p = _points(points)
    v = data.vertices
    delta = _delta(p, data, position_error) * np.ones(len(p))
    # edges
    ra = v[data.edges[:, 0]][None, :, :] - p[:, None, :]          # (N, E, 3)
    rb = v[data.edges[:, 1]][None, :, :] - p[:, None, :]
    a = np.linalg.norm(ra, axis=2)
    b = np.linalg.norm(rb, axis=2)
    e = data.edge_lengths[None, :]
    dot = np.einsum("nek,nek->ne", ra, rb)
    cr2 = np.einsum("nek,nek->ne", np.cross(ra, rb), np.cross(ra, rb))
    with np.errstate(divide="ignore", invalid="ignore"):
        q = np.where(dot >= 0.0, a * b + dot, cr2 / (a * b - dot))       # = (a+b+e)(a+b-e)/2
        L = np.where(q > 0, np.log1p(e * (a + b + e) / q), np.inf)
        minus = 2.0 * q / (a + b + e)                                    # a + b - e
        # |grad (a + b - e)| = |unit r_a + unit r_b| = sqrt(2 q / (a b)): small next to the edge
        gradL = 2.0 / (a + b + e) + np.where(minus > 0, np.sqrt(2.0 * q / (a * b)) / minus, np.inf)
        Er = np.einsum("eij,nej->nei", data.edge_dyads, ra)
        nEr = np.linalg.norm(Er, axis=2)
        rEr = np.abs(np.einsum("nei,nei->ne", ra, Er))
        nE = np.linalg.norm(data.edge_dyads.reshape(-1, 9), axis=1)[None, :]
        Lc = np.where(np.isfinite(L), L, 0.0)          # on the edge the coefficient wins
        gradLc = np.where(np.isfinite(gradL), gradL, 0.0)
        sU = (rEr * Lc).sum(axis=1)
        sg = (nEr * Lc).sum(axis=1)
        sT = (nE * L).sum(axis=1)
        dU = (nEr * Lc + rEr * gradLc).sum(axis=1)
        dg = (nE * Lc + nEr * gradLc).sum(axis=1)
        dT = (nE * gradL).sum(axis=1)
        # faces: |omega| <= 2 pi, n.r exact to rounding; gradient of omega <= sum over its 3 edges
        f = data.faces
        r0 = v[f[:, 0]][None, :, :] - p[:, None, :]
        hn = np.abs(np.einsum("nfk,fk->nf", r0, data.face_normals))
        om, om_cond = _solid_angle_sizes(v, f, data.face_area_normals, p)
        om = om * (hn > 0)
        om_r = om + om_cond * (hn > 0)          # with the atan2's own rounding, for the C eps sums
        grad_om = np.zeros(hn.shape)
        edge_side_min = np.full(hn.shape, np.inf)     # signed in-plane distances of the point's projection
        edge_side_max = np.full(hn.shape, -np.inf)    # from the face's three edge lines
        for k in range(3):
            rA = v[f[:, k]][None, :, :] - p[:, None, :]
            rB = v[f[:, (k + 1) % 3]][None, :, :] - p[:, None, :]
            ln = np.linalg.norm(v[f[:, (k + 1) % 3]] - v[f[:, k]], axis=1)[None, :]
            c = np.cross(rA, rB)
            dist = np.sqrt(np.einsum("nfk,nfk->nf", c, c)) / ln
            grad_om += 2.0 / dist
            side = np.einsum("nfk,fk->nf", c, data.face_normals) / ln
            edge_side_min = np.minimum(edge_side_min, side)
            edge_side_max = np.maximum(edge_side_max, side)
        sU += (hn * hn * om_r).sum(axis=1)
        sg += (hn * om_r).sum(axis=1)
        sT += om_r.sum(axis=1)
        dU += (2.0 * hn * om + hn * hn * np.where(np.isfinite(grad_om), grad_om, 0.0)).sum(axis=1)
        dg += (om + hn * np.where(np.isfinite(grad_om), grad_om, 0.0)).sum(axis=1)
        dT += grad_om.sum(axis=1)
        tol = 2.0 * delta[:, None]
        on_triangle = (edge_side_min >= -tol) | (edge_side_max <= tol)
        near = np.any((hn <= tol) & on_triangle, axis=1)
    return np.stack([sU, sg, sT, dU, dg, dT, near.astype(float)], axis=1)
