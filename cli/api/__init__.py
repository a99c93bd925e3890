"""truepull: the exact gravitational pull between extended bodies, beside the point-mass model.

The Python interface for notebooks and one's own reductions; every verb of the `truepull` command
has a function here that returns a small result object (numpy arrays, SI units, `.to_json()` giving
the verb's `--json` output, `.table()` a list of dicts that `pandas.DataFrame` takes as it is)::

    import truepull
    scene = truepull.load_scene("balance.toml")
    result = truepull.compare(scene, position="A")
    result.exact_torque_axis, result.error_torque_axis      # N m, one value per position
    result.corrections().table()                           # exact / point factors to apply

The names are loaded on first use (see `truepull.api`), so `import truepull` stays quick.
The sub-packages are `truepull.geometry` (shapes, scene files), `truepull.integrate` (the engine),
`truepull.integrate.balance` (the balance physics) and `truepull.cli` (the command).
"""

from __future__ import annotations

from importlib import import_module

__all__ = [
    "load_scene", "scene_from_text", "build_scene", "scene_toml", "demo_path", "demo_run_path",
    "check", "compare", "scan", "field", "reduce", "fit", "bias",
    "CheckResult", "CompareResult", "CorrectionTable", "ScanResult", "FieldResult", "ReduceResult",
    "FitResult", "BiasResult", "InputError",
]


def __getattr__(name: str):
    """Load `truepull.api` when one of its names (or the module itself) is first asked for."""
    if name == "api":
        return import_module("truepull.api")
    if name in __all__:
        return getattr(import_module("truepull.api"), name)
    raise AttributeError(f"module 'truepull' has no attribute '{name}'")


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__) | {"api"})
