"""Sweeps: the interaction while one group turns about the frame axis or shifts along x, y or z.

Each sweep value gives a row: the exact and point-model torque about the axis, the exact and
point-model stiffness and the exact force on the test group (SI: N m, N m/rad, N), with error
estimates.
A turn of the attractor (or of the pendulum) about the frame axis takes the multipole fast path
when the pendulum lies inside and the attractor outside a sphere about the pivot (spheres and points
by their centres, when no turn can bring two bodies together; `multipoles.regions`): the torque is
then a Fourier series in the turn (`multipoles`), checked against direct integration at a few
values and dropped if any check disagrees beyond the two error estimates.
A tessellated part (STEP, measured form) adds to each row its change against the coarser
tessellation, as the pairs do (`multipole_tessellation`); a row whose torque error then exceeds
rtol of the sweep's largest torque is marked not reached.
A long sweep otherwise takes the Chebyshev interpolant through 17 values (`sweep_interpolation`),
checked in the same way. Otherwise every value is integrated directly, in parallel (`executor.map_parallel`: local processes
or a Dask cluster); a worker re-loads the scene from its file when one is given, so only the path
and the value travel.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field
from functools import partial

import numpy as np

from truepull.geometry.errors import InputError
from truepull.geometry.placement import Placement
from truepull.integrate.executor import map_parallel
from truepull.integrate.scene_cache import scene_from

AXES = {"x": 0, "y": 1, "z": 2}
DEFAULT_CHECKS = 2


@dataclass(frozen=True)
class Sweep:
    """What moves: `group` turned (kind "turn", values in rad) about the frame axis through the pivot,
    or shifted (kind "shift", values in m) along the scene axis `direction` ("x", "y" or "z")."""

    kind: str
    values: tuple[float, ...]
    group: str = "attractor"
    direction: str | None = None

    def placement(self, frame, value: float) -> Placement:
        if self.kind == "turn":
            return frame.turn(value)
        v = np.zeros(3)
        v[AXES[self.direction]] = value
        return Placement.shift(v)


@dataclass(frozen=True)
class ScanRow:
    """One sweep value (rad or m) and the interaction there (SI)."""

    value: float
    exact_torque_axis: float
    point_torque_axis: float
    exact_stiffness_axis: float
    force: np.ndarray
    error_torque_axis: float
    error_stiffness_axis: float
    error_force: float
    reached: bool = True
    overlap: str = ""
    """Why the exact values are missing (test and source bodies overlap there), or ""."""
    point_stiffness_axis: float = float("nan")

    def to_json(self, value_factor: float = 1.0) -> dict:
        return {"value": self.value / value_factor, "exact_torque_axis": self.exact_torque_axis,
                "point_torque_axis": self.point_torque_axis, "exact_stiffness_axis": self.exact_stiffness_axis,
                "point_stiffness_axis": self.point_stiffness_axis,
                "force": [float(f) for f in self.force], "error_torque_axis": self.error_torque_axis,
                "error_stiffness_axis": self.error_stiffness_axis, "error_force": self.error_force,
                "reached": self.reached, "overlap": self.overlap or None}


@dataclass(frozen=True)
class CheckResult:
    """A fast route's value (multipole or interpolated; field named `multipole`) beside direct integration
    at one sweep value."""

    value: float
    multipole: float
    direct: float
    allowed: float

    @staticmethod
    def of(fast: "ScanRow", direct: "ScanRow") -> "CheckResult":
        """A fast route's row beside the direct one at its value: allowed twice the two estimates plus rounding."""
        allowed = (2.0 * (fast.error_torque_axis + direct.error_torque_axis)
                   + 64 * np.finfo(float).eps * abs(direct.exact_torque_axis))
        return CheckResult(fast.value, fast.exact_torque_axis, direct.exact_torque_axis, allowed)

    @property
    def agrees(self) -> bool:
        return abs(self.multipole - self.direct) <= self.allowed


