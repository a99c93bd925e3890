"""Fit recorded torsion-pendulum runs: period, logarithmic decrement and equilibrium angle per segment.

Model of one segment (tau = t - t_mid, t_mid the middle of the segment's time span):

    theta(t) = theta_eq + drift * tau + exp(-gamma tau) * (a cos(omega_d tau) + b sin(omega_d tau))

which is A exp(-gamma tau) cos(omega_d tau + phi) with A = hypot(a, b), phi = atan2(-b, a); the sine and
cosine amplitudes keep the least-squares problem well conditioned. Reported per segment: the damped
period T = 2 pi / omega_d, the logarithmic decrement per period delta = gamma T, the equilibrium angle
theta_eq and the amplitude A (both at t_mid), the drift, each with a standard uncertainty from the
Jacobian at the optimum scaled by the residual variance: cov = s^2 (J^T J)^-1, s^2 = RSS / (n - p).
Derived quantities carry the first-order (linear) propagation of that covariance.

SI throughout: seconds, radians, rad/s for the drift.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields

import numpy as np
from scipy.optimize import least_squares
from scipy.signal import hilbert

from truepull.geometry.errors import InputError

N_PARAMETERS = 6
MIN_POINTS = 2 * N_PARAMETERS          # our choice: at least twice as many points as parameters
MIN_SAMPLES_PER_PERIOD = 3.0           # below this the period aliases (Nyquist is 2 per period)
MIN_PERIODS = 0.8                      # "about one period": the segment must span at least this many
MIN_AMPLITUDE_SIGNIFICANCE = 10.0      # amplitude / u(amplitude) needed to call the oscillation resolved;
                                       # pure noise searched over frequency rarely passes 5 (our choice)
CORRELATION_INFLATION_NOTE = 1.1       # note when AR(1) inflation sqrt((1+r)/(1-r)) exceeds this


@dataclass(frozen=True)
class SegmentFit:
    """Fit of one segment. Times in s, angles in rad, drift in rad/s; u_* are standard uncertainties.

    `equilibrium`, `amplitude` and `phase` refer to the segment's mid time (t_start + t_end) / 2.
    `note` is empty unless the residuals suggest the uncertainties are not to be trusted."""

    position: str | None
    t_start: float
    t_end: float
    n_points: int
    period: float
    u_period: float
    decrement: float
    u_decrement: float
    equilibrium: float
    u_equilibrium: float
    amplitude: float
    u_amplitude: float
    drift: float
    u_drift: float
    residual_rms: float
    lag1_autocorrelation: float
    durbin_watson: float
    note: str
    phase: float = 0.0

    @property
    def t_mid(self) -> float:
        """Reference time of equilibrium, amplitude and phase (s)."""
        return 0.5 * (self.t_start + self.t_end)

    def evaluate(self, time) -> np.ndarray:
        """The fitted angle (rad) at times `time` (s)."""
        tau = np.asarray(time, dtype=float) - self.t_mid
        omega = 2.0 * math.pi / self.period
        gamma = self.decrement / self.period
        return (self.equilibrium + self.drift * tau
                + self.amplitude * np.exp(-gamma * tau) * np.cos(omega * tau + self.phase))

    def as_dict(self) -> dict:
        """All fields, for JSON (SI units)."""
        return {f.name: getattr(self, f.name) for f in fields(self)}


# ---------------------------------------------------------------- optical lever

def spot_to_angle(spot, lever_distance: float) -> np.ndarray:
    """Mirror angle (rad) from the light-spot position `spot` (m) on a scale at `lever_distance` D (m).

    Geometry assumed: a flat scale perpendicular to the beam reflected by the mirror at rest, at
    perpendicular distance D from the mirror, with positions s measured along the scale from the point
    where that rest beam meets it. By the law of reflection a mirror turned by theta turns the reflected
    beam by 2 theta, so s = D tan(2 theta) and theta = atan(s / D) / 2 (exact, not small-angle)."""
    if not (isinstance(lever_distance, (int, float)) and math.isfinite(lever_distance) and lever_distance > 0):
        raise ValueError("lever distance must be a positive finite number of metres")
    return 0.5 * np.arctan(np.asarray(spot, dtype=float) / float(lever_distance))


# ---------------------------------------------------------------- segmentation

def split_segments(labels) -> list[tuple[str | None, int, int]]:
    """Contiguous runs of equal labels as (label, start, stop) index ranges (stop exclusive).
    A label that comes back later starts a new segment. `labels` None gives one unnamed segment."""
    if labels is None:
        return []
    labels = list(labels)
    out = []
    start = 0
    for i in range(1, len(labels) + 1):
        if i == len(labels) or labels[i] != labels[start]:
            out.append((labels[start], start, i))
            start = i
    return out


# ---------------------------------------------------------------- checks

class _RowNames:
    """How messages name a sample: by the file's line number when known, else by data row from 1."""

    def __init__(self, line_numbers=None, offset: int = 0):
        self.lines = None if line_numbers is None else np.asarray(line_numbers)
        self.offset = offset

    def __call__(self, i: int) -> str:
        if self.lines is not None:
            return f"line {int(self.lines[i])}"
        return f"row {self.offset + i + 1}"

    def slice(self, lo: int, hi: int) -> "_RowNames":
        if self.lines is not None:
            return _RowNames(self.lines[lo:hi])
        return _RowNames(None, self.offset + lo)


