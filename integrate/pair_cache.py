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


def per_body(body, name, make):
    """make(body), kept in the body's own cache (a Body is frozen: its shape, placement and matter never
    change, and a changed copy gets a fresh cache); objects without one (point stand-ins) are not kept."""
    cache = getattr(body, "_cache", None)
    if cache is None:
        return make(body)
    key = "pair_cache." + name
    value = cache.get(key)
    if value is None:
        value = cache[key] = make(body)
    return value


def _frozen(a) -> np.ndarray:
    a = np.array(a, dtype=float)
    a.setflags(write=False)
    return a


def body_com(body) -> np.ndarray:
    """The body's centre of mass (3,) m, world, computed once (read-only)."""
    return per_body(body, "com", lambda b: _frozen(b.com))


def body_mass(body) -> float:
    """The body's signed mass (kg), computed once."""
    return per_body(body, "mass", lambda b: float(b.mass))


def body_sphere(body) -> tuple:
    """The body's bounding sphere (centre (3,) m read-only, radius m), computed once."""
    def make(b):
        c, r = b.bounding_sphere()
        return _frozen(c), float(r)
    return per_body(body, "sphere", make)


def body_key(body) -> tuple:
    """Exact identity of a body's geometry and matter (shape parameters, placement, density, mass),
    computed once per body."""
    return per_body(body, "key", _body_key)


def _body_key(body) -> tuple:
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
