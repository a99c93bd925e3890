"""The axial torque on the pendulum as a Fourier series in the relative turn of a group, and the
amplitude of one harmonic of it, per unit G.

phi (rad) is a right-handed turn of the turning group (the attractor by default) about the frame axis
through the pivot, from the pose the scene draws; tau(phi) = sum over n >= 1 of C_n cos(n phi) +
S_n sin(n phi), and the amplitude of harmonic n is |T_n| = sqrt(C_n^2 + S_n^2) (N m per unit G, that is
kg^2 m^-1). Turning the pendulum by -phi instead gives the same relative pose, so the amplitudes do
not depend on which of the two turns.

Two routes to the exact amplitudes:
- the multipole series about the pivot (integrate/multipoles.py, what `compare --moments` shows), whose
  harmonics come with the propagated moment errors plus twice the rigorous truncation bound (a Fourier
  coefficient of a function is at most its largest value, and the amplitude is twice that coefficient);
- where the series is refused (the pendulum reaches farther from the pivot than the attractor's
  nearest approach, or it converges too slowly), the engine's exact torque at N equally spaced turns
  and numpy's FFT. The discrete amplitude of harmonic n holds the aliases n +- N, 2N, ...; N doubles
  (16 m, 32 m, ... up to MAX_TURNS) until the amplitude changes by less than the engine tolerance
  relative to the largest torque, and that last change is stated as the aliasing error (the terms decay
  geometrically, so the change from N/2 to N bounds what N leaves out), plus twice the engine's largest
  error estimate over the turns (a per-turn error e moves a Fourier amplitude by at most 2 e).

The point model (every body a point at its centre of mass, every pair) goes by the FFT of its closed
form, doubled until the amplitude changes by less than 1e-14 of the largest torque.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from truepull.integrate.interaction import check_separated, interaction_totals
from truepull.integrate.point_model import point_pair_values

# the FFT route: first grid 16 m turns (at least MIN_TURNS), doubled up to MAX_TURNS
MIN_TURNS = 32
MAX_TURNS = 1024
POINT_RTOL = 1e-14
# amplitudes of the harmonics m -+ k reported beside the measured one (for the leakage estimate)
NEIGHBOURS = 3


@dataclass(frozen=True)
class Harmonics:
    """Fourier coefficients of the torque per unit G in the turn: C[n], S[n] for n = 0..len-1 (C[0]
    the mean, S[0] = 0), `error` an absolute bound on each amplitude's error, `how` the route in words,
    `turns` the engine evaluations spent (0 for the series), `reached` whether the tolerance was met."""

    C: np.ndarray
    S: np.ndarray
    error: float
    how: str
    turns: int
    reached: bool
    scale: float

    def amplitude(self, n: int) -> float:
        """|T_n| = sqrt(C_n^2 + S_n^2), 0 beyond the known harmonics."""
        if n >= len(self.C):
            return 0.0
        return float(math.hypot(self.C[n], self.S[n]))

    def phase(self, n: int) -> float:
        """The phase of harmonic n: tau_n(phi) = |T_n| cos(n phi - phase) (rad)."""
        return float(math.atan2(self.S[n], self.C[n])) if n < len(self.C) else 0.0


def signal_source(test: str, source: str, group: str | None) -> str:
    """The group whose pull on the pendulum makes the signal: the measurement's `group` when it is
    given and is not the pendulum itself, else `source`. Its turn relative to the pendulum is the
    signal's phi (a turn of the pendulum by -phi is the same relative pose)."""
    return source if group is None or group == test else group


def turned_group(scene, group: str, phi: float):
    """The scene with `group` turned by phi (rad) about the frame axis through the pivot."""
    if phi == 0.0:
        return scene
    turn = scene.frame.turn(phi)
    return scene.with_bodies(b.moved(turn) if b.group == group else b for b in scene.bodies)