@dataclass(frozen=True)
class ScanResult:
    """The rows in sweep order; `method` is "multipole" or "direct"; `degree` the series degree used."""

    sweep: Sweep
    test: str
    source: str
    rows: tuple[ScanRow, ...]
    method: str
    degree: int | None = None
    checks: tuple[CheckResult, ...] = ()
    notes: tuple[str, ...] = field(default_factory=tuple)
    series: object = None
    """The MultipoleSeries behind the rows on the multipole path (turn of the source from the start), else None."""

    @property
    def reached(self) -> bool:
        return all(r.reached or r.overlap for r in self.rows)


# ------------------------------------------------------------------------------------------------
# parsing a range


def parse_range(text: str, key: str, file=None) -> tuple[float, ...]:
    """'START:STOP:STEP' -> start, start + step, ... up to and including STOP (when it falls on the
    grid, within a millionth of a step). STEP may be negative; never zero."""
    parts = str(text).split(":")
    if len(parts) != 3:
        raise InputError(file, key, f"expected START:STOP:STEP, got '{text}'")
    try:
        start, stop, step = (float(p) for p in parts)
    except ValueError:
        raise InputError(file, key, f"START, STOP and STEP must be numbers, got '{text}'") from None
    if not all(math.isfinite(v) for v in (start, stop, step)):
        raise InputError(file, key, f"START, STOP and STEP must be finite, got '{text}'")
    if step == 0:
        raise InputError(file, key, "STEP must not be zero")
    n = math.floor((stop - start) / step + 1e-6)
    if n < 0:
        raise InputError(file, key, f"STEP {step:g} goes away from STOP {stop:g}: no values")
    if n > 1_000_000:
        raise InputError(file, key, f"{n + 1} values are too many (at most a million)")
    return tuple(start + k * step for k in range(n + 1))


# ------------------------------------------------------------------------------------------------
# direct integration of one value (a top-level function, so it can run in worker processes)


@dataclass(frozen=True)
class DirectJob:
    """Everything a worker needs besides the value: the scene's file (re-loaded there) or the scene
    itself, and the settings."""

    scene_path: str | None
    scene: object
    position: object
    sweep_kind: str
    group: str
    direction: str | None
    test: str
    source: str
    rtol: float


def _job_scene(job: DirectJob):
    return scene_from(job.scene_path, job.scene)


def moved_scene(scene, sweep_kind, group, direction, position, value):
    """The scene at `position`, then `group` turned or shifted by `value` (rad or m)."""
    from dataclasses import replace

    sc = scene.at_position(position) if position is not None else scene
    move = Sweep(sweep_kind, (), group, direction).placement(sc.frame, value)
    return replace(sc, bodies=tuple(b.moved(move) if b.group == group else b for b in sc.bodies))


def direct_row(job: DirectJob, value: float) -> ScanRow:
    """One row by direct integration (the engine) at one sweep value."""
    from truepull.integrate.interaction import compare_groups

    sc = moved_scene(_job_scene(job), job.sweep_kind, job.group, job.direction, job.position, value)
    try:
        c = compare_groups(sc, job.test, job.source, None, job.rtol)
    except InputError as exc:
        if not _is_overlap(exc):
            raise
        return overlap_row(sc, job, value, exc.reason)
    return ScanRow(float(value), c.exact.torque_axis, c.point.torque_axis, c.exact.stiffness_axis,
                   np.asarray(c.exact.force, float), c.error.torque_axis, c.error.stiffness_axis,
                   float(np.linalg.norm(c.error.force)), bool(c.reached),
                   point_stiffness_axis=float(c.point.stiffness_axis))


def _is_overlap(exc: InputError) -> bool:
    """True for the engine's refusal of two overlapping bodies (its key names the pair)."""
    return bool(exc.key) and " / " in exc.key and "overlap" in exc.reason


def overlap_row(sc, job: DirectJob, value: float, reason: str) -> ScanRow:
    """A row where test and source bodies overlap: exact values undefined (NaN), point model kept."""
    from truepull.integrate.point_model import point_model

    pm = point_model(sc.group(job.test), sc.group(job.source), sc.frame.pivot, sc.frame.axis, sc.G.value)
    nan = float("nan")
    return ScanRow(float(value), nan, float(pm[3:6] @ sc.frame.axis), nan, np.full(3, nan), nan, nan, nan,
                   False, reason, float(pm[6]))


# ------------------------------------------------------------------------------------------------
# the point model over the sweep


