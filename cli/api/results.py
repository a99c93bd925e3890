"""Result objects of the Python API (`truepull.api`): SI values as numpy arrays, `.to_json()` giving
the same object as the verb's `--json`, and `.table()` a list of dicts (one per row) that
`pandas.DataFrame(result.table())` takes as it is.

Units: m, kg, s, rad; N (force), N m (torque), N m/rad (stiffness), J (energy), J/kg (potential),
m/s^2 (field), 1/s^2 (gradient tensor). Sweep values of a turn are in degrees, as in `scan --json`.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from truepull.cli.output import guarded_ratio, to_jsonable


def _array(values) -> np.ndarray:
    a = np.array(values, dtype=float)
    a.setflags(write=False)
    return a


# ------------------------------------------------------------------------------------------------
# check


@dataclass(frozen=True, eq=False)
class CheckResult:
    """What `check` reports about a scene.

    Attributes
    ----------
    scene : truepull.geometry.scene.Scene
        The scene checked.
    bodies : list of dict
        Per body: name, group, shape, mass (kg), volume (m^3), com (3,) m, inertia_com (3, 3) kg m^2.
    groups : dict
        Per group name: mass (kg), com (3,) m, inertia_axis (kg m^2, about the frame axis).
    warnings : list of str
        Overlaps, touching bodies, implausible densities, mesh scales.
    stated : list of truepull.geometry.stated.Stated
        Every value stated with a standard uncertainty (`+-`), as read, in SI.
    notes : list of str
        What the numbers include (a density gradient's uniform mass, a body not scaled to temperature).
    """

    scene: object
    bodies: list
    groups: dict
    warnings: list
    stated: list
    notes: list = field(default_factory=list)

    def to_json(self) -> dict:
        """The `check --json` object (`notes` only where there are notes)."""
        out = {"bodies": self.bodies, "groups": self.groups, "warnings": self.warnings,
               "stated": [s.to_json() for s in self.stated]}
        if self.notes:
            out["notes"] = self.notes
        return to_jsonable(out)

    def table(self) -> list[dict]:
        """One dict per body: name, group, shape, mass, volume, com_x, com_y, com_z (SI)."""
        return [{"name": b["name"], "group": b["group"], "shape": b["shape"], "mass": b["mass"],
                 "volume": b["volume"], **{f"com_{c}": float(b["com"][i]) for i, c in enumerate("xyz")}}
                for b in self.bodies]


# ------------------------------------------------------------------------------------------------
# compare and its corrections


CORRECTED = ("torque_axis", "stiffness_axis", "force_x", "force_y", "force_z")
"""Quantities a CorrectionTable holds factors for."""


def _pick(q, name: str) -> float:
    if name.startswith("force_"):
        return float(q.force["xyz".index(name[-1])])
    return float(getattr(q, name))


@dataclass(frozen=True, eq=False)
class CorrectionTable:
    """Factors exact / point-model per position and quantity, for another reduction to apply to its
    own point-mass values: ``corrected = point_value * factor``.

    Attributes
    ----------
    rows : list of dict
        Per (position, quantity): position (str or None), quantity (one of CORRECTED), exact, point,
        error (absolute error estimate of exact, SI), factor (exact / point, None when both values lie
        within the error of zero), factor_error (error / |point|, None with the factor).
    """

    rows: list

    def factor(self, quantity: str = "torque_axis", position: str | None = None) -> float | None:
        """The factor of `quantity` at `position` (None: the only or the as-drawn row).

        Raises
        ------
        KeyError
            No such row.
        """
        hits = [r for r in self.rows if r["quantity"] == quantity and (position is None or r["position"] == position)]
        if not hits or (position is None and len({r["position"] for r in hits}) > 1):
            raise KeyError(f"no single row for quantity '{quantity}' at position {position!r}")
        return hits[0]["factor"]

    def apply(self, point_value, quantity: str = "torque_axis", position: str | None = None):
        """`point_value` (a number or array of one's own point-mass model) times the factor."""
        f = self.factor(quantity, position)
        if f is None:
            raise ValueError(f"no factor for '{quantity}' at {position!r}: exact and point values are both "
                             "within the error of zero")
        return np.asarray(point_value, float) * f

    def table(self) -> list[dict]:
        """The rows (see the class docstring)."""
        return [dict(r) for r in self.rows]

    def to_json(self) -> dict:
        """`{"corrections": rows}`."""
        return to_jsonable({"corrections": self.rows})


@dataclass(frozen=True, eq=False)
class CompareResult:
    """Exact and point-model interaction of two groups, one entry per position.

    Attributes
    ----------
    comparisons : tuple of truepull.integrate.interaction.Comparison
        The engine's results, in the scene's position order (pairs, notes, ...).

    The array properties have one value per position (shape (n,), or (n, 3) for forces).
    """

    comparisons: tuple

    @property
    def positions(self) -> list:
        """Position names (None for the scene as drawn)."""
        return [c.position for c in self.comparisons]

    @property
    def reached(self) -> bool:
        """Whether every total reached the tolerance."""
        return all(c.reached for c in self.comparisons)

    def _values(self, which: str, name: str) -> np.ndarray:
        return _array([getattr(getattr(c, which), name) for c in self.comparisons])

    @property
    def exact_torque_axis(self) -> np.ndarray:
        """Exact torque about the frame axis (N m)."""
        return self._values("exact", "torque_axis")

    @property
    def point_torque_axis(self) -> np.ndarray:
        """Point-model torque about the frame axis (N m)."""
        return self._values("point", "torque_axis")

    @property
    def error_torque_axis(self) -> np.ndarray:
        """Error estimate of the exact torque about the axis (N m)."""
        return self._values("error", "torque_axis")

    @property
    def exact_stiffness_axis(self) -> np.ndarray:
        """Exact gravitational stiffness about the axis (N m/rad)."""
        return self._values("exact", "stiffness_axis")

    @property
    def point_stiffness_axis(self) -> np.ndarray:
        """Point-model stiffness about the axis (N m/rad)."""
        return self._values("point", "stiffness_axis")

    @property
    def error_stiffness_axis(self) -> np.ndarray:
        """Error estimate of the exact stiffness (N m/rad)."""
        return self._values("error", "stiffness_axis")

    @property
    def exact_force(self) -> np.ndarray:
        """Exact force on the test group (n, 3), N."""
        return self._values("exact", "force")

    @property
    def point_force(self) -> np.ndarray:
        """Point-model force on the test group (n, 3), N."""
        return self._values("point", "force")

    @property
    def error_force(self) -> np.ndarray:
        """Error estimate per force component (n, 3), N."""
        return self._values("error", "force")

    def corrections(self) -> CorrectionTable:
        """The factors exact / point per position and quantity (see CorrectionTable)."""
        rows = []
        for c in self.comparisons:
            for q in CORRECTED:
                e, p, err = _pick(c.exact, q), _pick(c.point, q), _pick(c.error, q)
                f = guarded_ratio(e, p, err)
                rows.append({"position": c.position, "quantity": q, "exact": e, "point": p, "error": err,
                             "factor": f, "factor_error": None if f is None else err / abs(p)})
        return CorrectionTable(rows)

    def table(self) -> list[dict]:
        """One dict per position: exact, point and error of torque_axis, stiffness_axis, energy and the
        force components (SI), and the torque factor (None where it says nothing)."""
        out = []
        for c in self.comparisons:
            row = {"position": c.position, "test": c.test, "source": c.source}
            for q in ("torque_axis", "stiffness_axis", "energy", "force_x", "force_y", "force_z"):
                for which in ("exact", "point", "error"):
                    row[f"{which}_{q}"] = _pick(getattr(c, which), q)
            row["factor_torque_axis"] = guarded_ratio(c.exact.torque_axis, c.point.torque_axis, c.error.torque_axis)
            row["reached"] = c.reached
            out.append(row)
        return out

    def to_json(self) -> dict:
        """The `compare --json` object: `{"results": [...]}`."""
        return to_jsonable({"results": [c.to_json() for c in self.comparisons]})


# ------------------------------------------------------------------------------------------------
# scan


SCAN_COLUMNS = ("exact_torque_axis", "point_torque_axis", "exact_stiffness_axis", "point_stiffness_axis",
                "error_torque_axis", "error_stiffness_axis", "error_force")
SCAN_UNITS = {"exact_torque_axis": "N_m", "point_torque_axis": "N_m", "exact_stiffness_axis": "N_m_per_rad",
              "point_stiffness_axis": "N_m_per_rad", "fx": "N", "fy": "N", "fz": "N",
              "error_torque_axis": "N_m", "error_stiffness_axis": "N_m_per_rad", "error_force": "N"}
"""The unit of each scan CSV column, written into its header name (`exact_torque_axis_N_m`)."""


@dataclass(frozen=True, eq=False)
class ScanResult:
    """A sweep of one group: a row per value.

    Attributes
    ----------
    result : truepull.integrate.scans.ScanResult
        The engine's result (sweep in SI, rows, method, checks, notes, the multipole series).
    values : numpy.ndarray
        The sweep values as shown: degrees for a turn, metres for a shift.
    unit : str
        "deg" or "m".
    rtol : float
        The tolerance asked.

    The array properties (exact_torque_axis, ..., force (n, 3), error_force) are SI, one per value.
    """

    result: object
    values: np.ndarray
    unit: str
    rtol: float

    def __getattr__(self, name):
        if name in SCAN_COLUMNS:
            return _array([getattr(r, name) for r in self.result.rows])
        raise AttributeError(name)

    @property
    def force(self) -> np.ndarray:
        """Exact force on the test group (n, 3), N."""
        return _array([r.force for r in self.result.rows]).reshape(-1, 3)

    @property
    def reached(self) -> bool:
        """Whether every value (apart from those where bodies meet) reached the tolerance."""
        return self.result.reached

    @property
    def method(self) -> str:
        """"multipole" or "direct"."""
        return self.result.method

    @property
    def notes(self) -> list[str]:
        return list(self.result.notes)

    def header(self) -> list[str]:
        """CSV column names, each ending in its unit."""
        return ([f"value_{self.unit}"] + [f"{c}_{SCAN_UNITS[c]}" for c in SCAN_COLUMNS[:4]]
                + [f"f{c}_N" for c in "xyz"] + [f"{c}_{SCAN_UNITS[c]}" for c in SCAN_COLUMNS[4:]])

    def table(self) -> list[dict]:
        """One dict per value, keyed as the CSV header (units in the names); missing values NaN."""
        out = []
        for v, r in zip(self.values, self.result.rows):
            cells = [v, r.exact_torque_axis, r.point_torque_axis, r.exact_stiffness_axis, r.point_stiffness_axis,
                     *r.force, r.error_torque_axis, r.error_stiffness_axis, r.error_force]
            out.append(dict(zip(self.header(), (float(c) for c in cells))))
        return out

    def csv(self) -> str:
        """The CSV table `scan` writes (empty cells where a value is missing)."""
        import csv
        import io
        import math

        buf = io.StringIO()
        w = csv.writer(buf, lineterminator="\n")
        w.writerow(self.header())
        for row in self.table():
            w.writerow(["" if not math.isfinite(c) else repr(c) for c in row.values()])
        return buf.getvalue()

    def to_json(self) -> dict:
        """The `scan --json` object."""
        res, sweep = self.result, self.result.sweep
        rows = [dict(r.to_json(), value=float(v)) for v, r in zip(self.values, res.rows)]
        to_shown = dict(zip(sweep.values, self.values))
        return to_jsonable({
            "rows": rows, "method": res.method, "degree": res.degree, "unit": self.unit, "kind": sweep.kind,
            "group": sweep.group, "direction": sweep.direction, "test": res.test, "source": res.source,
            "rtol": self.rtol, "notes": list(res.notes),
            "checks": [{"value": float(to_shown.get(c.value, c.value)), "multipole": c.multipole, "direct": c.direct,
                        "allowed": c.allowed} for c in res.checks]})


# ------------------------------------------------------------------------------------------------
# field


@dataclass(frozen=True, eq=False)
class FieldResult:
    """Potential, field and gradient tensor of a group at points, with error estimates.

    Attributes
    ----------
    point_field : truepull.integrate.field_at_points.PointField
        The engine's values: points (N, 3) m, U (N,) J/kg, g (N, 3) m/s^2 (g = -grad U, toward the
        masses), T (N, 3, 3) 1/s^2 (T_ij = d g_i / d x_j), err_U, err_g, err_T (absolute, norms).
    gradient_zeros : list of truepull.integrate.field_at_points.GradientZero or None
        Along a line: where the gradient along the line vanishes; None for other point sets.
    direction : numpy.ndarray or None
        The line's unit direction, or None.
    """

    point_field: object
    gradient_zeros: list | None = None
    direction: np.ndarray | None = None

    @property
    def points(self) -> np.ndarray:
        return self.point_field.points

    @property
    def potential(self) -> np.ndarray:
        """U (N,), J/kg."""
        return self.point_field.U

    @property
    def field(self) -> np.ndarray:
        """g (N, 3), m/s^2."""
        return self.point_field.g

    @property
    def gradient(self) -> np.ndarray:
        """T (N, 3, 3), 1/s^2."""
        return self.point_field.T

    @property
    def error_potential(self) -> np.ndarray:
        return self.point_field.err_U

    @property
    def error_field(self) -> np.ndarray:
        return self.point_field.err_g

    @property
    def error_gradient(self) -> np.ndarray:
        return self.point_field.err_T

    def table(self) -> list[dict]:
        """One dict per point, keyed as the `field` CSV columns (units in the names)."""
        from truepull.cli.field import COLUMNS

        pf = self.point_field
        data = np.column_stack([pf.points, pf.U, pf.g, pf.T.reshape(-1, 9), pf.err_U, pf.err_g, pf.err_T])
        return [dict(zip(COLUMNS, map(float, row))) for row in data]

    def to_json(self) -> dict:
        """The `field --json` object."""
        pf = self.point_field
        rows = [{"at": pf.points[i], "potential": pf.U[i], "field": pf.g[i], "gradient": pf.T[i],
                 "error_potential": pf.err_U[i], "error_field": pf.err_g[i], "error_gradient": pf.err_T[i]}
                for i in range(len(pf.points))]
        out = {"source": pf.source, "G": pf.G, "rows": rows}
        if self.gradient_zeros is not None:
            out["gradient_zeros"] = [{"s": z.s, "at": z.at, "error_s": z.err_s, "curvature": z.curvature,
                                      "error_curvature": z.err_curvature} for z in self.gradient_zeros]
        return to_jsonable(out)


# ------------------------------------------------------------------------------------------------
# reduce, fit, bias: the verb's JSON object, with the values a reduction needs


@dataclass(frozen=True, eq=False)
class ReduceResult:
    """G from the scene's [measurement], the corrections and the uncertainty budget.

    Attributes
    ----------
    data : dict
        The `reduce --json` object (SI).
    """

    data: dict

    @property
    def G(self) -> float:
        """G (m^3 kg^-1 s^-2)."""
        return float(self.data["G"])

    @property
    def u_G(self) -> float | None:
        """Its standard uncertainty (GUM, k = 1), None without a budget."""
        return self.data["u_G"]

    @property
    def G_point(self) -> float | None:
        """G from the point-mass formula."""
        return self.data["G_point"]

    @property
    def reached(self) -> bool:
        return bool(self.data["reached"])

    def corrections(self) -> list[dict]:
        """The corrections whose product takes G_point to G: name, factor, ppm, applied, note."""
        return [dict(c) for c in self.data["corrections"]]

    def table(self) -> list[dict]:
        """The uncertainty budget, one dict per input (input, value, u, unit, sensitivity, contribution, ...)."""
        return [dict(b) for b in self.data["budget"]]

    def to_json(self) -> dict:
        """The `reduce --json` object."""
        return to_jsonable(self.data)


@dataclass(frozen=True, eq=False)
class FitResult:
    """Fits of a recorded run.

    Attributes
    ----------
    segments : tuple of truepull.integrate.balance.fitting.SegmentFit
        One fit per contiguous run of one position label (SI: s, rad).
    run : truepull.integrate.balance.run_fit.RunFit or None
        The one fit of the whole run (needs position labels).
    written : str or None
        The scene file written (with `into` and `out`).
    """

    segments: tuple
    run: object = None
    written: str | None = None
    notes: list = field(default_factory=list)

    def table(self) -> list[dict]:
        """One dict per segment (as in `fit --json`'s "segments")."""
        return [s.as_dict() for s in self.segments]

    def to_json(self) -> dict:
        """The `fit --json` object."""
        out = {"segments": self.table()}
        if self.run is not None:
            out["run"] = self.run.as_dict()
        if self.written:
            out["written"] = self.written
        return to_jsonable(out)


@dataclass(frozen=True, eq=False)
class BiasResult:
    """Sensitivities of the torque (and G) to each body parameter, and what-ifs.

    Attributes
    ----------
    result : truepull.integrate.balance.sensitivity.BiasResult or None
        The ranked sensitivity rows (None when the table was not asked for).
    what_ifs : list of truepull.integrate.balance.sensitivity.WhatIfResult
        Each what-if: torque before and after (N m), ppm of torque and of G.
    """

    result: object
    what_ifs: list

    def table(self) -> list[dict]:
        """One dict per sensitivity row (body, parameter, value, d_torque_axis, u, torque_ppm, d_G, G_ppm, ...)."""
        return [r.to_json() for r in self.result.rows] if self.result is not None else []

    def to_json(self) -> dict:
        """The `bias --json` object."""
        data = self.result.to_json() if self.result is not None else {"rows": []}
        data["what_if"] = [w.to_json() for w in self.what_ifs]
        return to_jsonable(data)
