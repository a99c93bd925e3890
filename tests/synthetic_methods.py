"""Synthetic acceleration-feedback and servo experiments built from closed forms only.

The pendulum is two small spheres at (+-D, 0, 0) or a uniform box centred on the fiber; the attractor
two spheres at distance R from the fiber, at angle ANGLE + phi and ANGLE + phi + pi, at height Z.
Outside a uniform sphere its field is a point's (shell theorem) and a sphere in a field feels the force
on a point at its centre, so the torque on the spheres is Newton's law for point pairs written out
here; on the box it is minus the torque of the box's field on the attractor spheres (Newton's third
law for the pair, about the fiber), the box's field by the prism closed form of Nagy, Papp and Benedek
(2000) as tests/engine_references.prism_mp writes it. The Fourier amplitudes are numpy's FFT of these
torques; moments of inertia are the handbook ones (sphere 2/5 m r^2, box M (a^2 + b^2) / 12, plus
the parallel-axis term). The true G is deliberately not CODATA's.

Nothing here uses the package under test.
"""

from __future__ import annotations

import math

import numpy as np

G_TRUE = 6.71e-11          # m^3 kg^-1 s^-2: not CODATA's 6.674e-11, on purpose
RHO = 11340.0              # kg/m^3 (lead, from memory; any value would do)
R_BOB, D = 0.006, 0.04     # pendulum spheres: radius, distance from the fiber (m)
R_BIG, R = 0.03, 0.11      # attractor spheres: radius, distance of their centres from the fiber (m)
ANGLE = 0.3                # the attractor's direction as drawn (rad)
BOX = (0.06, 0.004, 0.03)  # the box pendulum's edges (m)
RHO_BOX = 2200.0
M_BOB = RHO * 4.0 / 3.0 * math.pi * R_BOB**3
M_BIG = RHO * 4.0 / 3.0 * math.pi * R_BIG**3
M_BOX = RHO_BOX * BOX[0] * BOX[1] * BOX[2]
INERTIA_SPHERES = 2.0 * (0.4 * M_BOB * R_BOB**2 + M_BOB * D**2)
INERTIA_BOX = M_BOX * (BOX[0] ** 2 + BOX[1] ** 2) / 12.0


def attractor_centres(phi, r=R, z=0.0):
    """The attractor spheres' centres (m) with the attractor turned by phi (rad)."""
    return [(s * r * math.cos(ANGLE + phi), s * r * math.sin(ANGLE + phi), z) for s in (1, -1)]


def sphere_torque(phi, G=G_TRUE, r=R, z=0.0, d=D):
    """Axial torque (N m) on the two pendulum spheres: sum of G m M (b x (a - b))_z / |a - b|^3."""
    total = 0.0
    for sb in (1, -1):
        bx, by = sb * d, 0.0
        for ax, ay, az in attractor_centres(phi, r, z):
            dx, dy, dz = ax - bx, ay - by, az
            total += G * M_BOB * M_BIG * (bx * dy - by * dx) / math.sqrt(dx * dx + dy * dy + dz * dz) ** 3
    return total


def box_torque(phi, G=G_TRUE, r=R, z=0.0):
    """Axial torque (N m) on the box pendulum: -(a x M g_box(a))_z summed over the attractor spheres."""
    from engine_references import prism_mp

    half = [0.5 * e for e in BOX]
    total = 0.0
    for ax, ay, az in attractor_centres(phi, r, z):
        _, g, _ = prism_mp((ax, ay, az), half, RHO_BOX, G=G, dps=30)
        gx, gy = float(g[0]), float(g[1])
        total -= M_BIG * (ax * gy - ay * gx)
    return total


def fft_amplitudes(torque, n_turns=128):
    """|T_n| for n = 0..n_turns/2 from numpy's FFT of torque(phi) at equally spaced turns."""
    phi = 2 * np.pi * np.arange(n_turns) / n_turns
    values = np.array([torque(p) for p in phi])
    return [float(a) for a in 2.0 * np.abs(np.fft.rfft(values)) / n_turns]


def _sphere(name, group, radius, at):
    return (f'\n[[body]]\nname = "{name}"\ngroup = "{group}"\nshape = "sphere"\nradius = {radius!r}\n'
            f'density = {RHO!r}\nat = [{at[0]!r}, {at[1]!r}, {at[2]!r}]\n')


def scene_text(measurement: str, pendulum: str = "spheres", r=R, z=0.0, positions: dict | None = None,
               d=D) -> str:
    """A scene (SI) of this apparatus, the attractor as drawn (phi = 0), the given [measurement] text
    (whole tables, with their headers), and [[position]] tables turning the attractor (name -> rad)."""
    text = '[scene]\ntitle = "synthetic method balance"\n'
    if pendulum == "spheres":
        text += _sphere("bob-east", "pendulum", R_BOB, (d, 0.0, 0.0))
        text += _sphere("bob-west", "pendulum", R_BOB, (-d, 0.0, 0.0))
    else:
        text += (f'\n[[body]]\nname = "plate"\ngroup = "pendulum"\nshape = "box"\nsize = [{BOX[0]!r}, {BOX[1]!r}, '
                 f'{BOX[2]!r}]\ndensity = {RHO_BOX!r}\n')
    for i, c in enumerate(attractor_centres(0.0, r, z)):
        text += _sphere(f"ball-{i + 1}", "attractor", R_BIG, c)
    for name, psi in (positions or {}).items():
        text += f'\n[[position]]\nname = "{name}"\ngroup = "attractor"\nturn = "{psi!r} rad"\n'
    return text + "\n" + measurement
