"""Uncertainty of a model output: GUM linear propagation and Monte Carlo propagation.

A model is a function of a 1-D numpy array of input values (in the order of the `inputs` list, SI
units) returning one float; optionally a vectorised `model_batch` takes a 2-D array, one row per
evaluation, and returns a 1-D array. For parallel runs (local processes) the model must be
picklable: a function defined at the top level of a module, or a functools.partial of one, with
picklable bound arguments; a lambda or a nested function works only with workers=1.

- gum_linear: JCGM 100:2008 law of propagation of uncertainty (section 5), sensitivity
  coefficients by Richardson-extrapolated central differences with an error bound.
- monte_carlo: JCGM 101:2008 propagation of distributions, every input normal N(value, u^2)
  (optionally correlated), with the numerical tolerance of the result estimated from blocks
  (section 7.9) and an adaptive mode that adds draws until that tolerance is reached.
- validate_gum: the JCGM 101:2008 section 8 comparison of the two.
- budget_table: the budget as rows of plain values, in parts per million of a chosen scale.
"""

from __future__ import annotations

import math
import time
from dataclasses import dataclass, field, replace
from functools import partial
from typing import Callable, Sequence

import numpy as np

from truepull.geometry.errors import InputError
from truepull.integrate.balance import coverage as cov
from truepull.integrate import differences
from truepull.integrate.executor import chunk_evenly, map_parallel, resolve_workers


@dataclass(frozen=True)
class Input:
    """One input quantity: its value and standard uncertainty (k = 1), both in SI; `unit` is the
    SI unit's name, for display only."""

    name: str
    value: float
    u: float = 0.0
    unit: str = ""

    def __post_init__(self):
        key = f"input[{self.name}]"
        try:
            value, u = float(self.value), float(self.u)
        except (TypeError, ValueError):
            raise InputError(None, key, "value and uncertainty must be numbers") from None
        if not math.isfinite(value):
            raise InputError(None, key, f"value must be a finite number, got {self.value!r}")
        if not math.isfinite(u) or u < 0:
            raise InputError(None, key, f"standard uncertainty must be a finite number >= 0, got {self.u!r}")
        object.__setattr__(self, "value", value)
        object.__setattr__(self, "u", u)

    @classmethod
    def from_measured(cls, name: str, measured, unit: str = "") -> "Input":
        """From a quantities.Measured (value, u or None); no stated uncertainty means u = 0."""
        return cls(name, measured.value, measured.u or 0.0, unit)


def _check_inputs(inputs: Sequence[Input]) -> tuple[np.ndarray, np.ndarray]:
    if len(inputs) == 0:
        raise InputError(None, "inputs", "at least one input quantity is needed")
    names = [i.name for i in inputs]
    dupes = sorted({n for n in names if names.count(n) > 1})
    if dupes:
        raise InputError(None, "inputs", f"input names must be unique; repeated: {', '.join(dupes)}")
    return (np.array([i.value for i in inputs], dtype=float),
            np.array([i.u for i in inputs], dtype=float))


def _check_correlations(correlations, n: int) -> np.ndarray | None:
    """The correlation matrix as an array, checked: n x n, symmetric, unit diagonal, |r| <= 1,
    positive semi-definite. None means uncorrelated."""
    if correlations is None:
        return None
    r = np.asarray(correlations, dtype=float)
    if r.shape != (n, n):
        raise InputError(None, "correlations", f"expected a {n} x {n} matrix, got shape {r.shape}")
    if not np.all(np.isfinite(r)):
        raise InputError(None, "correlations", "entries must be finite numbers")
    if not np.allclose(r, r.T, rtol=0, atol=1e-12):
        raise InputError(None, "correlations", "the matrix must be symmetric")
    if not np.allclose(np.diag(r), 1.0, rtol=0, atol=1e-12):
        raise InputError(None, "correlations", "the diagonal must be all ones")
    if np.any(np.abs(r) > 1 + 1e-12):
        raise InputError(None, "correlations", "correlation coefficients must lie in [-1, 1]")
    if np.linalg.eigvalsh(r).min() < -1e-10:
        raise InputError(None, "correlations", "the matrix is not positive semi-definite, so no "
                         "joint distribution has these correlations")
    return r


def _model_values(model, model_batch, points: np.ndarray) -> np.ndarray:
    """The model at each row of points (k, n), as a float array of length k."""
    if model_batch is not None:
        out = np.asarray(model_batch(points), dtype=float).reshape(-1)
    else:
        out = np.array([_scalar(model(p)) for p in points], dtype=float)
    if out.size != points.shape[0]:
        raise ValueError(f"the model returned {out.size} values for {points.shape[0]} evaluations")
    return out


