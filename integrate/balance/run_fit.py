"""One least-squares fit of a whole recorded run: all segments at once, with a shared drift of the zero.

Model (SI: s, rad). Segment k starts at the switch time s_k and the attractor is then at position p(k):

    theta(t) = theta_eq[p] + D(t) + x_k(t - s_k)

- D(t) = sum_{j=1..N} c_j (P_j(u) - P_j(-1)), u = 2 (t - t_0) / (t_end - t_0) - 1 in [-1, 1], P_j the
  Legendre polynomials (for conditioning). D(t_0) = 0: the drift's constant is not identifiable beside
  the equilibria, so the equilibria are those at the run's start. N is given, or chosen by the Bayesian
  information criterion BIC = n ln(RSS / n) + p ln n over N = 0..MAX_DRIFT_ORDER (Schwarz 1978, Ann.
  Stat. 6:461; from memory): the lowest BIC wins.
- x_k, the swing after the switch, with its own amplitude A_k and phase phi_k (free: a switch restarts
  the swing), and per position the angular frequency omega (small-amplitude, damped) and decay rate
  gamma, shared by all segments of that position: a(tau) = A_k exp(-gamma tau),
  * linear model: x = a cos(psi), psi = omega tau + phi_k;
  * second-order model of x'' + omega0^2 x + alpha x^2 + beta x^3 = 0 (Lindstedt-Poincare; Landau and
    Lifshitz, Mechanics, section 28, from memory): x = a cos psi - alpha a^2 / (2 omega0^2)
    + alpha a^2 / (6 omega0^2) cos 2 psi with the frequency omega + kappa2 a^2, kappa2 = 3 beta /
    (8 omega0) - 5 alpha^2 / (12 omega0^3), so psi = omega tau + phi_k + kappa2 A_k^2 (1 - exp(-2 gamma
    tau)) / (2 gamma) (the phase is the integral of the frequency along the decaying amplitude).
    alpha (1/(rad s^2)) and beta (1/(rad^2 s^2)) per position come from the torque curve (see
    anharmonic_terms); the fitted theta_eq is then the true equilibrium and omega the small-amplitude
    frequency, to second order in the amplitude.

Uncertainties: cov = s^2 (J^T J)^-1, s^2 = RSS / (n - p), from the one fit. Where the residuals' lag-1
autocorrelation r is significant (|r| > 3 / sqrt(n)) and positive, the covariance is multiplied by the
AR(1) variance factor (1 + r) / (1 - r) (common practice for a slowly varying parameter under AR(1)
noise; an approximation) and the result says so.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np
from numba import njit
from numpy.polynomial import legendre
from scipy.optimize import least_squares

from truepull.geometry.errors import InputError
from truepull.integrate.balance.fitting import _residual_diagnostics, fit_record, split_segments

MAX_DRIFT_ORDER = 6
TWO_PI = 2.0 * math.pi


@dataclass(frozen=True)
class Anharmonic:
    """Second-order terms of one position's equation of motion, x'' + omega0^2 x + alpha x^2 + beta x^3
    = 0 with x the turn from the equilibrium (rad): alpha in 1/(rad s^2), beta in 1/(rad^2 s^2)."""

    alpha: float
    beta: float


def anharmonic_terms(stiffness: float, stiffness_slope: float, stiffness_curvature: float,
                     inertia: float) -> Anharmonic:
    """alpha, beta from the total restoring stiffness k(theta) = -dGamma_total/dtheta at the equilibrium:
    I x'' = -k x - k' x^2 / 2 - k'' x^3 / 6 (Taylor expansion of the torque), so alpha = k' / (2 I),
    beta = k'' / (6 I). `stiffness` is not needed beyond its check (omega0 is fitted)."""
    if not inertia > 0:
        raise ValueError("the moment of inertia must be greater than zero")
    return Anharmonic(alpha=stiffness_slope / (2.0 * inertia), beta=stiffness_curvature / (6.0 * inertia))


@dataclass
class RunFit:
    """Result of fit_run. Angles in rad, times in s; u_* standard uncertainties (k = 1)."""

    positions: tuple[str, ...]
    equilibria: np.ndarray              # per position, at the run's start (drift zero there)
    covariance: np.ndarray              # of the equilibria
    period: np.ndarray                  # small-amplitude damped period per position
    u_period: np.ndarray
    decrement: np.ndarray               # logarithmic decrement per period, per position
    u_decrement: np.ndarray
    drift_order: int
    drift_criterion: str                # "BIC" or "given"
    drift_coefficients: np.ndarray      # Legendre coefficients c_1..c_N (rad)
    u_drift_coefficients: np.ndarray
    drift_span: float                   # max - min of D(t) over the run (rad)
    eom_order: str                      # "linear" or "second order (Lindstedt-Poincare)"
    segments: list[dict]                # per segment: position, t_start, t_end, amplitude, phase
    residual_rms: float
    lag1_autocorrelation: float
    durbin_watson: float
    inflation: float                    # variance factor applied (1 when none)
    n_points: int
    n_parameters: int
    bic: dict = field(default_factory=dict)
    anharmonic_offset: dict = field(default_factory=dict)   # position -> mean-angle offset (rad)
    anharmonic_next_order: dict = field(default_factory=dict)
    notes: list = field(default_factory=list)
    _evaluate: object = None

    @property
    def u_equilibria(self) -> np.ndarray:
        return np.sqrt(np.diag(self.covariance))

    @property
    def correlation(self) -> np.ndarray:
        u = self.u_equilibria
        return self.covariance / np.outer(u, u)

    def evaluate(self, time) -> np.ndarray:
        """The fitted angle (rad) at `time` (s) (within the run)."""
        return self._evaluate(np.asarray(time, dtype=float))

    def drift(self, time) -> np.ndarray:
        """The fitted drift of the zero D(t) (rad)."""
        return self._drift(np.asarray(time, dtype=float))

    def as_dict(self) -> dict:
        d = {
            "model": {"drift_order": self.drift_order, "drift_criterion": self.drift_criterion,
                      "drift_basis": "Legendre in the run's time scaled to [-1, 1], zero at the start",
                      "equation_of_motion": self.eom_order},
            "positions": list(self.positions),
            "equilibrium": {p: float(v) for p, v in zip(self.positions, self.equilibria)},
            "u_equilibrium": {p: float(v) for p, v in zip(self.positions, self.u_equilibria)},
            "equilibrium_covariance": self.covariance.tolist(),
            "equilibrium_correlation": self.correlation.tolist(),
            "period": {p: float(v) for p, v in zip(self.positions, self.period)},
            "u_period": {p: float(v) for p, v in zip(self.positions, self.u_period)},
            "decrement": {p: float(v) for p, v in zip(self.positions, self.decrement)},
            "u_decrement": {p: float(v) for p, v in zip(self.positions, self.u_decrement)},
            "drift": {"coefficients": self.drift_coefficients.tolist(),
                      "u_coefficients": self.u_drift_coefficients.tolist(), "span": self.drift_span},
            "bic": {str(k): v for k, v in self.bic.items()},
            "segments": self.segments,
            "residuals": {"rms": self.residual_rms, "lag1_autocorrelation": self.lag1_autocorrelation,
                          "durbin_watson": self.durbin_watson, "variance_inflation": self.inflation},
            "n_points": self.n_points, "n_parameters": self.n_parameters,
            "anharmonic_offset": self.anharmonic_offset,
            "anharmonic_next_order_bound": self.anharmonic_next_order,
            "notes": list(self.notes),
        }
        return d


@njit(cache=True)
def _swing(tau, seg, pos, eq, om, ga, ab, anh, second_order, basis, c, out):
    """eq[p] + D + x_k(tau) at each sample (scaled units), the linear or second-order swing (module
    docstring); D = basis @ c (a loop here: a threaded BLAS call per evaluation is slow on a busy machine)."""
    for n in range(tau.size):
        drift = 0.0
        for j in range(c.size):
            drift += basis[n, j] * c[j]
        i, k, s = pos[n], seg[n], tau[n]
        w, g = om[i], ga[i]
        a, b = ab[k, 0], ab[k, 1]
        decay = math.exp(-g * s)
        phase = w * s
        if not second_order:
            out[n] = drift + eq[i] + decay * (a * math.cos(phase) + b * math.sin(phase))
            continue
        alpha, beta = anh[i, 0], anh[i, 1]
        amp2 = a * a + b * b
        w0sq = w * w + g * g
        w0 = math.sqrt(w0sq)
        kappa2 = 3.0 * beta / (8.0 * w0) - 5.0 * alpha * alpha / (12.0 * w0 * w0sq)
        gt = 2.0 * g * s
        integral = -math.expm1(-gt) / (2.0 * g) if abs(gt) > 1e-8 else s
        phase += kappa2 * amp2 * integral
        cs, sn = math.cos(phase), math.sin(phase)
        # cos 2 psi with psi = phase + phi, A cos phi = a, -A sin phi = b
        cos2 = ((a * a - b * b) * (cs * cs - sn * sn) + 4.0 * a * b * sn * cs) / amp2 if amp2 > 0 else 0.0
        a2 = amp2 * decay * decay
        out[n] = drift + eq[i] + decay * (a * cs + b * sn) + alpha / w0sq * a2 * (-0.5 + cos2 / 6.0)


class _Problem:
    """The scaled least-squares problem: t' = (t - t0) w_ref, y' = (y - ybar) / ys."""

    def __init__(self, t, y, segments, positions, anharmonic, drift_order):
        self.t0, self.t1 = float(t[0]), float(t[-1])
        self.positions = positions
        self.seg = segments                                  # (position index, lo, hi)
        self.n_pos, self.n_seg, self.order = len(positions), len(segments), drift_order
        self.y = y
        self.tau = np.empty_like(t)
        self.seg_index = np.empty(t.size, dtype=int)
        for k, (_, lo, hi) in enumerate(segments):
            self.tau[lo:hi] = t[lo:hi] - t[lo]
            self.seg_index[lo:hi] = k
        self.pos_of_point = np.array([segments[k][0] for k in self.seg_index])
        u = 2.0 * (t - self.t0) / (self.t1 - self.t0) - 1.0
        self.drift_basis = self._basis(u)
        self.anh = anharmonic                                # per position (alpha', beta') scaled, or None

    def _basis(self, u):
        cols = []
        for j in range(1, self.order + 1):
            c = np.zeros(j + 1)
            c[j] = 1.0
            cols.append(legendre.legval(u, c) - legendre.legval(-1.0, c))
        return np.ascontiguousarray(np.column_stack(cols)) if cols else np.zeros((u.size, 0))

    # parameter layout: [eq (P), omega (P), gamma (P), a_k, b_k (2K), drift (N)]
    def split(self, p):
        P, K = self.n_pos, self.n_seg
        eq, om, ga = p[:P], p[P:2 * P], p[2 * P:3 * P]
        ab = p[3 * P:3 * P + 2 * K].reshape(K, 2)
        return eq, om, ga, ab, p[3 * P + 2 * K:]

    def model(self, p):
        eq, om, ga, ab, c = self.split(p)
        anh = self.anh if self.anh is not None else np.zeros((self.n_pos, 2))
        x = np.empty(self.tau.size)
        _swing(self.tau, self.seg_index, self.pos_of_point, np.ascontiguousarray(eq), np.ascontiguousarray(om),
               np.ascontiguousarray(ga), np.ascontiguousarray(ab), np.ascontiguousarray(anh),
               self.anh is not None, self.drift_basis, np.ascontiguousarray(c), x)
        return x

    def residual(self, p):
        return self.model(p) - self.y


def _segment_starts(fits, positions, segments):
    """Starting (a_k, b_k) at each segment's start from the per-segment fits (which refer to mid time)."""
    out = []
    for f in fits:
        tau = f.t_start - f.t_mid
        omega = TWO_PI / f.period
        gamma = f.decrement / f.period
        amp = f.amplitude * math.exp(-gamma * tau)
        phi = f.phase + omega * tau
        out.append((amp * math.cos(phi), -amp * math.sin(phi)))
    return out


