"""A scene file's TOML text from Python objects (dicts with the scene file's keys), so that a scene
built in Python is read and checked by the same loader as a file."""

from __future__ import annotations

import json
import math
from numbers import Integral, Real

from truepull.cli.scene_text import toml_key
from truepull.geometry.errors import InputError


def toml_value(value, key: str) -> str:
    """One TOML value: a string, number, boolean, list or inline table (numpy values allowed)."""
    if isinstance(value, str):
        return json.dumps(value)
    if isinstance(value, bool) or type(value).__name__ == "bool_":
        return "true" if value else "false"
    if isinstance(value, Integral):
        return str(int(value))
    if isinstance(value, Real):
        v = float(value)
        if not math.isfinite(v):
            raise InputError("<python scene>", key, f"{v} is not a finite number")
        return repr(v)
    if isinstance(value, dict):
        return "{ " + ", ".join(f"{toml_key(str(k))} = {toml_value(v, f'{key}.{k}')}" for k, v in value.items()) + " }"
    if hasattr(value, "tolist"):
        return toml_value(value.tolist(), key)
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(toml_value(v, f"{key}[{i}]") for i, v in enumerate(value)) + "]"
    raise InputError("<python scene>", key, f"cannot write a {type(value).__name__} into a scene")


def _table(header: str, table, key: str) -> list[str]:
    if not isinstance(table, dict):
        raise InputError("<python scene>", key, f"expected a dict of keys, got {type(table).__name__}")
    return [header] + [f"{toml_key(str(k))} = {toml_value(v, f'{key}.{k}')}" for k, v in table.items()] + [""]


def scene_text(bodies, *, positions=(), frame=None, units=None, title=None, G=None, measurement=None) -> str:
    """The scene file's text: [scene], [units], [frame], [[body]], [[position]], [measurement]."""
    lines: list[str] = []
    head = {k: v for k, v in (("title", title), ("G", G)) if v is not None}
    if head:
        lines += _table("[scene]", head, "scene")
    if units:
        lines += _table("[units]", units, "units")
    if frame:
        lines += _table("[frame]", frame, "frame")
    for i, b in enumerate(bodies):
        lines += _table("[[body]]", b, f"body[#{i + 1}]")
    for i, p in enumerate(positions):
        lines += _table("[[position]]", p, f"position[#{i + 1}]")
    if measurement:
        lines += _table("[measurement]", measurement, "measurement")
    return "\n".join(lines)
