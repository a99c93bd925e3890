"""Scenes for worker processes: re-loaded from their file once per process (keyed by path and
modification time), or taken as sent when the scene was built in memory."""

from __future__ import annotations

import os
from functools import lru_cache


@lru_cache(maxsize=4)
def _load(path: str, mtime: float):
    from truepull.geometry.scene import load_scene

    return load_scene(path)


def scene_from(path: str | None, scene=None):
    """The scene sent (when not None), else the one loaded from `path` (cached per process)."""
    if scene is not None:
        return scene
    return _load(str(path), os.path.getmtime(path))
