"""truepull.shapes: the built-in demo scene and its part and data files, installed as package data.

demo.toml       an invented bench torsion balance (not any real apparatus)
bracket.stl     its mirror bracket, made by make_bracket.py (mm)
demo_run.csv    an invented recorded run of it, made by make_demo_run.py (time s, angle rad, position)
demo_acceleration.toml, demo_servo.toml
                invented balances measured by angular-acceleration feedback and by an electrostatic
                servo, their [measurement] tables made by make_demo_methods.py
"""

from __future__ import annotations

from importlib import resources
from pathlib import Path

DEMO_SCENE = "demo.toml"
DEMO_RUN = "demo_run.csv"


def _installed(name: str) -> Path:
    """Filesystem path of a file shipped in this package (packages are installed unzipped)."""
    path = Path(str(resources.files(__name__).joinpath(name)))
    if not path.is_file():
        raise FileNotFoundError(f"truepull's built-in file '{name}' is missing from {path.parent}")
    return path


def demo_path() -> Path:
    """Path of the built-in demo scene (TOML); its mesh file lies beside it."""
    return _installed(DEMO_SCENE)


def method_demo_path(method: str) -> Path:
    """Path of the demo scene of a method: "acceleration" or "servo"."""
    return _installed(f"demo_{method}.toml")


def demo_run_path() -> Path:
    """Path of the invented recorded run of the demo (CSV: time, angle, position)."""
    return _installed(DEMO_RUN)