def _scalar(value) -> float:
    arr = np.asarray(value, dtype=float)
    if arr.size != 1:
        raise ValueError(f"the model must return one number, got an array of shape {arr.shape}")
    return float(arr.reshape(-1)[0])


def _evaluate_rows(model, model_batch, rows: np.ndarray) -> np.ndarray:
    """Task: the model on a block of rows (top level, so it can be sent to worker processes)."""
    return _model_values(model, model_batch, rows)


def _evaluate(model, model_batch, points, workers, scheduler, progress, desc) -> np.ndarray:
    if model is None and model_batch is None:
        raise TypeError("give a model (or model_batch)")
    k = points.shape[0]
    if model_batch is None:
        n_tasks = k  # one evaluation per item; map_parallel groups them into tasks
    elif scheduler is None:
        n_tasks = min(k, resolve_workers(workers))
    else:
        n_tasks = min(k, 32)
    rows = [np.vstack(c) for c in chunk_evenly(list(points), n_tasks)]
    parts = map_parallel(partial(_evaluate_rows, model, model_batch), rows, workers=workers,
                         scheduler=scheduler, progress=progress, desc=desc)
    return np.concatenate(parts)


# ---------------------------------------------------------------------------------------------
# GUM linear propagation


@dataclass(frozen=True)
class BudgetRow:
    """One input's line of the budget: c = dy/dx (output unit per input unit), contribution
    |c u| (output unit), share (c u)^2 / u_c^2 of the combined variance (shares of correlated
    inputs need not add up to one)."""

    input: str
    value: float
    u: float
    unit: str
    sensitivity: float
    sensitivity_error: float
    contribution: float
    share: float

    def contribution_ppm(self, scale: float) -> float:
        """The contribution in parts per million of |scale| (NaN for a zero scale)."""
        return _ppm(self.contribution, scale)


@dataclass(frozen=True)
class GumResult:
    """y and its combined standard uncertainty u_c (k = 1), with the budget rows in input order.
    u_c_error bounds the part of u_c's error that comes from the derivative errors."""

    value: float
    u_c: float
    rows: tuple[BudgetRow, ...]
    u_c_error: float
    correlated: bool = False
    # the derivative stencil, kept for a second-order model (quadratic_surrogate): steps h_i and the
    # model values at x + k h_i e_i, k = differences.OFFSETS, shape (n, 4)
    steps: np.ndarray | None = field(default=None, repr=False, compare=False)
    stencil: np.ndarray | None = field(default=None, repr=False, compare=False)

    def to_ppm(self, scale: float | None = None) -> float:
        """u_c in parts per million of |scale| (default: of y itself)."""
        return _ppm(self.u_c, self.value if scale is None else scale)

    def interval(self, p: float = 0.95) -> tuple[float, float]:
        """y -+ k_p u_c with k_p from the normal distribution (JCGM 100:2008 G.6.3, infinite
        effective degrees of freedom)."""
        from scipy.stats import norm

        k = float(norm.ppf(0.5 + p / 2.0))
        return self.value - k * self.u_c, self.value + k * self.u_c


def _ppm(x: float, scale: float) -> float:
    scale = abs(float(scale))
    return x / scale * 1e6 if scale > 0 else math.nan