def fit_run(time, angle, labels, *, drift_order: int | None = None, anharmonic: dict | None = None,
            file=None, time_key="time", angle_key="angle", line_numbers=None, fits=None,
            start: RunFit | None = None) -> RunFit:
    """One fit of the whole run (times s, angles rad, a position label per row). `drift_order` None
    chooses it by BIC; `anharmonic` maps position -> Anharmonic for the second-order model (None: the
    linear model). `fits` are the per-segment fits (made here when not given), used for starting values;
    `start` a previous fit of the same run layout and drift order to start from instead (e.g. a refit
    of the same record with other noise)."""
    t = np.asarray(time, dtype=float)
    y = np.asarray(angle, dtype=float)
    if labels is None:
        raise InputError(file, "position", "a run fit needs a position label per row")
    if fits is None:
        fits = fit_record(t, y, labels, file=file, time_key=time_key, angle_key=angle_key,
                          line_numbers=line_numbers)
    raw = split_segments(labels)
    positions = tuple(dict.fromkeys(lab for lab, _, _ in raw))
    index = {p: i for i, p in enumerate(positions)}
    segments = [(index[lab], lo, hi) for lab, lo, hi in raw]
    if drift_order is not None and not (isinstance(drift_order, int) and 0 <= drift_order <= 20):
        raise InputError(file, "--drift-order", f"must be a whole number from 0 to 20, got {drift_order!r}")
    if anharmonic is not None:
        missing = [p for p in positions if p not in anharmonic]
        if missing:
            raise InputError(file, "position", f"no torque curve for position(s) {', '.join(missing)}")

    # scaling
    period_ref = float(np.median([f.period for f in fits]))
    w_ref = TWO_PI / period_ref
    ybar = float(np.mean(y))
    ys = float(np.std(y)) or 1.0
    ts = (t - t[0]) * w_ref
    yss = (y - ybar) / ys
    anh = None
    if anharmonic is not None:
        anh = np.array([[anharmonic[p].alpha * ys / w_ref ** 2, anharmonic[p].beta * ys ** 2 / w_ref ** 2]
                        for p in positions])

    # starting values: per position the mean of segment values
    P = len(positions)
    eq0, om0, ga0 = np.zeros(P), np.zeros(P), np.zeros(P)
    for i, p in enumerate(positions):
        fs = [f for f in fits if f.position == p]
        om0[i] = np.mean([TWO_PI / f.period for f in fs]) / w_ref
        ga0[i] = np.mean([f.decrement / f.period for f in fs]) / w_ref
        # equilibrium at run start: segment equilibrium minus its drift to the run's start
        eq0[i] = (np.mean([f.equilibrium - f.drift * (f.t_mid - t[0]) for f in fs]) - ybar) / ys
    ab0 = np.array(_segment_starts(fits, positions, segments)) / ys

    def solve(order, p_prev=None):
        prob = _Problem(ts, yss, segments, positions, anh, order)
        if start is not None and start._raw.size == 3 * P + 2 * len(segments) + order:
            sc = start._scales
            p0 = start._raw * np.concatenate([np.full(P, sc[1] / ys), np.full(2 * P, sc[0] / w_ref),
                                              np.full(2 * len(segments) + order, sc[1] / ys)])
            p0[:P] += (sc[2] - ybar) / ys
        elif p_prev is None:
            c0 = np.zeros(order)
            p0 = np.concatenate([eq0, om0, ga0, ab0.ravel(), c0])
        else:
            p0 = np.concatenate([p_prev, np.zeros(order - (p_prev.size - 3 * P - 2 * len(segments)))])
        # equilibria absorb the linear drift only through the drift basis: refine linear parts first
        try:
            with np.errstate(over="ignore", invalid="ignore"):
                res = least_squares(prob.residual, p0, method="lm", xtol=1e-12, ftol=1e-12, gtol=1e-12,
                                    max_nfev=200 * p0.size)
        except (ValueError, np.linalg.LinAlgError) as exc:
            raise InputError(file, None, f"the run fit did not converge ({exc})") from None
        if res.status <= 0 or not np.all(np.isfinite(res.x)):
            raise InputError(file, None, "the run fit did not converge")
        return prob, res

    n = t.size
    bic = {}
    if drift_order is None:
        best = None
        prev = None
        for order in range(0, MAX_DRIFT_ORDER + 1):
            prob, res = solve(order, prev)
            prev = res.x
            rss = float(res.fun @ res.fun)
            bic[order] = n * math.log(rss / n) + res.x.size * math.log(n)
            if best is None or bic[order] < best[0]:
                best = (bic[order], order, prob, res)
        _, order, prob, res = best
        criterion = "BIC"
    else:
        order = drift_order
        prob, res = solve(order)
        criterion = "given"

    p = res.x
    r = res.fun
    npar = p.size
    rss = float(r @ r)
    jac = res.jac
    # J^T J by einsum (no threaded BLAS call: an SVD of the tall J is slow on a busy machine); the
    # scaled parameters are all of order one, so squaring the condition number is harmless here
    jtj = np.einsum("ij,ik->jk", jac, jac, optimize=False)
    evals, evecs = np.linalg.eigh(jtj)
    if not evals[0] > 1e-24 * evals[-1]:
        raise InputError(file, None, "the run fit is degenerate: the parameters are not separately determined")
    cov = (evecs / evals) @ evecs.T * (rss / (n - npar))
    rms, lag1, dw = _residual_diagnostics(r * ys)
    inflation = 1.0
    notes = []
    if lag1 > 3.0 / math.sqrt(n):
        rr = min(lag1, 0.999)
        inflation = (1 + rr) / (1 - rr)
        cov = cov * inflation
        notes.append(f"residuals are correlated (lag-1 autocorrelation {lag1:.3f}, Durbin-Watson {dw:.3f}): "
                     f"the covariance is multiplied by the AR(1) factor (1 + r)/(1 - r) = {inflation:.3g}")

    # back to physical units
    P, K = len(positions), len(segments)
    eq, om, ga, ab, c = prob.split(p)
    i_eq, i_om, i_ga = np.arange(P), np.arange(P, 2 * P), np.arange(2 * P, 3 * P)
    i_c = np.arange(3 * P + 2 * K, npar)
    equilibria = ybar + ys * eq
    # equilibria at run start: the constant ybar shifts them all alike, so the covariance is ys^2 cov
    cov_eq = ys ** 2 * cov[np.ix_(i_eq, i_eq)]
    omega = om * w_ref
    gamma = ga * w_ref
    period = TWO_PI / omega
    decrement = gamma * period
    u_om = np.sqrt(np.diag(cov)[i_om]) * w_ref
    u_period = TWO_PI / omega ** 2 * u_om
    u_dec = np.empty(P)
    for i in range(P):
        grad = np.array([TWO_PI / om[i], -TWO_PI * ga[i] / om[i] ** 2])   # delta = 2 pi g / w, scaled units
        sub = cov[np.ix_([i_ga[i], i_om[i]], [i_ga[i], i_om[i]])]
        u_dec[i] = math.sqrt(max(grad @ sub @ grad, 0.0))
    coef = c * ys
    u_coef = np.sqrt(np.diag(cov)[i_c]) * ys if i_c.size else np.zeros(0)
    fine_u = np.linspace(-1.0, 1.0, 2001)
    drift_curve = prob._basis(fine_u) @ coef if order else np.zeros(1)
    span = float(np.ptp(drift_curve))

    seg_out = []
    amps = np.hypot(ab[:, 0], ab[:, 1]) * ys
    for k, (pi, lo, hi) in enumerate(segments):
        seg_out.append({"position": positions[pi], "t_start": float(t[lo]), "t_end": float(t[hi - 1]),
                        "amplitude_at_start": float(amps[k]),
                        "phase_at_start": float(math.atan2(-ab[k, 1], ab[k, 0]))})

    offset, next_order = {}, {}
    if anharmonic is not None:
        for i, pname in enumerate(positions):
            w0sq = omega[i] ** 2 + gamma[i] ** 2
            al, be = anharmonic[pname].alpha, anharmonic[pname].beta
            # the time average of a(t)^2 over this position's segments
            a2 = []
            for k, (pi, lo, hi) in enumerate(segments):
                if pi == i:
                    tau = t[lo:hi] - t[lo]
                    a2.append(amps[k] ** 2 * np.exp(-2 * gamma[i] * tau))
            mean_a2 = float(np.mean(np.concatenate(a2)))
            a_max = max(amps[k] for k, s in enumerate(segments) if s[0] == i)
            offset[pname] = float(-al * mean_a2 / (2 * w0sq))
            eps = abs(al) * a_max / w0sq + abs(be) * a_max ** 2 / w0sq
            next_order[pname] = float(abs(offset[pname]) * eps)

    t0 = float(t[0])
    t_end = float(t[-1])
    anh_phys = anh

    def evaluate(tt):
        sub = _Problem.__new__(_Problem)
        # map each time to the segment containing it (last switch at or before it)
        starts = np.array([t[lo] for _, lo, _ in segments])
        kk = np.clip(np.searchsorted(starts, tt, side="right") - 1, 0, K - 1)
        sub.seg_index = kk
        sub.pos_of_point = np.array([segments[k][0] for k in kk])
        sub.tau = (tt - starts[kk]) * w_ref
        sub.order = order
        sub.drift_basis = prob._basis(2.0 * (tt - t0) / (t_end - t0) - 1.0)
        sub.n_pos, sub.n_seg, sub.anh = P, K, anh_phys
        sub.tau = np.ascontiguousarray(sub.tau)
        return ybar + ys * _Problem.model(sub, p)

    def drift(tt):
        return prob._basis(2.0 * (tt - t0) / (t_end - t0) - 1.0) @ coef

    out = RunFit(
        positions=positions, equilibria=equilibria, covariance=cov_eq, period=period, u_period=u_period,
        decrement=decrement, u_decrement=u_dec, drift_order=order, drift_criterion=criterion,
        drift_coefficients=coef, u_drift_coefficients=u_coef, drift_span=span,
        eom_order="linear" if anharmonic is None else "second order (Lindstedt-Poincare)",
        segments=seg_out, residual_rms=rms, lag1_autocorrelation=lag1, durbin_watson=dw,
        inflation=inflation, n_points=n, n_parameters=npar, bic=bic, anharmonic_offset=offset,
        anharmonic_next_order=next_order, notes=notes, _evaluate=evaluate)
    out._drift = drift
    out._raw = p.copy()
    out._scales = (w_ref, ys, ybar)
    return out
