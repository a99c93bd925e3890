"""The README keeps its promises: its commands are the ones CI runs, its scene example loads."""

import re
from pathlib import Path

from truepull.geometry.audit import scene_warnings
from truepull.geometry.scene import load_scene_text

ROOT = Path(__file__).resolve().parent.parent


def _code_blocks(lang: str) -> list[str]:
    text = (ROOT / "README.md").read_text()
    return re.findall(rf"```{lang}\n(.*?)```", text, flags=re.S)


def test_ci_runs_exactly_the_readme_test_command():
    bash = [line for block in _code_blocks("bash") for line in block.splitlines()]
    test_cmd = [line for line in bash if "pytest" in line]
    assert len(test_cmd) == 1
    ci = (ROOT / ".ci" / "run").read_text().splitlines()
    assert test_cmd[0] in ci


def test_readme_scene_example_loads_and_checks_cleanly():
    first = _code_blocks("toml")[0]
    scene = load_scene_text(first, "README.md")
    assert [p.name for p in scene.positions] == ["A", "B"]
    # 820.8 g in a cylinder of radius 24 mm and length 40 mm: density m / (pi r^2 h) -> about
    # 11.34 g/cm^3 (lead, from memory)
    assert abs(scene.body("big-east").density - 11340) < 10
    warnings = scene_warnings(scene)
    assert not [w for w in warnings if "overlap" in w or "touch" in w], warnings


def test_readme_measurement_example_is_a_valid_measurement_block():
    first, second = _code_blocks("toml")[:2]
    scene = load_scene_text(first + "\n" + second, "README.md")
    assert scene.measurement.method == "deflection"
    assert set(scene.measurement.angle) == {"A", "B"}