def gum_linear(model: Callable[[np.ndarray], float] | None, inputs: Sequence[Input], *,
               steps: Sequence[float | None] | None = None, correlations=None,
               model_batch: Callable[[np.ndarray], np.ndarray] | None = None,
               rel_noise: float = differences.DEFAULT_REL_NOISE, workers: int | None = 1,
               scheduler=None, progress: bool = False) -> GumResult:
    """JCGM 100:2008 law of propagation: u_c^2 = sum_ij c_i c_j u_i u_j r_ij (eq. 13 and 16).

    c_i = df/dx_i by a Richardson-extrapolated 4-point central difference with step h_i (default
    differences.default_steps). rel_noise is the relative noise of the model's values (raise it for
    a model computed by quadrature to a tolerance), used in the derivative error bound. An input
    with u = 0 gets its sensitivity computed and a contribution of zero. The 4n + 1 model
    evaluations go through executor.map_parallel (workers=1: serially here)."""
    values, u = _check_inputs(inputs)
    n = values.size
    r = _check_correlations(correlations, n)
    h = differences.default_steps(values, u)
    if steps is not None:
        if len(steps) != n:
            raise InputError(None, "steps", f"expected {n} steps (one per input), got {len(steps)}")
        for i, s in enumerate(steps):
            if s is None:
                continue
            if not (math.isfinite(float(s)) and float(s) > 0):
                raise InputError(None, "steps", f"the step for '{inputs[i].name}' must be a positive number")
            h[i] = float(s)
    points = differences.stencil_points(values, h)
    all_points = np.vstack([values[None, :], points.reshape(-1, n)])
    f_all = _evaluate(model, model_batch, all_points, workers, scheduler, progress, "sensitivities")
    if not math.isfinite(f_all[0]):
        raise InputError(None, None, "the model gave a non-finite value at the input values")
    f_stencil = f_all[1:].reshape(n, len(differences.OFFSETS))
    bad = [inputs[i].name for i in range(n) if not np.all(np.isfinite(f_stencil[i]))]
    if bad:
        raise InputError(None, "steps", "the model gave a non-finite value when stepping "
                         f"{', '.join(bad)}; give smaller steps")
    y = float(f_all[0])
    c, c_err = differences.derivatives(f_stencil, h, y, rel_noise)
    cu = c * u
    cov_matrix = np.diag(u) @ (np.eye(n) if r is None else r) @ np.diag(u)
    variance = float(c @ cov_matrix @ c)
    u_c = math.sqrt(max(variance, 0.0))
    # |d u_c| <= |V c| . |d c| / u_c  (first order in the derivative errors)
    u_c_error = float(np.abs(cov_matrix @ c) @ c_err / u_c) if u_c > 0 else float(np.abs(c_err) @ u)
    rows = tuple(
        BudgetRow(input=inp.name, value=inp.value, u=inp.u, unit=inp.unit,
                  sensitivity=float(c[i]), sensitivity_error=float(c_err[i]),
                  contribution=float(abs(cu[i])),
                  share=float(cu[i] ** 2 / variance) if variance > 0 else 0.0)
        for i, inp in enumerate(inputs))
    return GumResult(value=y, u_c=u_c, rows=rows, u_c_error=u_c_error, correlated=r is not None,
                     steps=h.copy(), stencil=f_stencil.copy())


def budget_table(result: GumResult, y_scale: float | None = None) -> list[dict]:
    """The budget as a list of plain dicts, one per input, with ppm of |y_scale| (default y)."""
    if not isinstance(result, GumResult):
        raise TypeError("budget_table needs a GumResult (from gum_linear)")
    scale = result.value if y_scale is None else float(y_scale)
    return [{"input": row.input, "value": row.value, "u": row.u, "unit": row.unit,
             "sensitivity": row.sensitivity, "sensitivity_error": row.sensitivity_error,
             "contribution": row.contribution, "contribution_ppm": row.contribution_ppm(scale),
             "share": row.share}
            for row in result.rows]


# ---------------------------------------------------------------------------------------------
# Monte Carlo propagation


@dataclass(frozen=True)
class McTolerance:
    """Standard deviations of the block-mean estimates (JCGM 101:2008 7.9.4 f, g): how far each
    reported number may move with other draws. Same unit as the output."""

    mean: float
    u: float
    low: float
    high: float
    shortest_low: float
    shortest_high: float

    def rule(self) -> float:
        """The largest of the four that JCGM 101:2008 7.9.4 j) tests: s_y, s_u, s_ylow, s_yhigh
        (the ends of the probabilistically symmetric interval)."""
        return max(self.mean, self.u, self.low, self.high)

    def largest(self) -> float:
        """The largest of all six, the shortest interval's ends included."""
        return max(self.rule(), self.shortest_low, self.shortest_high)


# the interval whose ends the stopping rule tests, and the one given beside it (JCGM 101:2008 7.7)
INTERVAL_KIND = "probabilistically symmetric"
SHORTEST_KIND = "shortest"


def block_size(coverage: float) -> int:
    """M = max(J, 10^4) draws per block, J the smallest whole number >= 100 / (1 - p)
    (JCGM 101:2008 7.9.4 b)."""
    return max(math.ceil(100.0 / (1.0 - coverage) - 1e-9), 10_000)


@dataclass(frozen=True)
class McResult:
    """Monte Carlo result: mean y, standard deviation u (k = 1), the probabilistically symmetric
    interval (`interval`) and the shortest one (`shortest`) of probability `coverage`, from `draws`
    model values in `blocks` blocks. delta is the numerical tolerance aimed at (JCGM 101:2008 7.9.2);
    `stable` says whether 2 s_y, 2 s_u, 2 s_ylow and 2 s_yhigh are all within delta (7.9.4 j), and
    `shortest_stable` the same for the shortest interval's ends. `adaptive` whether draws were added
    until stable (up to max_draws). seed repeats the run."""

    value: float
    u: float
    interval: tuple[float, float]
    shortest: tuple[float, float]
    coverage: float
    draws: int
    blocks: int
    tolerance: McTolerance
    delta: float
    stable: bool
    seed: int
    values: np.ndarray = field(repr=False, compare=False)
    shortest_stable: bool = False
    adaptive: bool = False
    max_draws: int | None = None

    def to_ppm(self, scale: float | None = None) -> float:
        """u in parts per million of |scale| (default: of the mean)."""
        return _ppm(self.u, self.value if scale is None else scale)


