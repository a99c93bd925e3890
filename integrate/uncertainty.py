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
from dataclasses import dataclass, field
from functools import partial
from typing import Callable, Sequence

import numpy as np

from truepull.geometry.errors import InputError
from truepull.integrate import coverage as cov
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
    return GumResult(value=y, u_c=u_c, rows=rows, u_c_error=u_c_error, correlated=r is not None)


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
    """Standard deviations of the block-mean estimates (JCGM 101:2008 7.9.4 d): how far each
    reported number may move with other draws. Same unit as the output."""

    mean: float
    u: float
    low: float
    high: float
    shortest_low: float
    shortest_high: float

    def largest(self) -> float:
        return max(self.mean, self.u, self.low, self.high, self.shortest_low, self.shortest_high)


@dataclass(frozen=True)
class McResult:
    """Monte Carlo result: mean y, standard deviation u (k = 1), the probabilistically symmetric
    and the shortest coverage intervals of probability `coverage`, from `draws` model values in
    `blocks` blocks. delta is the numerical tolerance aimed at (JCGM 101:2008 7.9.2) and `stable`
    says whether 2 x every block tolerance is within it. seed repeats the run."""

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


def monte_carlo(model: Callable[[np.ndarray], float] | None, inputs: Sequence[Input], *,
                samples: int = 10_000, seed: int | None = 0, correlations=None,
                coverage: float = 0.95, blocks: int = 10, groups_per_block: int = 10,
                adaptive: bool = False, digits: int = 2, tolerance: float | None = None,
                max_samples: int | None = None,
                model_batch: Callable[[np.ndarray], np.ndarray] | None = None,
                scheduler=None, workers: int | None = None, progress: bool = False) -> McResult:
    """JCGM 101:2008 propagation of distributions with normal inputs N(value, u^2).

    The `samples` draws form `blocks` blocks (JCGM 101 7.9.4 stages), each split into
    `groups_per_block` groups evaluated as tasks through executor.map_parallel; the draws depend
    only on seed and layout, never on the executor, so serial, local and Dask runs agree exactly.
    The block results give the numerical tolerance of y, u and the interval ends. adaptive=True
    adds batches of the same layout until twice each of those is within delta (from `tolerance`,
    or u to `digits` significant digits, 7.9.2), or until max_samples (default 100 x samples).
    The model must be picklable for local worker processes (see the module notes)."""
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

    entropy = int(np.random.SeedSequence(seed).entropy)
    spec = _DrawSpec(model, model_batch, values, u, _correlation_factor(r), entropy)
    block_sizes = [int(s) for s in np.diff(np.linspace(0, samples, n_blocks + 1).round().astype(int))]
    group_sizes = [[int(s) for s in np.diff(np.linspace(0, b, min(groups_per_block, b) + 1).round().astype(int))]
                   for b in block_sizes]
    groups_per_batch = sum(len(g) for g in group_sizes)

    parts: list[np.ndarray] = []
    block_stats: list[tuple] = []
    batch = 0
    while True:
        first = batch * groups_per_batch
        items, index = [], first
        for sizes in group_sizes:
            for size in sizes:
                items.append((index, size))
                index += 1
        desc = "Monte Carlo" if batch == 0 else f"Monte Carlo, batch {batch + 1}"
        chunks = map_parallel(partial(_evaluate_draws, spec), items, workers=workers,
                              scheduler=scheduler, progress=progress, desc=desc)
        batch_values = np.concatenate(chunks)
        bad = int(np.count_nonzero(~np.isfinite(batch_values)))
        if bad:
            raise InputError(None, None, f"the model gave a non-finite value for {bad} of "
                             f"{batch_values.size} Monte Carlo draws; the input uncertainties may "
                             "reach outside the range where the model is defined")
        start = 0
        for b in block_sizes:
            block_stats.append(_block_statistics(batch_values[start:start + b], coverage))
            start += b
        parts.append(batch_values)
        batch += 1

        stats = np.array(block_stats)
        h = stats.shape[0]
        spread = np.std(stats, axis=0, ddof=1) / math.sqrt(h)  # JCGM 101 7.9.4 d)
        tol = McTolerance(*(float(v) for v in spread))
        std = _pooled_std(stats[:, 0], stats[:, 1], np.tile(block_sizes, batch))
        delta = float(tolerance) if tolerance is not None else cov.tolerance_for_digits(std, digits)
        stable = 2.0 * tol.largest() <= delta
        if not adaptive or stable or (batch + 1) * samples > limit:
            break

    all_values = np.concatenate(parts)
    y_sorted = np.sort(all_values)
    mean = float(np.mean(all_values))
    std = float(np.std(all_values, ddof=1))
    return McResult(value=mean, u=std, interval=cov.symmetric_interval(y_sorted, coverage),
                    shortest=cov.shortest_interval(y_sorted, coverage), coverage=float(coverage),
                    draws=int(all_values.size), blocks=h, tolerance=tol, delta=delta,
                    stable=bool(stable), seed=entropy, values=all_values)


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