@dataclass(frozen=True)
class _Point:
    """A body as the point model sees it: signed mass (kg) at its centre of mass (m)."""

    mass: float
    com: np.ndarray


def point_values_sweep(scene, sweep: Sweep, test: str, source: str, position=None) -> tuple[np.ndarray, np.ndarray]:
    """Point-model torque about the axis (N m) and stiffness (N m/rad) on the test group at each sweep
    value (every body a point of its mass at its centre of mass; the model of `point_model`)."""
    from truepull.integrate.point_model import point_model

    sc = scene.at_position(position) if position is not None else scene
    p, e, G = sc.frame.pivot, sc.frame.axis, sc.G.value
    tb, sb = sc.group(test), sc.group(source)
    ct = np.array([b.com for b in tb]).reshape(-1, 3)
    cs = np.array([b.com for b in sb]).reshape(-1, 3)
    tau = np.empty(len(sweep.values))
    K = np.empty(len(sweep.values))
    for k, v in enumerate(sweep.values):
        mv = sweep.placement(sc.frame, v)
        a = mv.apply(ct) if sweep.group == test else ct
        b = mv.apply(cs) if sweep.group == source else cs
        out = point_model([_Point(x.mass, c) for x, c in zip(tb, a)], [_Point(x.mass, c) for x, c in zip(sb, b)], p, e, G)
        tau[k] = float(out[3:6] @ e)
        K[k] = float(out[6])
    return tau, K


# ------------------------------------------------------------------------------------------------
# the scan


def _multipole_rows(scene, sweep, test, source, position, rtol, point_tau, point_K):
    """Rows from the multipole series, or raise MultipoleRefused."""
    from truepull.integrate.multipoles import MultipoleRefused, interaction_series

    sc = scene.at_position(position) if position is not None else scene
    tb, sb = sc.group(test), sc.group(source)
    scale = float(np.max(np.abs(point_tau))) if len(point_tau) else 0.0
    series = interaction_series(tb, sb, sc.frame.pivot, sc.frame.axis, sc.G.value, rtol,
                                torque_scale=scale if scale > 0 else None)
    if not series.reached:
        raise MultipoleRefused("; ".join(series.notes) or "the outer moments did not converge")
    v = np.asarray(sweep.values, float)
    phi = v if sweep.group == source else -v
    tau = series.torque_axis(phi)
    K = series.stiffness_axis(phi)
    F = series.force(phi)
    if sweep.group == test:  # the test group turned by v: the configuration is the attractor turned by -v,
        F = np.array([sc.frame.turn(x).apply_vector(f) for x, f in zip(v, F)])  # then everything turned by v
    err = series.errors(tessellation=False)
    if max(abs(tau).max(initial=0.0), scale) > 0 and err["torque_axis"] > rtol * max(np.abs(tau).max(), 1e-300) * 4:
        # the actual torque is smaller than the point-model size the degree was chosen for
        series = interaction_series(tb, sb, sc.frame.pivot, sc.frame.axis, sc.G.value, rtol,
                                    torque_scale=float(np.abs(tau).max()))
        if not series.reached:
            raise MultipoleRefused("; ".join(series.notes) or "the outer moments did not converge")
        tau, K, F = series.torque_axis(phi), series.stiffness_axis(phi), series.force(phi)
        if sweep.group == test:
            F = np.array([sc.frame.turn(x).apply_vector(f) for x, f in zip(v, F)])
    err = series.errors_at(phi)  # a tessellated part's chord change at each value, as the pairs add it
    # the series is built to rtol of the sweep's largest torque; only a chord error can miss that
    reached = (np.ones(len(v), bool) if series.tessellation is None
               else err["torque_axis"] <= rtol * max(float(np.abs(tau).max(initial=0.0)), scale))
    rows = tuple(ScanRow(float(x), float(t), float(pt), float(k), f, float(et), float(ek), float(ef), bool(ok),
                         point_stiffness_axis=float(pk))
                 for x, t, pt, k, f, pk, et, ek, ef, ok in zip(v, tau, point_tau, K, F, point_K, err["torque_axis"],
                                                                err["stiffness_axis"], err["force"], reached))
    return rows, series


