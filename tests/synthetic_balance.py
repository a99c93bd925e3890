"""A synthetic torsion-balance experiment built from closed forms only, for the reduction tests.

Two small lead spheres on a massless beam (the pendulum) and two large lead spheres (the attractor),
all in one horizontal plane; the fiber is the z axis. Outside a uniform sphere its field is a point's
(shell theorem), and a sphere in a field feels the force on a point at its centre, so the torque on
the pendulum is Newton's law for four point pairs, written out here by hand. Equilibria by
scipy.optimize.brentq, stiffness by mpmath.diff of the closed-form torque, finite-amplitude periods
by scipy.integrate.solve_ivp. The true G is deliberately not the CODATA value.

Nothing here uses the package under test, except `scene_text`, which only writes the scene file.
"""

from __future__ import annotations

import math

import mpmath
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

G_TRUE = 6.9e-11           # m^3 kg^-1 s^-2: not CODATA's 6.674e-11, on purpose
RHO = 11340.0              # kg/m^3 (lead, from memory; any value would do)
R_BOB, D = 6.35e-3, 0.05   # bob radius, half beam length (m)
R_BIG, B = 0.05, 0.07      # attractor radius, its centre's distance from a bob's line (m)
M_BOB = RHO * 4.0 / 3.0 * math.pi * R_BOB**3
M_BIG = RHO * 4.0 / 3.0 * math.pi * R_BIG**3
ANGLE = math.atan2(B, D)   # direction of the attractor sphere "ball-1" as drawn, from the x axis
KAPPA = 2.5e-8             # fiber torsion constant (N m/rad)
# moment of inertia of two uniform spheres at +-D about z: 2 (2/5 m r^2 + m D^2) (standard
# sphere formula plus the parallel-axis theorem, from memory)
INERTIA = 2.0 * (0.4 * M_BOB * R_BOB**2 + M_BOB * D**2)
# the two-ball far-mass factor (common practice in teaching-lab manuals; from memory)
FAR_BETA = B**3 / (B**2 + 4 * D**2) ** 1.5


def _pairs(theta, psi, lib=math):
    """(bob position, ball position) pairs with the pendulum turned by theta, the attractor by psi."""
    r = lib.sqrt(D * D + B * B)
    for sb in (1, -1):
        bob = (sb * D * lib.cos(theta), sb * D * lib.sin(theta))
        for sa in (1, -1):
            yield bob, (sa * r * lib.cos(ANGLE + psi), sa * r * lib.sin(ANGLE + psi))


def torque(theta, psi, G=G_TRUE, lib=math):
    """Axial torque (N m) on the pendulum: sum of G m M (r x (R - r))_z / |R - r|^3 (Newton)."""
    total = 0
    for (bx, by), (ax, ay) in _pairs(theta, psi, lib):
        dx, dy = ax - bx, ay - by
        total += G * M_BOB * M_BIG * (bx * dy - by * dx) / lib.sqrt(dx * dx + dy * dy) ** 3
    return total


def energy(theta, psi, G=G_TRUE):
    """Gravitational interaction energy (J): -G m M / distance summed over the pairs (Newton)."""
    return sum(-G * M_BOB * M_BIG / math.hypot(ax - bx, ay - by) for (bx, by), (ax, ay) in _pairs(theta, psi))


def stiffness(theta, psi, G=G_TRUE):
    """-d(torque)/d(theta) (N m/rad) by mpmath.diff of the closed form at 40 digits."""
    with mpmath.workdps(40):
        return -float(mpmath.diff(lambda t: torque(t, psi, G, mpmath), mpmath.mpf(theta)))


def equilibrium(psi, kappa=KAPPA, G=G_TRUE):
    """theta with kappa theta = torque(theta) (fiber rest angle 0), by brentq."""
    return brentq(lambda t: kappa * t - torque(t, psi, G), -0.05, 0.05, xtol=1e-19, rtol=8.9e-16)


def undamped_period(psi, kappa=KAPPA):
    """2 pi sqrt(I / (kappa + K)) at the equilibrium of position psi (small amplitude)."""
    return 2 * math.pi * math.sqrt(INERTIA / (kappa + stiffness(equilibrium(psi, kappa), psi)))


def damped_period(psi, decrement, kappa=KAPPA):
    """The damped period for a viscous damping of logarithmic decrement delta: omega_d = omega0 /
    sqrt(1 + (delta / 2 pi)^2) (from omega_d^2 = omega0^2 - gamma^2 and delta = gamma T_d)."""
    return undamped_period(psi, kappa) * math.sqrt(1 + (decrement / (2 * math.pi)) ** 2)


def finite_amplitude_period(psi, amplitude, kappa=KAPPA):
    """The undamped period at amplitude A (half the distance between the turning points) by
    solve_ivp of I theta'' = -kappa theta + torque(theta): from one turning point at rest, the time of
    the next maximum."""
    te = equilibrium(psi, kappa)

    def potential(th):
        return 0.5 * kappa * th * th + energy(th, psi)

    s = brentq(lambda s: potential(te + s + amplitude) - potential(te + s - amplitude), -0.5 * amplitude,
               0.5 * amplitude, xtol=1e-18)
    t0 = undamped_period(psi, kappa)

    def top(t, y):
        return y[1]

    top.direction = -1
    sol = solve_ivp(lambda t, y: [y[1], (-kappa * y[0] + torque(y[0], psi)) / INERTIA], (0.0, 1.3 * t0),
                    [te + s + amplitude, 0.0], method="DOP853", rtol=1e-13, atol=1e-20, events=top)
    return float(next(t for t in sol.t_events[0] if t > 0.5 * t0))


def _body(name, group, radius, x, y, extra=""):
    return (f'\n[[body]]\nname = "{name}"\ngroup = "{group}"\nshape = "sphere"\nradius = {radius!r}\n'
            f'density = {RHO!r}\nat = [{x}, {y}, 0]\n{extra}')


def scene_text(positions: dict[str, float], measurement: str, east_x: str | None = None) -> str:
    """A scene file (SI) of this balance: the attractor drawn as at psi = 0, one [[position]] per
    entry (name -> turn psi in rad), and the given [measurement] body text. `east_x` replaces the
    east bob's x coordinate text (e.g. to give it an uncertainty)."""
    r = math.sqrt(D * D + B * B)
    text = '[scene]\ntitle = "synthetic two-ball balance"\n'
    text += _body("bob-east", "pendulum", R_BOB, east_x or repr(D), "0.0")
    text += _body("bob-west", "pendulum", R_BOB, repr(-D), "0.0")
    text += _body("ball-1", "attractor", R_BIG, repr(r * math.cos(ANGLE)), repr(r * math.sin(ANGLE)))
    text += _body("ball-2", "attractor", R_BIG, repr(-r * math.cos(ANGLE)), repr(-r * math.sin(ANGLE)))
    for name, psi in positions.items():
        text += f'\n[[position]]\nname = "{name}"\ngroup = "attractor"\nturn = "{psi!r} rad"\n'
    return text + "\n[measurement]\n" + measurement


PSI_A, PSI_B = 0.0, -2.0 * ANGLE          # A as drawn; B its mirror image (balls at (D, -B), (-D, B))
PSI_C = -0.2                              # a third deflection state, 0.2 rad short of A (clear of the bobs)
PSI_FAR = math.pi / 2 - ANGLE             # balls on the y axis: no torque, for time-of-swing
