"""The fit uncertainty of a measured form as a few independent inputs of the G budget.

A measured form (geometry/measured_form.py, geometry/measured_cylinder.py) is fitted with N
coefficients c (tens to about a hundred, metres) with the covariance C of the least squares. Stepping
each through the full model would cost 4 N engine runs, but G sees the form only through a few
numbers: the axial torque and stiffness on the pendulum at each turn the model samples, the
pendulum's moment of inertia and the body's volume (which sets its mass when the scene states the
mass). To first order each is linear in c, y = J c. With C = L L^T and the singular value
decomposition of J L (rows scaled to unit length) = U S V^T, the directions d_a = L v_a of the
nonzero S_a give c = c0 + sum_a z_a d_a, z_a independent standard normal, the same joint
distribution of y as c ~ N(c0, C): the rest of c changes none of them to first order. Each d_a is
one budget input, stated as a surface displacement (m) whose standard uncertainty is its rms over
the surface, and goes through the full model like any other input: the GUM steps it, the Monte
Carlo draws it.

J comes from layer integrals over a net through the fitted surface (the fit's `net`): a coefficient
change moves each triangle outward by n . dx (dx the mean move of its vertices, by central
differences of the net), a layer of mass rho A n . dx at the centroid, whose torque, stiffness and
inertia follow from the other group's field and gradient there (field_at_points). J only chooses the
directions; its one-point rule errs by about (triangle size / distance to the other group)^2, and the
part of the form's variance in G that falls outside the directions is at most sin^2 of the largest
principal angle between the directions' span and the true one. That angle is estimated by the one
between the directions from the net and from a net of half its resolution (scipy.linalg.subspace_angles;
the coarser net's error is about four times the finer's, so the estimate is conservative) and
stated as `lost`. The sensitivities themselves are the full model's.

Rows by method: deflection, swing and period methods sample torque curves (torque and stiffness at
each budget node of each measured position); servo the torque at the drawn pose of each position;
acceleration the torque at ACCELERATION_TURNS_PER_ORDER * m equally spaced turns (its harmonic m is
linear in them up to aliasing of the orders K m -+ m, far below it for apart bodies).
Units: SI; per unit G as the torque curves are.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

MODE_RTOL = 1e-6
"""Relative tolerance of the field used for J (it only chooses directions)."""

KEEP = 1e-7
"""Singular values below KEEP times the largest (rows scaled to unit length) carry no independent
part of the torques, stiffnesses, inertia or volume and are dropped."""

STEP_FLOOR = 1e-6
"""Smallest difference step of layer_net relative to the body's size (a noiseless fit has u ~ 1e-18 m)."""

ACCELERATION_TURNS_PER_ORDER = 8
MIN_ACCELERATION_TURNS = 16


@dataclass(frozen=True)
class FormMode:
    """One input of a measured form: the coefficient change per metre of rms surface displacement
    (`direction`, the fit's coefficient layout) and that rms for one standard deviation (`u`, m)."""

    body: str
    index: int
    direction: tuple[float, ...]
    u: float


@dataclass(frozen=True)
class BodyModes:
    """The modes of one measured body, its coefficient count, and `lost`: the estimated largest fraction of
    the form's variance in G outside the modes (module docstring)."""

    body: str
    modes: tuple[FormMode, ...]
    coefficients: int
    lost: float


@dataclass(frozen=True)
class LayerNet:
    """The coarse net of a measured body in its local frame (scaled as the body is): triangle centroids
    (T, 3) m, areas (T,) m^2, and the outward move (T, N) m of each triangle per unit change of each
    coefficient (the layer's volume per unit coefficient is area times that move)."""

    centroids: np.ndarray
    areas: np.ndarray
    moves: np.ndarray


def measured_fit(body):
    """The fit (FormFit or CylinderFit) of a measured-form body, else None."""
    form = getattr(body.shape, "form", None)
    return None if form is None else form.fit


