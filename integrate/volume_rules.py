"""Volume quadrature over a placed body in its natural coordinates: world nodes and mass weights.

Each shape is the image of the unit cube u in [0, 1]^3 (a mesh: of one cube per tetrahedron,
apex at the vertex mean, by the collapsed (Duffy) map), with a polynomial or trigonometric
Jacobian. Straight directions use Gauss-Legendre; the azimuth of bodies of revolution and
ellipsoids uses the periodic trapezoid rule, exact for trigonometric polynomials of degree < n.
`polynomial_orders(kind, degree)` gives rules that integrate every polynomial of the given total
degree in the world coordinates exactly (up to rounding); larger orders converge spectrally for
smooth integrands (the volume is a smooth image of the cube).

Nodes in metres (world), weights in kg (density times volume element), so sum(weights) = mass.
"""

from __future__ import annotations

import math

import numpy as np

from truepull.integrate.gauss import gauss_unit

TWO_PI = 2.0 * math.pi

# which directions of the unit cube are periodic (azimuth), by shape
PERIODIC = {"box": (False, False, False), "cylinder": (False, True, False), "cone": (False, True, False),
            "ellipsoid": (False, True, False), "tetra": (False, False, False)}


def _rule(n: int, periodic: bool):
    if periodic:
        x = (np.arange(n) + 0.5) / n
        return x, np.full(n, 1.0 / n)
    return gauss_unit(int(n))


def polynomial_orders(kind: str, degree: int) -> tuple[int, int, int]:
    """Points per direction that make the rule exact for world polynomials of total `degree`."""
    d = int(degree)

    def g(k):  # Gauss points exact for degree k in one variable
        return max(1, (k + 2) // 2)

    if kind == "box":
        return g(d), g(d), g(d)
    if kind == "cylinder":
        return g(d + 1), d + 1, g(d)
    if kind == "cone":
        return g(d + 1), d + 1, g(d + 2)
    if kind == "ellipsoid":
        # r: degree d + 2 (Jacobian r^2); azimuth exact to degree d kills the odd powers of sin(theta),
        # leaving a polynomial of degree d in cos(theta)
        return g(d + 2), d + 1, g(d)
    if kind == "tetra":
        return g(d + 2), g(d + 1), g(d)
    raise KeyError(kind)


def rule_kind(body) -> str:
    """The natural-coordinate map used for a body: box, cylinder, cone, ellipsoid or tetra (mesh)."""
    k = body.shape.kind
    if k in ("box", "cylinder", "cone", "ellipsoid"):
        return k
    if k == "mesh":
        return "tetra"
    raise KeyError(f"no volume rule for a {k} body (its moments are closed forms)")


def _tensor(orders, periodic):
    rules = [_rule(n, p) for n, p in zip(orders, periodic)]
    u1, u2, u3 = np.meshgrid(rules[0][0], rules[1][0], rules[2][0], indexing="ij")
    w = np.einsum("i,j,k->ijk", rules[0][1], rules[1][1], rules[2][1])
    return u1.ravel(), u2.ravel(), u3.ravel(), w.ravel()


def _local_nodes(shape, kind, u1, u2, u3, w):
    """Local points (N, 3) and volume weights (N,) for one primitive."""
    if kind == "box":
        s = np.asarray(shape.size, float)
        p = np.stack([(u1 - 0.5) * s[0], (u2 - 0.5) * s[1], (u3 - 0.5) * s[2]], axis=1)
        return p, w * float(np.prod(s))
    if kind == "cylinder":
        ri, ro, L = shape.inner_radius, shape.radius, shape.length
        rho = ri + u1 * (ro - ri)
        phi = TWO_PI * u2
        p = np.stack([rho * np.cos(phi), rho * np.sin(phi), (u3 - 0.5) * L], axis=1)
        return p, w * rho * (ro - ri) * TWO_PI * L
    if kind == "cone":
        R1, R2, L = shape.radius, shape.radius_top, shape.length
        Rz = R1 + (R2 - R1) * u3
        rho = u1 * Rz
        phi = TWO_PI * u2
        p = np.stack([rho * np.cos(phi), rho * np.sin(phi), (u3 - 0.5) * L], axis=1)
        return p, w * u1 * Rz * Rz * TWO_PI * L
    if kind == "ellipsoid":
        a, b, c = shape.radii
        r = u1
        ct = 2.0 * u3 - 1.0
        st = np.sqrt(np.maximum(0.0, 1.0 - ct * ct))
        phi = TWO_PI * u2
        p = np.stack([a * r * st * np.cos(phi), b * r * st * np.sin(phi), c * r * ct], axis=1)
        return p, w * r * r * 2.0 * TWO_PI * a * b * c
    raise KeyError(kind)


def _tetra_nodes(shape, u1, u2, u3, w):
    """Local nodes and signed volume weights over the tetrahedra (apex, face) of a closed mesh."""
    tri = np.asarray(shape.triangles(), float)  # (F, 3, 3)
    o = np.asarray(shape.vertices, float).mean(axis=0)
    a, b, c = tri[:, 0] - o, tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 1]
    det = np.einsum("fi,fi->f", a, np.cross(b, c))  # 6 x signed volume
    # x = o + u1 [a + u2 (b + u3 c)], Jacobian det * u1^2 u2
    inner = b[:, None, :] + u3[None, :, None] * c[:, None, :]
    p = o + u1[None, :, None] * (a[:, None, :] + u2[None, :, None] * inner)
    wt = det[:, None] * (u1 * u1 * u2 * w)[None, :]
    return p.reshape(-1, 3), wt.reshape(-1)


def body_nodes(body, orders) -> tuple[np.ndarray, np.ndarray]:
    """World nodes (N, 3) m and mass weights (N,) kg for a body with `orders` points per direction."""
    kind = rule_kind(body)
    u1, u2, u3, w = _tensor(orders, PERIODIC[kind])
    if kind == "tetra":
        p, vol = _tetra_nodes(body.shape, u1, u2, u3, w)
    else:
        p, vol = _local_nodes(body.shape, kind, u1, u2, u3, w)
    return body.placement.apply(p), body.density * vol


def node_count(body, orders) -> int:
    n = int(np.prod(orders))
    if rule_kind(body) == "tetra":
        n *= len(body.shape.faces)
    return n