def _coefficients(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """(C, S) of tau(phi_k), phi_k = 2 pi k / N, from numpy's real FFT: F_n = (C_n - i S_n) / 2."""
    F = np.fft.rfft(values) / len(values)
    C, S = 2.0 * F.real, -2.0 * F.imag
    C[0] = F[0].real
    S[0] = 0.0
    if len(values) % 2 == 0:  # the Nyquist term is not split between +- n
        C[-1] = F[-1].real
        S[-1] = 0.0
    return C, S


def _grid(n: int) -> np.ndarray:
    return 2.0 * np.pi * np.arange(n) / n


def _doubling(torques_at, m: int, rtol: float, start: int):
    """FFT of torques_at(phis) -> (values, errors, reached) on grids doubled until the amplitude of
    harmonic m settles: (C, S, aliasing estimate, largest per-turn error, N, reached, scale)."""
    n = max(start, 16 * m)
    n = 1 << (n - 1).bit_length()
    values, errors = torques_at(_grid(n))
    reached = True
    while True:
        C, S = _coefficients(values)
        n2 = 2 * n
        extra_phi = _grid(n2)[1::2]
        more, more_err = torques_at(extra_phi)
        both = np.empty(n2)
        both[0::2], both[1::2] = values, more
        errs = np.concatenate([errors, more_err])
        C2, S2 = _coefficients(both)
        change = abs(math.hypot(C2[m], S2[m]) - math.hypot(C[m], S[m]))
        scale = float(np.max(np.abs(both))) or 1.0
        values, errors, n = both, errs, n2
        if change <= rtol * scale:
            break
        if n >= MAX_TURNS:
            reached = False
            break
    return C2, S2, change, float(np.max(errors)) if len(errors) else 0.0, n, reached, scale


def point_harmonics(scene_per_g, m: int, test: str, source: str) -> Harmonics:
    """The point model's Fourier coefficients (every body a point at its centre of mass, all pairs)."""
    axis, pivot = scene_per_g.frame.axis, scene_per_g.frame.pivot
    tb = scene_per_g.group(test)

    def torques(phis):
        out = np.empty(len(phis))
        for k, phi in enumerate(phis):
            sc = turned_group(scene_per_g, source, float(phi))
            pp = point_pair_values(tb, sc.group(source), pivot, axis, 1.0).sum(axis=(0, 1))
            out[k] = float(pp[3:6] @ axis)
        return out, np.zeros(len(phis))

    C, S, change, _, n, reached, scale = _doubling(torques, m, POINT_RTOL, MIN_TURNS)
    return Harmonics(C, S, change + 1e-15 * scale, f"FFT of the point model at {n} turns", 0, reached, scale)


def engine_harmonics(scene_per_g, m: int, test: str, source: str, rtol: float) -> Harmonics:
    """Exact coefficients by the engine's torque at equally spaced turns and numpy's FFT (module
    docstring: the aliasing and engine errors)."""
    axis, pivot = scene_per_g.frame.axis, scene_per_g.frame.pivot
    count = [0]
    ok = [True]

    def torques(phis):
        vals, errs = np.empty(len(phis)), np.empty(len(phis))
        for k, phi in enumerate(phis):
            sc = turned_group(scene_per_g, source, float(phi))
            check_separated(sc.group(test), sc.group(source), sc.path)
            v, e, _, reached = interaction_totals(sc.group(test), sc.group(source), pivot, axis, 1.0, rtol)
            vals[k], errs[k] = float(v[3:6] @ axis), float(e[3:6] @ np.abs(axis))
            ok[0] = ok[0] and bool(reached)
        count[0] += len(phis)
        return vals, errs

    C, S, change, worst, n, reached, scale = _doubling(torques, m, rtol, MIN_TURNS)
    return Harmonics(C, S, change + 2.0 * worst, f"engine torque at {n} equally spaced turns, numpy FFT "
                     f"(aliasing estimate {change:.2g} from the last doubling)", count[0], reached and ok[0], scale)


def series_harmonics(scene_per_g, m: int, test: str, source: str, rtol: float) -> Harmonics:
    """Exact coefficients from the multipole series (its phi turns the source about the frame axis);
    raises multipoles.MultipoleRefused where the expansion does not hold."""
    from truepull.integrate.multipoles import interaction_series

    sc = scene_per_g
    series = interaction_series(sc.group(test), sc.group(source), sc.frame.pivot, sc.frame.axis, 1.0, rtol)
    rows = series.torque_harmonics()
    L = series.L
    C, S = np.zeros(L + 1), np.zeros(L + 1)
    errs = np.zeros(L + 1)
    for n, c, s, e in rows:
        C[n], S[n], errs[n] = c, s, e
    scale = float(np.sum(np.hypot(C, S))) or 1.0
    error = float(errs[m] if m <= L else 0.0) + 2.0 * series.bounds.torque
    return Harmonics(C, S, error, f"multipole series about the pivot to degree {L}", 0, series.reached, scale)


def exact_harmonics(scene_per_g, m: int, test: str, source: str, rtol: float,
                    route: str = "auto") -> Harmonics:
    """The exact coefficients: the multipole series where it holds (route "auto" or "series"), else the
    engine over a uniform turn grid with an FFT (route "auto" falling back, or "grid")."""
    from truepull.integrate.multipoles import MultipoleRefused

    if route in ("auto", "series"):
        try:
            return series_harmonics(scene_per_g, m, test, source, rtol)
        except MultipoleRefused as exc:
            if route == "series":
                raise
            h = engine_harmonics(scene_per_g, m, test, source, rtol)
            return Harmonics(h.C, h.S, h.error, h.how + f"; the multipole series is refused here ({exc.reason})",
                             h.turns, h.reached, h.scale)
    return engine_harmonics(scene_per_g, m, test, source, rtol)


def leakage_per_radian(h: Harmonics, m: int, k: int) -> float:
    """How much a wobble of the relative turn, phi(t) = Omega t + e sin(k Omega t), brings into the
    measured harmonic m, relative to |T_m| per radian of e, to first order in e: harmonic n of the torque
    gains sidebands of amplitude n e |T_n| / 2 at n -+ k (e^{i n phi} ~ e^{i n Omega t} (1 + i n e
    sin(k Omega t))), so the neighbours n = m -+ k add up to ((m - k)|T_(m-k)| + (m + k)|T_(m+k)|) / 2
    (their phases may subtract; this is the bound)."""
    a = h.amplitude(m)
    if not a > 0:
        return math.inf
    low = (m - k) * h.amplitude(m - k) if m - k >= 1 else 0.0
    if m - k <= -1:  # n = m - k < 0 is the conjugate of |m - k|
        low = abs(m - k) * h.amplitude(abs(m - k))
    return 0.5 * (low + (m + k) * h.amplitude(m + k)) / a