def layer_net(fit, scale: float = 1.0, fine: bool = True) -> LayerNet:
    """The net of `fit` (fit.net(fine=fine)) and each triangle's outward move per unit coefficient, by central
    differences with steps of each coefficient's standard uncertainty, at least STEP_FLOOR of the body's size (the net is linear in the
    coefficients for a sphere and nearly so for a cylinder, whose edge heights are iterated)."""
    c0 = np.asarray(fit.coefficients, float)
    v0, faces = fit.net(c0, fine)
    tri = v0[faces]
    cross = np.cross(tri[:, 1] - tri[:, 0], tri[:, 2] - tri[:, 0])
    areas = 0.5 * np.linalg.norm(cross, axis=1)
    normals = cross / (2.0 * areas[:, None])
    floor = STEP_FLOOR * float(np.max(np.abs(v0)))             # rounding of the net's vertices sets a floor
    steps = np.maximum(np.sqrt(np.maximum(np.diag(fit.covariance), 0.0)), floor)
    moves = np.empty((len(faces), c0.size))
    for i, h in enumerate(steps):
        e = np.zeros_like(c0)
        e[i] = h
        dv = (fit.net(c0 + e, fine)[0] - fit.net(c0 - e, fine)[0]) / (2.0 * h)
        moves[:, i] = np.einsum("ij,ij->i", dv[faces].mean(axis=1), normals)
    return LayerNet(tri.mean(axis=1) * scale, areas * scale**2, moves * scale)


def _kernels(points, g, T, pivot, axis, sign: float):
    """Per unit mass at world points: (axial torque, stiffness, inertia) on the pendulum of a mass there.
    sign +1 for a pendulum body in the attractor's field g, T; -1 for an attractor body in the
    pendulum's field (the reaction). The stiffness -d torque / d theta has the same form in both:
    -a . (w x g + r x (T w)), w = a x r (turning the pendulum by theta is turning the attractor by -theta)."""
    r = points - pivot
    w = np.cross(axis, r)
    torque = sign * (np.cross(r, g) @ axis)
    Tw = np.einsum("nij,nj->ni", T, w)
    stiffness = -(np.cross(w, g) + np.cross(r, Tw)) @ axis
    perp = r - np.outer(r @ axis, axis)
    inertia = np.einsum("ij,ij->i", perp, perp)
    return torque, stiffness, inertia


def _density(body, local):
    rho = np.full(len(local), float(body.density))
    if body.gradient is not None:
        rho = rho + local @ np.asarray(body.gradient, float)
    return rho


def _pose_rows(scene, name: str, net: LayerNet, test: str, source: str, stiffness: bool):
    """Rows of J (per unit coefficient) for one pose: the torque (and stiffness) on the group `test`."""
    from truepull.integrate.field_at_points import group_field_at_points

    body = scene.body(name)
    other = source if body.group == test else test
    sign = 1.0 if body.group == test else -1.0
    world = body.placement.apply(net.centroids)
    f = group_field_at_points(scene.group(other), world, 1.0, MODE_RTOL, gradient=stiffness)
    T = f.T if stiffness else np.zeros((len(world), 3, 3))
    torque, k, _ = _kernels(world, f.g, T, scene.frame.pivot, scene.frame.axis, sign)
    mass = _density(body, net.centroids) * net.areas
    rows = [(mass * torque) @ net.moves]
    if stiffness:
        rows.append((mass * k) @ net.moves)
    return rows