@dataclass(frozen=True)
class _DrawSpec:
    """What a worker needs to draw and evaluate a group of Monte Carlo trials."""

    model: Callable | None
    model_batch: Callable | None
    values: np.ndarray
    u: np.ndarray
    factor: np.ndarray | None  # lower-triangular (or symmetric) factor of the correlation matrix
    entropy: int


def _draw_inputs(spec: _DrawSpec, index: int, size: int) -> np.ndarray:
    """Input draws (size, n) of group `index`: one independent normal stream per input and group,
    SeedSequence(entropy, spawn_key=(index, i)), so a draw never depends on how the work is split."""
    n = spec.values.size
    z = np.empty((size, n))
    for i in range(n):
        stream = np.random.Generator(np.random.PCG64(
            np.random.SeedSequence(spec.entropy, spawn_key=(index, i))))
        z[:, i] = stream.standard_normal(size)
    if spec.factor is not None:
        z = z @ spec.factor.T
    return spec.values + spec.u * z


def _evaluate_draws(spec: _DrawSpec, item: tuple[int, int]) -> np.ndarray:
    """Task: the model on group `item = (index, size)` of draws."""
    index, size = item
    return _model_values(spec.model, spec.model_batch, _draw_inputs(spec, index, size))


def _correlation_factor(r: np.ndarray | None) -> np.ndarray | None:
    if r is None:
        return None
    try:
        return np.linalg.cholesky(r)
    except np.linalg.LinAlgError:  # semi-definite: symmetric square root
        w, q = np.linalg.eigh(r)
        return q @ np.diag(np.sqrt(np.clip(w, 0.0, None))) @ q.T


def _block_statistics(values: np.ndarray, p: float):
    """(mean, standard deviation, symmetric low, high, shortest low, high) of one block."""
    y = np.sort(values)
    lo, hi = cov.symmetric_interval(y, p)
    slo, shi = cov.shortest_interval(y, p)
    return float(np.mean(y)), float(np.std(y, ddof=1)), lo, hi, slo, shi


def _pooled_std(means: np.ndarray, stds: np.ndarray, sizes: np.ndarray) -> float:
    """Standard deviation of all values from the blocks' means, standard deviations and sizes."""
    sizes = np.asarray(sizes, dtype=float)
    total = sizes.sum()
    mean = float(sizes @ means / total)
    ss = float((sizes - 1) @ stds**2 + sizes @ (means - mean) ** 2)
    return math.sqrt(ss / (total - 1))


def _split(total: int, parts: int) -> list[int]:
    return [int(s) for s in np.diff(np.linspace(0, total, parts + 1).round().astype(int))]


