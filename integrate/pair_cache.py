"""Memory of pair results, so that a change to one body recomputes only the pairs it is in.

Sensitivities, uncertainty budgets and scans rebuild the scene many times with one parameter changed;
every other pair is the same geometry as before. A pair's result depends only on the two bodies' shapes,
placements and densities, the pivot, the axis, G, the tolerances and the rule order, so these (as exact
bytes) form the key: a hit returns the identical numbers a new computation would give.
"""

from __future__ import annotations

from collections import OrderedDict

import numpy as np

MAX_ENTRIES = 4096
_store: OrderedDict = OrderedDict()


def body_key(body) -> tuple:
    """Exact identity of a body's geometry and matter (shape parameters, placement, density, mass)."""
    shape = body.shape
    if shape.kind == "mesh":
        geom = ("mesh", np.asarray(shape.vertices).tobytes(), np.asarray(shape.faces).tobytes())
    else:
        geom = (shape.kind, tuple(sorted(shape.size_params().items())))
    pl = body.placement
    return (geom, np.asarray(pl.rotation, float).tobytes(), np.asarray(pl.translation, float).tobytes(),
            float(body.density), float(getattr(body, "point_mass", 0.0)),
            None if getattr(body, "gradient", None) is None else np.asarray(body.gradient, float).tobytes())


def pair_key(test_body, source_body, *args) -> tuple:
    parts = []
    for a in args:
        parts.append(np.asarray(a, float).tobytes() if isinstance(a, np.ndarray) else a)
    return (body_key(test_body), body_key(source_body), tuple(parts))


def lookup(key):
    value = _store.get(key)
    if value is not None:
        _store.move_to_end(key)
    return value


def remember(key, value) -> None:
    _store[key] = value
    _store.move_to_end(key)
    while len(_store) > MAX_ENTRIES:
        _store.popitem(last=False)


def clear() -> None:
    _store.clear()