def observation_rows(scene_per_g, name: str, net: LayerNet, method: str, nodes, test: str = "pendulum",
                     source: str = "attractor") -> np.ndarray:
    """J (rows, N): the first-order change per unit coefficient of every number the reduction of `method`
    takes from the body `name` (module docstring): torques, stiffnesses, inertia, volume."""
    from truepull.integrate.balance.torque_curve import turned_scene

    m = scene_per_g.measurement
    rows = []
    if method == "acceleration":
        from truepull.integrate.balance.acceleration_method import _setup

        _, harmonic, src = _setup(scene_per_g, test, source)
        k = max(ACCELERATION_TURNS_PER_ORDER * harmonic, MIN_ACCELERATION_TURNS)
        for theta in 2.0 * math.pi * np.arange(k) / k:
            rows += _pose_rows(turned_scene(scene_per_g, None, test, float(theta)), name, net, test, src, False)
    elif method == "servo":
        for p in m.positions:
            rows += _pose_rows(turned_scene(scene_per_g, p, test, 0.0), name, net, test, source, False)
    else:
        for p, thetas in zip(m.positions, nodes):
            for theta in thetas:
                rows += _pose_rows(turned_scene(scene_per_g, p, test, float(theta)), name, net, test, source, True)
    body = scene_per_g.body(name)
    if body.group == test:
        local = net.centroids
        world = body.placement.apply(local)
        inertia = _kernels(world, np.zeros_like(world), np.zeros((len(world), 3, 3)), scene_per_g.frame.pivot,
                           scene_per_g.frame.axis, 1.0)[2]
        rows.append((_density(body, local) * net.areas * inertia) @ net.moves)
    rows.append(net.areas @ net.moves)                           # the volume
    return np.array(rows)


def _whitened(J: np.ndarray, covariance) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(L with C = L L^T, singular values S and right vectors Vt of J L with its rows scaled to unit length)."""
    lam, Q = np.linalg.eigh(np.asarray(covariance, float))
    L = Q * np.sqrt(np.clip(lam, 0.0, None))
    B = J @ L
    norms = np.linalg.norm(B, axis=1)
    B = B[norms > 0] / norms[norms > 0, None]
    if B.size == 0:
        return L, np.zeros(0), np.zeros((0, L.shape[1]))
    _, S, Vt = np.linalg.svd(B, full_matrices=False)
    return L, S, Vt


def _kept(S) -> np.ndarray:
    return np.flatnonzero(S > KEEP * S[0]) if len(S) else np.zeros(0, int)


def modes_from_rows(J: np.ndarray, covariance: np.ndarray, net: LayerNet, body: str = "") -> list[FormMode]:
    """The independent directions (module docstring) of the coefficients' covariance that carry every
    first-order change of the rows of J, each scaled to one metre of rms surface displacement."""
    L, S, Vt = _whitened(J, covariance)
    out = []
    total = float(net.areas.sum())
    for a in _kept(S):
        d = L @ Vt[a]                                           # coefficient change for z_a = 1
        rms = math.sqrt(float(net.areas @ (net.moves @ d) ** 2) / total)
        if rms > 0:
            out.append(FormMode(body, len(out), tuple(float(x) for x in d / rms), rms))
    return out


def lost_fraction(J: np.ndarray, J_half: np.ndarray, covariance) -> float:
    """sin^2 of the largest principal angle between the modes' span from J and from J_half (the same count
    of leading directions; scipy.linalg.subspace_angles): the estimated largest fraction of the form's
    variance in G outside the modes."""
    from scipy.linalg import subspace_angles

    _, S, Vt = _whitened(J, covariance)
    _, S2, Vt2 = _whitened(J_half, covariance)
    k = len(_kept(S))
    if k == 0 or len(S2) < k:
        return 0.0 if k == 0 else 1.0
    return float(np.sin(np.max(subspace_angles(Vt[:k].T, Vt2[:k].T))) ** 2)


def form_modes(scene, method: str, nodes, test: str = "pendulum", source: str = "attractor") -> list[BodyModes]:
    """Every measured-form body of the `test` and `source` groups: its modes and their estimated loss."""
    from truepull.integrate.balance.reduction import per_unit_g

    s1 = None
    out: list[BodyModes] = []
    for body in scene.bodies:
        fit = measured_fit(body)
        if fit is None or body.group not in (test, source):
            continue
        s1 = s1 or per_unit_g(scene)
        scale = float(getattr(body.shape, "scale", 1.0))
        rows = []
        for fine in (True, False):
            net = layer_net(fit, scale, fine)
            rows.append((net, observation_rows(s1, body.name, net, method, nodes, test, source)))
        (net, J), (_, J_half) = rows
        modes = modes_from_rows(J, fit.covariance, net, body.name)
        out.append(BodyModes(body.name, tuple(modes), int(fit.coefficients.size),
                             lost_fraction(J, J_half, fit.covariance)))
    return out