def _show(sweep: Sweep, value: float) -> str:
    return f"{math.degrees(value):.6g} deg" if sweep.kind == "turn" else f"{value:.6g} m"


def _check_indices(n: int, checks: int) -> list[int]:
    if checks <= 0 or n == 0:
        return []
    if checks >= n:
        return list(range(n))
    return sorted(set(int(round(i)) for i in np.linspace(0, n - 1, checks + 2)[1:-1]))


SERIAL_CHECK_SECONDS = 0.5
"""A check value integrated faster than this: the other checks run here too (a pool of worker
processes takes about a second to start)."""


def _check_values(run, values, workers, scheduler, progress):
    """Direct rows at the check values: the first here, the rest here too when it was quick, else in
    parallel (local processes or the cluster)."""
    if scheduler is not None or not values:
        return map_parallel(run, values, workers=workers, scheduler=scheduler, progress=progress,
                            desc="checking multipoles")
    start = time.perf_counter()
    first = run(values[0])
    if time.perf_counter() - start < SERIAL_CHECK_SECONDS:
        return [first] + [run(v) for v in values[1:]]
    return [first] + map_parallel(run, values[1:], workers=workers, progress=progress, desc="checking multipoles")


def _job_row(item) -> ScanRow:
    job, value = item
    return direct_row(job, value)


def _interpolated_rows(scene, sweep, job, position, workers, scheduler, progress):
    """((rows, checks), note) of the interpolated route (sweep_interpolation.py), or (None, why not)."""
    from truepull.integrate import sweep_interpolation as si

    values = np.asarray(sweep.values, float)
    points = si.lobatto_points(float(values.min()), float(values.max()), si.DEGREE)
    extra = si.check_values(values, points)
    items = [(job, float(x)) for x in points] + [(job, x) for x in extra]
    done = map_parallel(_job_row, items, workers=workers, scheduler=scheduler, progress=progress,
                        desc=f"{sweep.kind} of {sweep.group} at {len(points)} Chebyshev points")
    at_points, direct = done[:len(points)], done[len(points):]
    if any(r.overlap for r in at_points):
        return None, "the bodies overlap at a Chebyshev point of the range"
    if not all(r.reached for r in at_points):
        return None, "the engine missed its tolerance at a Chebyshev point"
    found = si.interpolate_sweep(values, at_points, points, job.rtol)
    if found is None:
        return None, (f"the Chebyshev series through {len(points)} points does not fall to {si.TAIL_SHARE:g} of the "
                      "tolerance")
    y, err = found
    point_tau, point_K = point_values_sweep(scene, sweep, job.test, job.source, position)
    rows = tuple(ScanRow(float(v), float(t[0]), float(pt), float(t[1]), t[2:].copy(), float(e[0]), float(e[1]),
                         float(e[2]), True, point_stiffness_axis=float(pk))
                 for v, t, e, pt, pk in zip(values, y, err, point_tau, point_K))
    checks = []
    for d in direct:
        i = int(np.argmin(np.abs(values - d.value)))
        checks.append(CheckResult.of(rows[i], d))
    bad = [c for c in checks if not c.agrees]
    if bad or any(d.overlap or not d.reached for d in direct):
        return None, "the interpolant disagreed with direct integration at a check value"
    return (rows, tuple(checks)), (f"every value interpolated through {len(points)} Chebyshev points of the range "
                                   f"(estimate: twice the series' tail from its decay, plus the engine's error times "
                                   f"{si.lebesgue_bound(si.DEGREE):.3g}, the Lebesgue constant); checked against direct "
                                   f"integration at {len(checks)} value(s)")


