"""The tessellation error of a CAD part: the pair computed with the part as tessellated at a finer
and at a coarser chord tolerance (`meshes.STEP_TOLERANCES`); the finer is the value, the change
between the two is added to its error estimate (the polyhedron is exact for the polyhedron, not for
the curved part). The error of a chord tessellation falls in proportion to the chord tolerance (the
sagitta R theta^2 / 8): with tolerances 4 apart the coarse error is about 4 times the fine one, so
the change is about 3 times the fine error (a safe estimate; the README figure shows 1.35e-9 m^3
change against a fine-volume deficit of 4.6e-10 m^3, the coarse one 1.81e-9).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np

TESSELLATION_METHOD = "; tessellation error from two chord tolerances"
"""Appended to the method of a pair whose errors include the change against the coarser tessellation."""


def coarse_body(body):
    """The body with its mesh replaced by its coarser tessellation, or None if it has none."""
    coarse = getattr(body.shape, "coarse", None)
    return None if coarse is None else replace(body, shape=coarse)


def fine_body(body):
    """The body with its mesh's coarse tessellation dropped (so the engine treats it as one polyhedron); the
    fine-only shape is kept in the shape's cache, so every pose shares it (and its polyhedron data)."""
    shape = body.shape
    if getattr(shape, "coarse", None) is None:
        return body
    fine = shape._props.get("fine_only")
    if fine is None:
        fine = shape._props["fine_only"] = replace(shape, coarse=None)
    return replace(body, shape=fine)


def tessellated_pair(test_body, source_body, pivot, axis, G, rtol=1e-9, order=10, tol=None):
    """The pair on the finer tessellations, its errors plus |fine - coarse| per quantity."""
    from truepull.integrate.pairs import pair_interaction

    t, s = fine_body(test_body), fine_body(source_body)
    fine = pair_interaction(t, s, pivot, axis, G, rtol, order, tol)
    ct, cs = coarse_body(test_body) or t, coarse_body(source_body) or s
    coarse = pair_interaction(ct, cs, pivot, axis, G, rtol, order, tol)
    change = np.abs(fine.values - coarse.values)
    # no refinement of the quadrature reduces the change either: it joins the irreducible part
    rounding = change if fine.rounding is None else fine.rounding + change
    return replace(fine, errors=fine.errors + change, rounding=rounding,
                   method=fine.method + TESSELLATION_METHOD)
