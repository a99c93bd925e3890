"""Two reductions of one apparatus by different methods, side by side: their difference and its
standard uncertainty, in combined standard uncertainties.

The budgets share the apparatus' inputs (bodies, frame, positions): a shared input x_i moves both G's,
by c_a,i u_i and c_b,i u_i (sensitivities from each GUM budget), so it adds (c_a,i - c_b,i)^2 u_i^2 to
the difference's variance, not c_a,i^2 u_i^2 + c_b,i^2 u_i^2. Each method's measured values are its
own (independent of the other's), and any correlation a budget states is among those alone. So
(JCGM 100:2008 eq. 13 for y = G_a - G_b)

    u^2(G_a - G_b) = u_a^2 + u_b^2 - 2 sum over shared inputs of c_a,i c_b,i u_i^2,

and the difference in combined standard uncertainties is (G_a - G_b) / u(G_a - G_b). Also given:
the same with the budgets taken as independent, sqrt(u_a^2 + u_b^2).
"""

from __future__ import annotations

import math


def _shared(row_name: str) -> bool:
    """Whether a budget input belongs to the apparatus (not to one method's measured values)."""
    return not row_name.startswith("measurement.")


def compare(a: dict, b: dict) -> dict:
    """The comparison of two `reduce --json` objects (with budgets, or without: then u is None)."""
    diff = a["G"] - b["G"]
    out = {"methods": [a["method"], b["method"]], "difference": diff,
           "difference_ppm": diff / b["G"] * 1e6, "u_difference": None, "u_difference_independent": None,
           "in_combined_u": None, "in_combined_u_independent": None, "shared_inputs": []}
    ua, ub = a.get("u_G"), b.get("u_G")
    if ua is None or ub is None:
        return out
    rows_b = {r["input"]: r for r in b.get("budget", [])}
    cross = 0.0
    shared = []
    for r in a.get("budget", []):
        other = rows_b.get(r["input"])
        if other is not None and _shared(r["input"]):
            cross += r["sensitivity"] * other["sensitivity"] * r["u"] ** 2
            shared.append(r["input"])
    var = ua**2 + ub**2 - 2.0 * cross
    u = math.sqrt(max(var, 0.0))
    u_ind = math.hypot(ua, ub)
    out.update({"u_difference": u, "u_difference_independent": u_ind,
                "in_combined_u": diff / u if u > 0 else None, "in_combined_u_independent": diff / u_ind if u_ind > 0 else None,
                "shared_inputs": shared})
    return out


def comparisons(results: list[dict]) -> list[dict]:
    """Every method against the first."""
    return [compare(r, results[0]) for r in results[1:]]