def _check_record(time, angle, file, time_key, angle_key, row_name):
    if time.shape != angle.shape or time.ndim != 1:
        raise InputError(file, angle_key, "time and angle columns must have the same length")
    for values, key in ((time, time_key), (angle, angle_key)):
        bad = np.flatnonzero(~np.isfinite(values))
        if bad.size:
            i = int(bad[0])
            more = f" (and {bad.size - 1} more rows)" if bad.size > 1 else ""
            raise InputError(file, key, f"{row_name(i)}: value {float(values[i])} is not a "
                                        f"finite number{more}")
    steps = np.diff(time)
    bad = np.flatnonzero(~(steps > 0))
    if bad.size:
        i = int(bad[0]) + 1
        raise InputError(file, time_key, f"{row_name(i)}: times must increase strictly, but "
                                         f"{float(time[i]):.12g} follows {float(time[i - 1]):.12g}")


# ---------------------------------------------------------------- starting values

def _linear_solve(basis: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, float]:
    """Least-squares coefficients of `basis` columns for y, and the residual sum of squares."""
    coef, *_ = np.linalg.lstsq(basis, y, rcond=None)
    r = y - basis @ coef
    return coef, float(r @ r)


GRID_SEARCH_POINTS = 20000                 # the starting-value grid uses at most this many samples


def _basis(u, gamma, omega):
    e = np.exp(-gamma * u)
    return np.column_stack([np.ones_like(u), u, e * np.cos(omega * u), e * np.sin(omega * u)])


def _peak(freqs: np.ndarray, power: np.ndarray) -> tuple[float, int]:
    """Frequency of the highest point of a spectrum, refined by a parabola through its neighbours."""
    k = int(np.argmax(power))
    f0 = float(freqs[k])
    if 0 < k < power.size - 1:
        a, b, c = power[k - 1], power[k], power[k + 1]
        denom = a - 2 * b + c
        if denom != 0:
            f0 += 0.5 * (a - c) / denom * float(freqs[1] - freqs[0])
    return f0, k


def _dominant_frequency(u: np.ndarray, x: np.ndarray, lowest: float) -> tuple[float, float]:
    """(frequency, the spectrum's grid frequency at the peak) of detrended samples x(u), searched from
    `lowest` up: zero-padded FFT of the Hann-windowed record resampled on an even grid at the median
    sample step. Grid points inside gaps in the record are set to zero, so nothing is invented there."""
    steps = np.diff(u)
    median_step = float(np.median(steps))
    span = float(u[-1] - u[0])
    m = int(min(max(span / median_step + 1, 64), 2 ** 20))
    grid = np.linspace(u[0], u[-1], m)
    xu = np.interp(grid, u, x)
    if steps.max() > 1.5 * median_step:
        j = np.clip(np.searchsorted(u, grid), 1, u.size - 1)
        nearest = np.minimum(grid - u[j - 1], u[j] - grid)
        xu[nearest > 1.5 * max(median_step, grid[1] - grid[0])] = 0.0
    pad = 1 << int(math.ceil(math.log2(m)) + 4)
    pad = max(min(pad, 1 << 22), 4 * m)
    power = np.abs(np.fft.rfft(xu * np.hanning(m), n=pad))
    freqs = np.fft.rfftfreq(pad, grid[1] - grid[0])
    allowed = freqs >= lowest
    f0, k = _peak(freqs[allowed], power[allowed])
    return max(f0, lowest), float(freqs[allowed][k])


