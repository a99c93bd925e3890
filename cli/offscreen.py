"""Choosing how VTK draws without a window, before pyvista is first used.

VTK's wheel draws off-screen through the system's EGL (Mesa's software renderer is enough) or
OSMesa, or through an X display when one exists. With none of them it cannot draw at all; then we
say so in one line instead of letting VTK crash. On Debian the libraries come from
`apt-get install -y --no-install-recommends libegl1 libegl-mesa0 libgl1-mesa-dri`.
"""

from __future__ import annotations

import ctypes.util
import os

INSTALL_HINT = "on Debian: apt-get install -y --no-install-recommends libegl1 libegl-mesa0 libgl1-mesa-dri"


class RenderingUnavailable(RuntimeError):
    """This machine cannot draw the picture; the message says why, in one line."""


def have_display() -> bool:
    return bool(os.environ.get("DISPLAY") or os.environ.get("WAYLAND_DISPLAY"))


def prepare_offscreen() -> str:
    """Pick VTK's off-screen window class (EGL, else OSMesa, else the X display) and return its name.
    Respects a VTK_DEFAULT_OPENGL_WINDOW already set by the user. Raises RenderingUnavailable."""
    chosen = os.environ.get("VTK_DEFAULT_OPENGL_WINDOW")
    if chosen:
        return chosen
    if ctypes.util.find_library("EGL"):
        chosen = "vtkEGLRenderWindow"
    elif ctypes.util.find_library("OSMesa"):
        chosen = "vtkOSOpenGLRenderWindow"
    elif os.environ.get("DISPLAY"):
        return "display"
    else:
        raise RenderingUnavailable(f"cannot draw off-screen: no display and no EGL or OSMesa library ({INSTALL_HINT})")
    os.environ["VTK_DEFAULT_OPENGL_WINDOW"] = chosen
    return chosen