def monte_carlo(model: Callable[[np.ndarray], float] | None, inputs: Sequence[Input], *,
                samples: int = 10_000, seed: int | None = 0, correlations=None,
                coverage: float = 0.95, blocks: int = 10, groups_per_block: int = 10,
                adaptive: bool = False, digits: int = 2, tolerance: float | None = None,
                max_samples: int | None = None, step_blocks: int | None = None,
                model_batch: Callable[[np.ndarray], np.ndarray] | None = None,
                scheduler=None, workers: int | None = None, progress: bool = False) -> McResult:
    """JCGM 101:2008 propagation of distributions with normal inputs N(value, u^2).

    The `samples` draws form `blocks` blocks (the h applications of JCGM 101 7.9.4), each split
    into `groups_per_block` groups evaluated as tasks through executor.map_parallel; the draws
    depend only on seed and layout, never on the executor, so serial, local and Dask runs agree
    exactly. The block results give the numerical tolerances s_y, s_u, s_ylow, s_yhigh (7.9.4 f, g).
    adaptive=True then adds `step_blocks` blocks of the same size at a time (default: `blocks`)
    until 2 s_y, 2 s_u, 2 s_ylow and 2 s_yhigh are all within delta (7.9.4 j; delta from
    `tolerance`, or from u to `digits` significant digits, 7.9.2), or until max_samples draws
    (default 100 x samples). The JCGM 101 layout itself is samples = h M, blocks = h with
    M = block_size(coverage) and step_blocks = 1. The model must be picklable for local worker
    processes (see the module notes)."""
    if model is None and model_batch is None:
        raise TypeError("give a model (or model_batch)")
    values, u = _check_inputs(inputs)
    r = _check_correlations(correlations, values.size)
    if not (isinstance(coverage, float | int) and 0 < coverage < 1):
        raise InputError(None, "coverage", f"coverage probability must lie strictly between 0 and 1, got {coverage!r}")
    for key, number, least in (("samples", samples, 1), ("blocks", blocks, 2),
                               ("groups_per_block", groups_per_block, 1), ("digits", digits, 1)):
        if isinstance(number, bool) or not isinstance(number, int | np.integer) or number < least:
            raise InputError(None, key, f"must be a whole number of at least {least}, got {number!r}")
    per_block_min = cov.min_values(coverage)
    n_blocks = min(blocks, samples // per_block_min)
    if n_blocks < 2:
        raise InputError(None, "samples", f"at least {2 * per_block_min} draws are needed for a "
                         f"{coverage:g} coverage interval with a tolerance estimate, got {samples}")
    if tolerance is not None and not (math.isfinite(tolerance) and tolerance > 0):
        raise InputError(None, "tolerance", f"must be a positive number, got {tolerance!r}")
    limit = 100 * samples if max_samples is None else int(max_samples)
    if adaptive and limit < samples:
        raise InputError(None, "max_samples", f"must be at least samples ({samples}), got {limit}")
    step = n_blocks if step_blocks is None else step_blocks
    if isinstance(step, bool) or not isinstance(step, int | np.integer) or not 1 <= step <= n_blocks:
        raise InputError(None, "step_blocks", f"must be a whole number from 1 to {n_blocks}, got {step!r}")

    entropy = int(np.random.SeedSequence(seed).entropy)
    spec = _DrawSpec(model, model_batch, values, u, _correlation_factor(r), entropy)
    first_sizes = _split(samples, n_blocks)
    group_sizes = {b: _split(b, min(groups_per_block, b)) for b in set(first_sizes)}

    parts: list[np.ndarray] = []
    block_stats: list[tuple] = []
    sizes_so_far: list[int] = []
    next_group = 0
    round_sizes = first_sizes
    while True:
        items = []
        for b in round_sizes:
            for size in group_sizes[b]:
                items.append((next_group, size))
                next_group += 1
        desc = "Monte Carlo" if not parts else f"Monte Carlo, {len(sizes_so_far) + len(round_sizes)} blocks"
        chunks = map_parallel(partial(_evaluate_draws, spec), items, workers=workers,
                              scheduler=scheduler, progress=progress, desc=desc)
        batch_values = np.concatenate(chunks)
        bad = int(np.count_nonzero(~np.isfinite(batch_values)))
        if bad:
            raise InputError(None, None, f"the model gave a non-finite value for {bad} of "
                             f"{batch_values.size} Monte Carlo draws; the input uncertainties may "
                             "reach outside the range where the model is defined")
        start = 0
        for b in round_sizes:
            block_stats.append(_block_statistics(batch_values[start:start + b], coverage))
            start += b
        parts.append(batch_values)
        sizes_so_far += round_sizes

        stats = np.array(block_stats)
        h = stats.shape[0]
        spread = np.std(stats, axis=0, ddof=1) / math.sqrt(h)  # JCGM 101 7.9.4 f), g)
        tol = McTolerance(*(float(v) for v in spread))
        std = _pooled_std(stats[:, 0], stats[:, 1], np.array(sizes_so_far))  # 7.9.4 h)
        delta = float(tolerance) if tolerance is not None else cov.tolerance_for_digits(std, digits)  # i)
        stable = 2.0 * tol.rule() <= delta  # j)
        round_sizes = first_sizes[:step]
        if not adaptive or stable or sum(sizes_so_far) + sum(round_sizes) > limit:
            break

    all_values = np.concatenate(parts)
    y_sorted = np.sort(all_values)
    mean = float(np.mean(all_values))
    std = float(np.std(all_values, ddof=1))
    shortest_stable = 2.0 * max(tol.shortest_low, tol.shortest_high) <= delta
    return McResult(value=mean, u=std, interval=cov.symmetric_interval(y_sorted, coverage),
                    shortest=cov.shortest_interval(y_sorted, coverage), coverage=float(coverage),
                    draws=int(all_values.size), blocks=h, tolerance=tol, delta=delta,
                    stable=bool(stable), seed=entropy, values=all_values,
                    shortest_stable=bool(shortest_stable), adaptive=bool(adaptive),
                    max_draws=limit if adaptive else None)


# ---------------------------------------------------------------------------------------------
# second-order surrogate, checked against the model itself

# the JCGM 101:2008 7.9.4 run through a surrogate: 10 blocks of block_size(p) draws to start with,
# then one block at a time, at most this many draws
SURROGATE_MAX_DRAWS = 5_000_000
# mixed second derivatives are computed among at most this many leading inputs ...
SURROGATE_LEADING = 8
# ... those whose |c_i| u_i + |H_ii| u_i^2 is at least this fraction of the largest
SURROGATE_CUT = 1e-2
# a surrogate found not negligible is built again with at most this many mixed-derivative evaluations
SURROGATE_REFINE_EVALUATIONS = 400
# spawn keys of the check draws start here, apart from every Monte Carlo group index
CHECK_GROUP_BASE = 2**40
CHECK_GROUPS = 16


@dataclass(frozen=True)
class QuadraticModel:
    """y(x) = y0 + c . d + 1/2 d^T H d with d = x - x0: a second-order Taylor model (output unit;
    x in the inputs' SI units). `pairs` lists the (i, j) whose mixed derivative H_ij was computed;
    the other mixed entries are zero. Called on a 2-D array (one row per point) it returns one
    value per row, so it serves as a Monte Carlo model_batch."""

    x0: np.ndarray
    y0: float
    gradient: np.ndarray
    hessian: np.ndarray
    pairs: tuple[tuple[int, int], ...] = ()

    def __call__(self, points) -> np.ndarray:
        d = np.atleast_2d(np.asarray(points, dtype=float)) - self.x0
        return self.y0 + d @ self.gradient + 0.5 * np.einsum("ki,ij,kj->k", d, self.hessian, d)


def leading_inputs(c: np.ndarray, d2: np.ndarray, u: np.ndarray, *, most: int = SURROGATE_LEADING,
                   cut: float = SURROGATE_CUT) -> list[int]:
    """Indices of the inputs whose first- and second-order terms |c_i| u_i + |H_ii| u_i^2 are
    largest: at most `most`, none below `cut` times the largest, largest first."""
    s = np.abs(c) * u + np.abs(d2) * u**2
    top = float(np.max(s)) if s.size else 0.0
    order = [int(i) for i in np.argsort(-s, kind="stable") if s[i] > 0 and s[i] >= cut * top]
    return order[:most]


def quadratic_surrogate(model, inputs: Sequence[Input], gum: GumResult, *, leading: Sequence[int] | None = None,
                        model_batch=None, rel_noise: float = differences.DEFAULT_REL_NOISE,
                        workers: int | None = 1, scheduler=None, progress: bool = False
                        ) -> tuple[QuadraticModel, int]:
    """The second-order Taylor model of `model` at the input values, and the number of extra model
    evaluations it took. Gradient: the GUM step's Richardson central differences (gum, from
    gum_linear with the same model and inputs); diagonal second derivatives: Richardson second
    differences on the same stencil (no new evaluations); mixed H_ij for every pair among the
    `leading` inputs (default leading_inputs) by the 4-point difference
    (f(++) - f(+-) - f(-+) + f(--)) / (4 h_i h_j) with the GUM's steps, evaluated through
    executor.map_parallel. Mixed terms of other pairs are left out; check_surrogate measures what
    that and everything else of third and higher order costs."""
    values, u = _check_inputs(inputs)
    if gum.stencil is None or gum.steps is None or len(gum.rows) != values.size:
        raise TypeError("quadratic_surrogate needs the GumResult of gum_linear for these inputs")
    h = np.asarray(gum.steps, dtype=float)
    c = np.array([row.sensitivity for row in gum.rows])
    d2, _ = differences.second_derivatives(gum.stencil, h, gum.value, rel_noise)
    hessian = np.diag(d2)
    lead = leading_inputs(c, d2, u) if leading is None else [int(i) for i in leading]
    pairs = tuple((min(a, b), max(a, b)) for k, a in enumerate(lead) for b in lead[k + 1:])
    evaluations = 0
    if pairs:
        points = []
        for i, j in pairs:
            for a in (1.0, -1.0):
                for b in (1.0, -1.0):
                    p = values.copy()
                    p[i] += a * h[i]
                    p[j] += b * h[j]
                    points.append(p)
        f = _evaluate(model, model_batch, np.array(points), workers, scheduler, progress,
                      "second derivatives").reshape(len(pairs), 4)
        if not np.all(np.isfinite(f)):
            raise InputError(None, "steps", "the model gave a non-finite value for a mixed second derivative")
        for (i, j), (fpp, fpm, fmp, fmm) in zip(pairs, f):
            hessian[i, j] = hessian[j, i] = (fpp - fpm - fmp + fmm) / (4.0 * h[i] * h[j])
        evaluations = f.size
    return QuadraticModel(values, float(gum.value), c, hessian, pairs), evaluations


@dataclass(frozen=True)
class SurrogateCheck:
    """The surrogate against the model itself at `draws` independent draws of the inputs (the Monte
    Carlo's distribution): the largest and the root-mean-square difference (output unit), and the
    mean and standard deviation of the model's own values there."""

    draws: int
    max_error: float
    rms_error: float
    full_mean: float
    full_u: float
    values: np.ndarray = field(repr=False, compare=False)
    errors: np.ndarray = field(repr=False, compare=False)


def check_surrogate(model, surrogate: QuadraticModel, inputs: Sequence[Input], *, draws: int = 100,
                    seed: int | None = 0, correlations=None, model_batch=None, workers: int | None = 1,
                    scheduler=None, progress: bool = False) -> SurrogateCheck:
    """`draws` draws of the inputs through the model (executor.map_parallel: local processes or a
    Dask cluster) and through the surrogate. The draws come from streams of their own (spawn keys
    from CHECK_GROUP_BASE), fixed by the seed and `draws` alone, whatever runs them."""
    values, u = _check_inputs(inputs)
    r = _check_correlations(correlations, values.size)
    if isinstance(draws, bool) or not isinstance(draws, int | np.integer) or draws < 2:
        raise InputError(None, "--check-draws", f"must be a whole number of at least 2, got {draws!r}")
    entropy = int(np.random.SeedSequence(seed).entropy)
    spec = _DrawSpec(model, model_batch, values, u, _correlation_factor(r), entropy)
    items = [(CHECK_GROUP_BASE + k, size) for k, size in enumerate(_split(draws, min(draws, CHECK_GROUPS)))]
    full = np.concatenate(map_parallel(partial(_evaluate_draws, spec), items, workers=workers,
                                       scheduler=scheduler, progress=progress, desc="surrogate check"))
    if not np.all(np.isfinite(full)):
        raise InputError(None, None, "the model gave a non-finite value at a check draw of the surrogate")
    points = np.vstack([_draw_inputs(spec, index, size) for index, size in items])
    errors = full - surrogate(points)
    return SurrogateCheck(draws=int(draws), max_error=float(np.max(np.abs(errors))),
                          rms_error=float(np.sqrt(np.mean(errors**2))), full_mean=float(np.mean(full)),
                          full_u=float(np.std(full, ddof=1)), values=full, errors=errors)


@dataclass(frozen=True)
class SurrogateMonteCarlo:
    """A Monte Carlo run through a checked second-order surrogate: the Monte Carlo result (`mc`), the
    surrogate, how many model evaluations its mixed derivatives took, and its check. The surrogate's
    error folds in as bounds: the model's standard deviation is at most u + rms (Minkowski's
    inequality, with the rms measured at the check draws), and where the model differs from the
    surrogate by at most `max_error` its quantiles differ by at most that much too."""

    mc: McResult
    surrogate: QuadraticModel
    evaluations: int
    check: SurrogateCheck
    # wall times (s): the mixed derivatives, the surrogate's draws, the check draws
    build_seconds: float = 0.0
    draw_seconds: float = 0.0
    check_seconds: float = 0.0
    refined: bool = False  # built a second time with more mixed derivatives after a failed check

    @property
    def u_bound(self) -> float:
        return self.mc.u + self.check.rms_error

    @property
    def interval_bound(self) -> tuple[float, float]:
        return self.mc.interval[0] - self.check.max_error, self.mc.interval[1] + self.check.max_error

    @property
    def negligible(self) -> bool:
        """Whether twice the largest surrogate error is within the numerical tolerance delta (the
        rule the Monte Carlo's own stability is held to), so it cannot change the stated digits."""
        return 2.0 * self.check.max_error <= self.mc.delta


def surrogate_monte_carlo(model, inputs: Sequence[Input], gum: GumResult, *, samples: int | None = None,
                          check_model=None, check_draws: int = 100, seed: int | None = 0, correlations=None,
                          coverage: float = 0.95, digits: int = 2, max_samples: int = SURROGATE_MAX_DRAWS,
                          leading: Sequence[int] | None = None, rel_noise: float = differences.DEFAULT_REL_NOISE,
                          refine_evaluations: int = SURROGATE_REFINE_EVALUATIONS, workers: int | None = 1,
                          scheduler=None, progress: bool = False) -> SurrogateMonteCarlo:
    """JCGM 101:2008 Monte Carlo through the quadratic_surrogate of `model` (built from `gum`), checked
    by check_surrogate at `check_draws` draws of `check_model` (default: `model`; e.g. the same model
    at a looser engine tolerance). samples None: the adaptive procedure of JCGM 101 7.9.4 with blocks
    of M = block_size(coverage) draws, 10 to start with and then one at a time, until stable to
    `digits` significant digits of u (or max_samples draws); samples N: N draws in 10 blocks, the
    stability judged all the same. The model evaluations go through executor.map_parallel; the
    surrogate's draws are vectorised here. When the check finds the surrogate's error not negligible
    (and `leading` is not given), the surrogate is built once more with the mixed derivatives among
    as many inputs as `refine_evaluations` model evaluations allow, and run and checked again."""
    result = _surrogate_run(model, inputs, gum, leading, samples, check_model, check_draws, seed, correlations,
                            coverage, digits, max_samples, rel_noise, workers, scheduler, progress)
    if result.negligible or leading is not None or refine_evaluations <= result.evaluations:
        return result
    # not good enough: the mixed derivatives among as many inputs as `refine_evaluations` allow
    # (those with a nonzero u, by |c_i| u_i + |H_ii| u_i^2, then by relative uncertainty u_i / |x_i|),
    # and the run and its check again
    values, u = _check_inputs(inputs)
    c = np.array([row.sensitivity for row in gum.rows])
    d2, _ = differences.second_derivatives(gum.stencil, np.asarray(gum.steps, float), gum.value, rel_noise)
    score = np.abs(c) * u + np.abs(d2) * u**2
    rel = np.where(values != 0, u / np.where(values != 0, np.abs(values), 1.0), u)
    order = sorted((i for i in range(values.size) if u[i] > 0), key=lambda i: (-score[i], -rel[i]))
    k = len(order)
    while k > 2 and 2 * k * (k - 1) > refine_evaluations:
        k -= 1
    if k <= len(result.surrogate.pairs) and set(order[:k]) <= {i for p in result.surrogate.pairs for i in p}:
        return result
    again = _surrogate_run(model, inputs, gum, order[:k], samples, check_model, check_draws, seed, correlations,
                           coverage, digits, max_samples, rel_noise, workers, scheduler, progress)
    return replace(again, evaluations=again.evaluations + result.evaluations,
                   build_seconds=again.build_seconds + result.build_seconds,
                   draw_seconds=again.draw_seconds + result.draw_seconds,
                   check_seconds=again.check_seconds + result.check_seconds, refined=True)


def _surrogate_run(model, inputs, gum, leading, samples, check_model, check_draws, seed, correlations, coverage,
                   digits, max_samples, rel_noise, workers, scheduler, progress) -> SurrogateMonteCarlo:
    t0 = time.perf_counter()
    surrogate, evaluations = quadratic_surrogate(model, inputs, gum, leading=leading, rel_noise=rel_noise,
                                                 workers=workers, scheduler=scheduler, progress=progress)
    t1 = time.perf_counter()
    if samples is None:
        m = block_size(coverage)
        mc = monte_carlo(None, inputs, samples=10 * m, seed=seed, correlations=correlations, coverage=coverage,
                         blocks=10, groups_per_block=1, adaptive=True, digits=digits,
                         max_samples=max(int(max_samples), 10 * m), step_blocks=1, model_batch=surrogate,
                         workers=1)
    else:
        mc = monte_carlo(None, inputs, samples=samples, seed=seed, correlations=correlations, coverage=coverage,
                         blocks=10, groups_per_block=1, digits=digits, model_batch=surrogate, workers=1)
    t2 = time.perf_counter()
    check = check_surrogate(check_model or model, surrogate, inputs, draws=check_draws, seed=seed,
                            correlations=correlations, workers=workers, scheduler=scheduler, progress=progress)
    t3 = time.perf_counter()
    return SurrogateMonteCarlo(mc=mc, surrogate=surrogate, evaluations=evaluations, check=check,
                               build_seconds=t1 - t0, draw_seconds=t2 - t1, check_seconds=t3 - t2)


# ---------------------------------------------------------------------------------------------
# comparison


@dataclass(frozen=True)
class GumCheck:
    """JCGM 101:2008 section 8.2: the GUM interval y -+ U_p against the Monte Carlo symmetric
    interval; the GUM is validated when both end differences are within delta."""

    d_low: float
    d_high: float
    delta: float
    agrees: bool


def validate_gum(gum: GumResult, mc: McResult, *, digits: int = 2) -> GumCheck:
    """Compare the GUM and Monte Carlo coverage intervals (same coverage probability) with the
    numerical tolerance of u_c to `digits` significant digits (JCGM 101:2008 8.2)."""
    low, high = gum.interval(mc.coverage)
    d_low = abs(low - mc.interval[0])
    d_high = abs(high - mc.interval[1])
    delta = cov.tolerance_for_digits(gum.u_c, digits)
    return GumCheck(d_low=d_low, d_high=d_high, delta=delta, agrees=max(d_low, d_high) <= delta)