def _decay_rate(u: np.ndarray, x: np.ndarray) -> float:
    """Decay rate of the detrended samples from the Hilbert envelope of the evenly resampled record,
    over its central 70 % (the analytic signal rings at the ends); 0 when it cannot be read."""
    m = max(u.size, 64)
    grid = np.linspace(u[0], u[-1], m)
    env = np.abs(hilbert(np.interp(grid, u, x)))
    lo, hi = int(0.15 * m), int(0.85 * m)
    if hi - lo < 8 or not np.all(env[lo:hi] > 0):
        return 0.0
    slope = np.polyfit(grid[lo:hi], np.log(env[lo:hi]), 1)[0]
    return float(np.clip(-slope, 0.0, 3.0 / (u[-1] - u[0])))


def _starting_values(u: np.ndarray, y: np.ndarray):
    """Starting parameters in scaled units (u in [-1, 1], y of unit spread): the frequency from the
    spectrum of the detrended record, the decay from its envelope, then the best (gamma, omega) of a
    small grid around them, the linear parameters being solved exactly at each grid point.
    Returns (p0, peak_at_low_edge)."""
    x = y - np.polyval(np.polyfit(u, y, 1), u)
    span = float(u[-1] - u[0])
    lowest = 0.6 / span
    f0, f_grid = _dominant_frequency(u, x, lowest)
    at_low_edge = f_grid <= lowest * 1.34          # peak not clearly above the lowest search frequency
    gamma0 = _decay_rate(u, x)
    gammas = {0.0, 0.5 * gamma0, gamma0, 2.0 * gamma0, 0.5 / span, 2.0 / span}
    stride = max(1, u.size // GRID_SEARCH_POINTS)
    us, ys = u[::stride], y[::stride]
    best = None
    bin_width = 2 * math.pi / span
    for gamma in sorted(gammas):
        for shift in np.linspace(-1.0, 1.0, 9):
            omega = 2 * math.pi * f0 + shift * bin_width
            if omega <= 0:
                continue
            coef, rss = _linear_solve(_basis(us, gamma, omega), ys)
            if best is None or rss < best[0]:
                best = (rss, np.array([*coef, gamma, omega]))
    return best[1], at_low_edge


# ---------------------------------------------------------------- the fit

def _model(p, u):
    c, d, a, b, g, w = p
    return c + d * u + np.exp(-g * u) * (a * np.cos(w * u) + b * np.sin(w * u))


def _jacobian(p, u):
    c, d, a, b, g, w = p
    e = np.exp(-g * u)
    cs, sn = np.cos(w * u), np.sin(w * u)
    osc = a * cs + b * sn
    return np.column_stack([np.ones_like(u), u, e * cs, e * sn, -u * e * osc, u * e * (b * cs - a * sn)])


def _residual_diagnostics(r: np.ndarray) -> tuple[float, float, float]:
    """Residual RMS, lag-1 autocorrelation and Durbin-Watson statistic of residuals r."""
    rms = float(np.sqrt(np.mean(r * r)))
    rc = r - r.mean()
    ss = float(rc @ rc)
    lag1 = float(rc[1:] @ rc[:-1] / ss) if ss > 0 else 0.0
    sr = float(r @ r)
    dw = float(np.sum(np.diff(r) ** 2) / sr) if sr > 0 else 2.0
    return rms, lag1, dw


def _correlation_note(lag1: float, n: int) -> str:
    """Plain note when the residuals are visibly correlated: |lag-1 autocorrelation| beyond 3/sqrt(n)
    (three standard errors for white noise) and an AR(1) variance factor sqrt((1+r)/(1-r)) that
    matters (common practice for judging least-squares uncertainties)."""
    if abs(lag1) <= 3.0 / math.sqrt(n):
        return ""
    lag1 = min(max(lag1, -0.999), 0.999)
    factor = math.sqrt((1 + lag1) / (1 - lag1))
    if lag1 > 0 and factor > CORRELATION_INFLATION_NOTE:
        return (f"residuals are correlated (lag-1 autocorrelation {lag1:.2f}): the stated uncertainties "
                f"are likely too small, perhaps by a factor of about {factor:.1f}; the model may be missing "
                f"something (drift that is not linear, a second mode, or noise that is not white)")
    if lag1 < 0 and 1.0 / factor > CORRELATION_INFLATION_NOTE:
        return (f"residuals are anti-correlated (lag-1 autocorrelation {lag1:.2f}): the stated "
                f"uncertainties are likely too large")
    return ""


def fit_segment(time, angle, position: str | None = None, *, file=None, key: str | None = None,
                line_numbers=None, time_key: str = "time", angle_key: str = "angle",
                _rows: _RowNames | None = None) -> SegmentFit:
    """Fit one segment (times in s, strictly increasing; angles in rad). Raises InputError on data
    that cannot give a fit: too few points, shorter than about one period, no oscillation resolved
    above the noise, or a fit that does not converge."""
    t = np.asarray(time, dtype=float)
    y = np.asarray(angle, dtype=float)
    _check_record(t, y, file, time_key, angle_key, _rows or _RowNames(line_numbers))
    key = key or (f"position {position}" if position is not None else None)
    n = t.size
    if n < MIN_POINTS:
        raise InputError(file, key, f"only {n} data points; a fit needs at least {MIN_POINTS}")
    t_mid = 0.5 * (t[0] + t[-1])
    h = 0.5 * (t[-1] - t[0])
    u = (t - t_mid) / h
    ybar = float(np.mean(y))
    trend = np.polyval(np.polyfit(u, y - ybar, 1), u)
    ys = float(np.std(y - ybar - trend))
    if not ys > 1e-13 * max(1.0, float(np.max(np.abs(y)))):
        raise InputError(file, key, "no oscillation: the angle is constant or a straight line in time")
    ysc = (y - ybar) / ys

    p0, at_low_edge = _starting_values(u, ysc)
    if at_low_edge:
        raise InputError(file, key, f"the record ({t[-1] - t[0]:.6g} s) is shorter than about one period "
                                    f"of the oscillation, or shows none")
    try:
        with np.errstate(over="ignore", invalid="ignore"):
            res = least_squares(_model_residual, p0, jac=_jacobian_residual, args=(u, ysc), method="lm",
                                xtol=1e-12, ftol=1e-12, gtol=1e-12, max_nfev=4000)
    except (ValueError, np.linalg.LinAlgError) as exc:
        raise InputError(file, key, f"the fit did not converge ({exc})") from None
    if res.status <= 0 or not np.all(np.isfinite(res.x)) or not np.all(np.isfinite(res.fun)):
        raise InputError(file, key, "the fit did not converge (no stable optimum for period and decrement: "
                                    "is there a clear oscillation?)")

    p = res.x.copy()
    if p[5] < 0:                                  # the same curve with omega > 0: flip omega and b
        p[5], p[3] = -p[5], -p[3]
    jac = _jacobian(p, u)
    rss = float(np.sum((_model(p, u) - ysc) ** 2))
    _, svals, vt = np.linalg.svd(jac, full_matrices=False)
    if not (svals[-1] > 1e-12 * svals[0]):
        raise InputError(file, key, "the fit did not converge: period, decrement and amplitude are not "
                                    "separately determined by these data (is there a clear oscillation?)")
    # cov = s^2 (J^T J)^-1 with s^2 = RSS / (n - p), through the SVD J = U S V^T
    cov_scaled = (vt.T / svals ** 2) @ vt * (rss / (n - N_PARAMETERS))

    # back to physical units: theta = ybar + ys * y', tau = h * u
    scale = np.array([ys, ys / h, ys, ys, 1.0 / h, 1.0 / h])
    c, d, a, b, gamma, omega = p * scale
    c += ybar
    cov = cov_scaled * np.outer(scale, scale)

    period = 2 * math.pi / omega
    decrement = gamma * period
    amplitude = math.hypot(a, b)
    phase = math.atan2(-b, a)
    grads = {
        "period": np.array([0, 0, 0, 0, 0, -2 * math.pi / omega ** 2]),
        "decrement": np.array([0, 0, 0, 0, 2 * math.pi / omega, -2 * math.pi * gamma / omega ** 2]),
        "amplitude": np.array([0, 0, a / amplitude, b / amplitude, 0, 0]) if amplitude > 0 else np.zeros(6),
        "equilibrium": np.array([1.0, 0, 0, 0, 0, 0]),
        "drift": np.array([0, 1.0, 0, 0, 0, 0]),
    }
    u_of = {name: float(math.sqrt(max(g @ cov @ g, 0.0))) for name, g in grads.items()}

    duration = t[-1] - t[0]
    if not amplitude > MIN_AMPLITUDE_SIGNIFICANCE * u_of["amplitude"]:
        ratio = amplitude / u_of["amplitude"] if u_of["amplitude"] > 0 else 0.0
        why = (f"fitted amplitude {amplitude:.3g} rad is {ratio:.1f} times its uncertainty; at least "
               f"{MIN_AMPLITUDE_SIGNIFICANCE:g} needed")
        if duration < 1.5 * period:
            raise InputError(file, key, f"the record ({duration:.6g} s) is shorter than about one period of "
                                        f"the oscillation, or no oscillation is resolved above the noise ({why})")
        raise InputError(file, key, f"no oscillation resolved above the noise ({why})")
    if period * MIN_PERIODS > duration:
        raise InputError(file, key, f"the record ({duration:.6g} s) is shorter than about one period "
                                    f"(fitted period {period:.6g} s)")
    if period < MIN_SAMPLES_PER_PERIOD * float(np.median(np.diff(t))):
        raise InputError(file, key, f"sampled too coarsely: fewer than {MIN_SAMPLES_PER_PERIOD:g} points per "
                                    f"period (fitted period {period:.6g} s)")

    r = y - (c + d * (t - t_mid) + np.exp(-gamma * (t - t_mid))
             * (a * np.cos(omega * (t - t_mid)) + b * np.sin(omega * (t - t_mid))))
    rms, lag1, dw = _residual_diagnostics(r)
    notes = [_correlation_note(lag1, n)]
    if decrement < 0:
        notes.append("the amplitude grows rather than decays (negative decrement): check for driving or "
                     "a changing equilibrium")
    return SegmentFit(
        position=position, t_start=float(t[0]), t_end=float(t[-1]), n_points=int(n),
        period=float(period), u_period=u_of["period"],
        decrement=float(decrement), u_decrement=u_of["decrement"],
        equilibrium=float(c), u_equilibrium=u_of["equilibrium"],
        amplitude=float(amplitude), u_amplitude=u_of["amplitude"],
        drift=float(d), u_drift=u_of["drift"],
        residual_rms=rms, lag1_autocorrelation=lag1, durbin_watson=dw,
        note="; ".join(x for x in notes if x), phase=float(phase),
    )


def _model_residual(p, u, y):
    return _model(p, u) - y


def _jacobian_residual(p, u, y):
    return _jacobian(p, u)


def fit_record(time, angle, positions=None, *, file=None, time_key: str = "time", angle_key: str = "angle",
               line_numbers=None) -> tuple[SegmentFit, ...]:
    """Fit a whole record: times (s, strictly increasing), angles (rad) and an optional position label
    per row. Each contiguous run of one label is a segment of its own; without labels the whole record
    is one segment with position None. Row numbers in messages are `line_numbers` when given
    (e.g. the CSV's line numbers), else data rows counted from 1."""
    t = np.asarray(time, dtype=float)
    y = np.asarray(angle, dtype=float)
    if t.ndim != 1 or t.shape != y.shape:
        raise InputError(file, angle_key, "time and angle columns must have the same length")
    if t.size == 0:
        raise InputError(file, None, "no data rows")
    rows = _RowNames(line_numbers)
    _check_record(t, y, file, time_key, angle_key, rows)
    if positions is None:
        segments = [(None, 0, t.size)]
    else:
        positions = list(positions)
        if len(positions) != t.size:
            raise InputError(file, "position", "one position label per row is needed")
        segments = split_segments(positions)
    fits = []
    for k, (label, lo, hi) in enumerate(segments, start=1):
        if label is None:
            key = None
        else:
            key = f"segment {k} (position {label}, {rows(lo)} to {rows(hi - 1)})"
        fits.append(fit_segment(t[lo:hi], y[lo:hi], label, file=file, key=key, time_key=time_key,
                                angle_key=angle_key, _rows=rows.slice(lo, hi)))
    return tuple(fits)
