"""Engine speed, run on demand: `python tests/benchmarks/bench_pairs.py`.

Prints a table of warm timings (each case run once to compile and fill nothing else, then timed with
the pair memory cleared): the demo at one position to 1e-9, a scene of two cylindrical bobs on a box
beam with two cylindrical attractors 3 mm away (to 1e-9, beside a plain vectorised numpy volume-volume
Gauss brute force of the same scene and the brute force's own achieved accuracy), a 10,000-face mesh
against a sphere, and the kernels' rates: the point-pair kernel (pair interactions per second) and the
band field (points per second).
"""

from __future__ import annotations

import os
import platform
import sys
import time

import numpy as np

from truepull.geometry.scene import load_scene, load_scene_text
from truepull.integrate import pair_cache
from truepull.integrate.interaction import compare_groups
from truepull.shapes import demo_path

sys.path.insert(0, os.path.join(os.path.dirname(__file__), ".."))
from scene_fixtures import DRUMS_LIKE as BOBS_ON_BEAM  # noqa: E402



def timed(fn, repeat=2):
    fn()
    best = np.inf
    for _ in range(repeat):
        pair_cache.clear()
        t = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t)
    return best, out


def cylinder_volume_nodes(body, n):
    """Tensor Gauss nodes (r, phi, z) over a solid cylinder: points (M, 3) and weights (M,)."""
    x, w = np.polynomial.legendre.leggauss(n)
    R, L = body.shape.radius, body.shape.length
    r = 0.5 * R * (x + 1)
    wr = 0.5 * R * w * r
    phi = np.pi * (x + 1)
    wp = np.pi * w
    z = 0.5 * L * x
    wz = 0.5 * L * w
    rr, pp, zz = np.meshgrid(r, phi, z, indexing="ij")
    W = (wr[:, None, None] * wp[None, :, None] * wz[None, None, :]).ravel()
    local = np.stack([(rr * np.cos(pp)).ravel(), (rr * np.sin(pp)).ravel(), zz.ravel()], axis=1)
    return body.placement.apply(local), W * body.density


def box_volume_nodes(body, n):
    x, w = np.polynomial.legendre.leggauss(n)
    h = 0.5 * np.asarray(body.shape.size)
    g = [h[k] * x for k in range(3)]
    wk = [h[k] * w for k in range(3)]
    X, Y, Z = np.meshgrid(*g, indexing="ij")
    W = (wk[0][:, None, None] * wk[1][None, :, None] * wk[2][None, None, :]).ravel()
    return body.placement.apply(np.stack([X.ravel(), Y.ravel(), Z.ravel()], axis=1)), W * body.density


def brute_force_torque(scene, n):
    """Plain numpy: torque about z on the pendulum by volume-volume Gauss products, order n per axis."""
    G = scene.G.value
    nodes = {}
    for b in scene.bodies:
        nodes[b.name] = (box_volume_nodes if b.shape.kind == "box" else cylinder_volume_nodes)(b, n)
    tz = 0.0
    for t in scene.group("pendulum"):
        xt, wt = nodes[t.name]
        for s in scene.group("attractor"):
            xs, ws = nodes[s.name]
            for chunk in range(0, len(xt), 512):
                a = xt[chunk:chunk + 512]
                d = xs[None, :, :] - a[:, None, :]
                inv3 = np.sum(d * d, axis=2) ** -1.5
                f = G * wt[chunk:chunk + 512, None] * ws[None, :] * inv3
                fx = np.sum(f * d[:, :, 0], axis=1)
                fy = np.sum(f * d[:, :, 1], axis=1)
                tz += np.sum(a[:, 0] * fy - a[:, 1] * fx)
    return tz


def main():
    rows = []
    demo = load_scene(demo_path())
    t, c = timed(lambda: compare_groups(demo, position="A", rtol=1e-9))
    rows.append(("demo, position A, all pairs, rtol 1e-9", f"{t:.2f} s", f"reached={c.reached}"))
    bobs = load_scene_text(BOBS_ON_BEAM, "bobs-on-beam")
    t, c = timed(lambda: compare_groups(bobs, rtol=1e-9))
    exact = c.exact.torque_axis
    rows.append(("bobs on a beam, attractors 3 mm away, rtol 1e-9", f"{t:.2f} s",
                 f"torque {exact:.12e} N m, est. error {c.error.torque_axis:.1e}"))
    for n in (8, 16):
        tb, tz = timed(lambda: brute_force_torque(bobs, n), repeat=1)
        rows.append((f"same scene, numpy volume-volume Gauss, {n}^3 nodes per body", f"{tb:.2f} s",
                     f"relative error {abs(tz - exact) / abs(exact):.1e} against the engine"))
    import trimesh

    from truepull.geometry.bodies import Body
    from truepull.geometry.placement import Placement
    from truepull.geometry.shapes import MeshShape, Sphere
    from truepull.integrate.pairs import pair_interaction

    m = trimesh.creation.capsule(height=0.05, radius=0.02, count=[72, 72])  # about 10,000 faces
    mesh = Body("part", "pendulum", MeshShape(np.asarray(m.vertices), np.asarray(m.faces), "capsule"),
                Placement.identity(), 2700.0)
    ball = Body("ball", "attractor", Sphere(0.01), Placement.from_scene([0.0, 0.0, 0.0555]), 11340.0)
    t, _ = timed(lambda: pair_interaction(mesh, ball, np.zeros(3), np.array([0, 0, 1.0]), 6.674e-11, 1e-9))
    rows.append((f"{len(m.faces)}-face mesh against a sphere", f"{t * 1e3:.1f} ms", "closed form at one point"))
    from truepull.integrate.field_band import N_HIGH, N_LOW, band_field
    from truepull.integrate.patches import body_patches

    src = bobs.body("big-east")
    pts = np.random.default_rng(1).normal(size=(20000, 3)) * 0.05 + np.array([0.1, 0.1, 0.0])
    ps = body_patches(src)
    band_field(pts[:10], ps, src.density, 6.674e-11)
    t0 = time.perf_counter()
    band_field(pts, ps, src.density, 6.674e-11)
    dt = time.perf_counter() - t0
    # generator integrals: points x bands x panels x (N_HIGH + N_LOW); panels ~2-3 at these distances
    rows.append(("band field of a cylinder, 20000 points", f"{dt * 1e3:.0f} ms",
                 f"{20000 / dt:.3g} points/s ({len(ps.kinds)} bands, {N_HIGH}+{N_LOW} nodes per panel)"))
    from truepull.integrate.field_point import _point_field_kernel

    rng = np.random.default_rng(2)
    targets, sources, masses = rng.uniform(-1, 1, (20000, 3)), rng.uniform(2, 3, (5000, 3)), rng.uniform(1, 2, 5000)
    _point_field_kernel(targets[:10], sources[:10], masses[:10], 6.674e-11)
    t, _ = timed(lambda: _point_field_kernel(targets, sources, masses, 6.674e-11), repeat=5)
    rows.append(("point-pair kernel, 20000 x 5000 pairs", f"{t * 1e3:.0f} ms",
                 f"{targets.shape[0] * sources.shape[0] / t:.3g} pair interactions/s (U and g of one point "
                 "mass at one point)"))
    print(f"machine: {os.cpu_count()} cores, {platform.processor() or platform.machine()}, "
          f"{platform.python_implementation()} {platform.python_version()}")
    w = max(len(r[0]) for r in rows)
    for r in rows:
        print(f"{r[0]:<{w}}  {r[1]:>10}  {r[2]}")


if __name__ == "__main__":
    main()
