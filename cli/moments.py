"""Multipole moments for display (`truepull compare --moments L`): the inner moments q_lm of the
pendulum and the outer moments Q_lm of the attractor about the pivot, z along the frame axis,

    q_lm = integral rho r^l conj(Y_lm) dV  (kg m^l),   Q_lm = integral rho r^-(l+1) conj(Y_lm) dV  (kg m^-(l+1)),

with orthonormal Y_lm (Condon-Shortley phase), so that W = -G sum (4 pi/(2l+1)) conj(q_lm) Q_lm when
the pendulum lies inside and the attractor outside a sphere about the pivot. m >= 0 is listed:
q_l,-m = (-1)^m conj(q_lm), and the same for Q. Where the expansion applies, the torque about the axis
follows as a Fourier series in the attractor's turn, listed by harmonic m with its truncation bound.
"""

from __future__ import annotations

import math

import numpy as np

from truepull.cli.output import fmt, format_table
from truepull.geometry.errors import InputError
from truepull.integrate.multipoles import MAX_DEGREE, moments_table


def _degree(scene, degree) -> int:
    """The degree as a whole number in 0..MAX_DEGREE, or InputError naming --moments."""
    try:
        d = int(degree)
    except (TypeError, ValueError):
        raise InputError(scene.path, "--moments", f"the degree must be a whole number, got {degree!r}") from None
    if d != degree and not isinstance(degree, str) or not 0 <= d <= MAX_DEGREE:
        raise InputError(scene.path, "--moments", f"the degree must be a whole number from 0 to {MAX_DEGREE}, "
                                                  f"got {degree!r}")
    return d


def _entries(moments, degree: int, small: float):
    """[(l, m, value, error)] for m >= 0, leaving out values below `small` of the largest of their degree."""
    values, errors = moments.display()
    L = degree
    out = []
    for l in range(L + 1):
        row = values[l, L:L + l + 1]
        big = float(np.max(np.abs(row))) if row.size else 0.0
        for m in range(l + 1):
            v = values[l, L + m]
            if big == 0 or abs(v) < small * big:
                continue
            out.append((l, m, complex(v), float(errors[l, L + m])))
    return out


def moments_json(scene, degree: int, test: str = "pendulum", source: str = "attractor", position=None) -> dict:
    """The moments as JSON-ready data (SI): {"degree", "pivot", "axis", "inner_radius", "outer_radius",
    "valid", "reason", "inner": [{"l", "m", "re", "im", "error"}], "outer": [...] or null, "outer_reason"}."""
    degree = _degree(scene, degree)
    t = moments_table(scene, degree, test, source, position)

    def listing(mom):
        if mom is None:
            return None
        return [{"l": l, "m": m, "re": v.real, "im": v.imag, "error": e} for l, m, v, e in _entries(mom, degree, 0.0)]

    return {"degree": t["degree"], "test": test, "source": source, "position": t["position"],
            "pivot": [float(x) for x in t["pivot"]], "axis": [float(x) for x in t["axis"]],
            "inner_radius": t["inner_radius"], "outer_radius": t["outer_radius"], "valid": t["valid"],
            "by_centres": t["by_centres"],
            "reason": t["reason"], "convention": "orthonormal Y_lm with the Condon-Shortley phase; z = frame axis; "
                                                  "m >= 0 listed, X_l,-m = (-1)^m conj(X_lm)",
            "inner": listing(t["inner"]), "outer": listing(t["outer"]), "outer_reason": t["outer_reason"],
            "torque_harmonics": harmonics_json(t["series"])}


def harmonics_json(series):
    """The torque's Fourier harmonics in the turn (every m), or None where the expansion does not apply."""
    if series is None:
        return None
    return {"truncation_bound": series.bounds.torque,
            "terms": [{"m": m, "cos": c, "sin": s, "error": e} for m, c, s, e in series.torque_harmonics()]}


def leading_harmonics(series, floor: float, most: int | None = None) -> list[list[str]]:
    """Table rows [m, C_m, S_m, amplitude, error] of the harmonics whose amplitude is at least `floor`
    of the largest (at most `most` of them)."""
    h = series.torque_harmonics()
    big = max((math.hypot(c, s) for _, c, s, _ in h), default=0.0)
    kept = [(m, c, s, e) for m, c, s, e in h if big > 0 and math.hypot(c, s) >= floor * big][:most]
    return [[str(m), fmt(c, 10), fmt(s, 10), fmt(math.hypot(c, s), 10), fmt(e, 2)] for m, c, s, e in kept]


def _harmonics_lines(series, source: str) -> list[str]:
    """Table of the torque's harmonics in the attractor's turn phi (those above 1e-12 of the largest)."""
    rows = leading_harmonics(series, 1e-12)
    return ["", f"torque about the axis as a Fourier series in the turn phi of {source} from here, "
                f"tau = sum C_m cos(m phi) + S_m sin(m phi) (N m), from the moments up to degree {series.L}; "
                f"the terms of higher degree add at most {fmt(series.bounds.torque, 2)} N m at any turn",
            format_table(["m", "C_m", "S_m", "amplitude", "error"], rows, "rrrrr")]


def format_moments(scene, degree: int, test: str = "pendulum", source: str = "attractor", position=None) -> str:
    """A readable table of the moments (values below 1e-12 of the largest of their degree left out)."""
    degree = _degree(scene, degree)
    t = moments_table(scene, degree, test, source, position)
    lines = [f"multipole moments about the pivot, degree <= {degree} (z = frame axis, orthonormal Y_lm, "
             "Condon-Shortley phase; m >= 0 shown, X_l,-m = (-1)^m conj(X_lm))",
             f"{test} reaches {fmt(t['inner_radius'], 6)} m from the pivot; {source} comes within "
             f"{fmt(t['outer_radius'], 6)} m"]
    if t["valid"] and t["by_centres"]:
        lines.append("the expansion applies: by their actual extent the groups interleave, but spheres and points act "
                     "by their centres, which a sphere about the pivot separates (the radii above), and no turn "
                     "brings a pendulum body and an attractor body together")
    elif t["valid"]:
        lines.append("the expansion applies: the pendulum lies inside and the attractor outside a sphere about the pivot")
    else:
        lines.append(f"the expansion does not apply here: {t['reason']}")
    for title, mom, unit in ((f"inner moments q_lm of {test}", t["inner"], "kg m^l"),
                             (f"outer moments Q_lm of {source}", t["outer"], "kg m^-(l+1)")):
        lines.append("")
        lines.append(f"{title} ({unit})")
        if mom is None:
            lines.append(f"  not available: {t['outer_reason']}")
            continue
        rows = [[str(l), str(m), fmt(v.real, 10), fmt(v.imag, 10), fmt(e, 2)]
                for l, m, v, e in _entries(mom, degree, 1e-12)]
        lines.append(format_table(["l", "m", "real", "imaginary", "error"], rows, "rrrrr"))
    if t["series"] is not None:
        lines += _harmonics_lines(t["series"], source)
    return "\n".join(lines)