def scan(scene, sweep: Sweep, test: str = "pendulum", source: str = "attractor", position=None,
         rtol: float = 1e-9, workers: int | None = None, scheduler=None, progress: bool = False,
         scene_path: str | None = None, multipoles: bool = True, checks: int = DEFAULT_CHECKS,
         interpolate: bool = True) -> ScanResult:
    """Sweep `sweep` and return one row per value (see the module docstring).

    scene_path: when given, worker processes re-load the scene from this file (it must be the file
    `scene` was loaded from); otherwise the scene itself is sent to them. multipoles: allow the fast
    path; checks: how many sweep values are also integrated directly to check it; interpolate: allow
    the interpolated route of a long direct sweep (sweep_interpolation.py)."""
    if not rtol > 0:
        raise InputError(scene.path, "--rtol", "the tolerance must be greater than zero")
    if sweep.group not in scene.groups():
        raise InputError(scene.path, "--group", f"no group '{sweep.group}' (groups: {', '.join(scene.groups())})")
    for name, flag in ((test, "--test"), (source, "--source")):
        if name not in scene.groups():
            raise InputError(scene.path, flag, f"no group '{name}' (groups: {', '.join(scene.groups())})")
    if sweep.kind not in ("turn", "shift") or (sweep.kind == "shift" and sweep.direction not in AXES):
        raise InputError(scene.path, "--shift", "a shift goes along x, y or z")
    if position is not None:
        if isinstance(position, str):
            scene.get_position(position)
    job = DirectJob(scene_path, None if scene_path else scene, position, sweep.kind, sweep.group,
                    sweep.direction, test, source, rtol)
    run = partial(direct_row, job)
    notes: list[str] = []

    if sweep.kind == "turn" and multipoles and sweep.group in (test, source):
        from truepull.integrate.multipoles import MultipoleRefused

        point_tau, point_K = point_values_sweep(scene, sweep, test, source, position)
        try:
            rows, series = _multipole_rows(scene, sweep, test, source, position, rtol, point_tau, point_K)
        except MultipoleRefused as exc:
            notes.append(f"multipole fast path not used: {exc.reason}")
        else:
            idx = _check_indices(len(rows), checks)
            direct = _check_values(run, [rows[i].value for i in idx], workers, scheduler, progress)
            results = []
            for i, d in zip(idx, direct):
                mp = rows[i]
                results.append(CheckResult.of(mp, d))
            bad = [c for c in results if not c.agrees]
            if not bad:
                if idx:
                    notes.append(f"multipole series of degree {series.L} checked against direct integration at "
                                 f"{len(idx)} value(s)")
                notes.extend(series.notes)
                missed = [r for r in rows if not r.reached]
                if missed:
                    worst = max(r.error_torque_axis for r in missed)
                    size = max(abs(r.exact_torque_axis) for r in rows)
                    notes.append(f"tolerance {rtol:g} not reached at {len(missed)} value(s): the tessellation "
                                 f"error makes the torque's error estimate up to {worst:.3g} N m, "
                                 f"{worst / (rtol * max(size, 1e-300)):.3g} times the tolerance of the largest torque")
                return ScanResult(sweep, test, source, rows, "multipole", series.L, tuple(results), tuple(notes),
                                  series)
            worst = max(bad, key=lambda c: abs(c.multipole - c.direct) / max(c.allowed, 1e-300))
            notes.append(f"multipole series disagreed with direct integration at {_show(sweep, worst.value)} "
                         f"({worst.multipole:.10g} against {worst.direct:.10g} N m)")
    from truepull.integrate import sweep_interpolation

    if interpolate and sweep_interpolation.worth_it(len(sweep.values)):
        found, why = _interpolated_rows(scene, sweep, job, position, workers, scheduler, progress)
        if found is not None:
            rows, checked = found
            notes.append(why)
            return ScanResult(sweep, test, source, rows, "interpolated", None, checked, tuple(notes))
        notes.append(f"interpolation in the {sweep.kind} not used: {why}")
    if notes:
        notes.append("every value integrated directly")
    rows = map_parallel(run, list(sweep.values), workers=workers, scheduler=scheduler, progress=progress,
                        desc=f"{sweep.kind} of {sweep.group}")
    overlaps = [r for r in rows if r.overlap]
    if overlaps:
        notes.append(f"test and source bodies overlap at {len(overlaps)} value(s) (the first at "
                     f"{_show(sweep, overlaps[0].value)}): no exact values there")
    missed = sum(not r.reached and not r.overlap for r in rows)
    if missed:
        notes.append(f"tolerance {rtol:g} not reached at {missed} value(s)")
    return ScanResult(sweep, test, source, tuple(rows), "direct", None, (), tuple(notes))
