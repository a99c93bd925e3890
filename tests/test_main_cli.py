"""cli/main.py: exit codes (documented in --help): 3 for a tolerance not reached, 130 on Ctrl-C."""

import os
import signal
import subprocess
import sys
import time

from truepull.cli.main import EXIT_CODES, main

from scene_fixtures import PATH_THROUGH_BOB

CURVED_PAIR = """
[units]
length = "mm"
[[body]]
name = "bob"
group = "pendulum"
shape = "sphere"
radius = 10
material = "tungsten"
at = [50, 0, 0]
[[body]]
name = "big"
group = "attractor"
shape = "cylinder"
radius = 40
length = 80
density = 8000
at = [0, 120, 0]
"""


def test_codes_are_in_the_help(capsys):
    for code in ("0 ", "1 ", "2 ", "3 ", "130"):
        assert f"  {code}" in EXIT_CODES
    try:
        main(["--help"])
    except SystemExit:
        pass
    assert "130  interrupted" in capsys.readouterr().out


def test_unreached_tolerance_exits_3_and_still_prints(tmp_path, capsys):
    scene = tmp_path / "s.toml"
    scene.write_text(CURVED_PAIR)
    # 1e-15 is below what double precision quadrature of a cylinder can reach (rounding ~1e-16 per term)
    code = main(["compare", str(scene), "--rtol", "1e-15"])
    out, err = capsys.readouterr()
    assert code == 3
    assert "torque about axis" in out and "NOT reached" in out
    assert err.count("\n") == 1 and "tolerance not reached" in err
    assert main(["compare", str(scene), "--rtol", "1e-6"]) == 0


def _children(pid: int) -> list[int]:
    """Process ids whose parent is `pid` (Linux /proc; empty elsewhere)."""
    out = []
    for entry in os.listdir("/proc") if os.path.isdir("/proc") else []:
        if entry.isdigit():
            try:
                with open(f"/proc/{entry}/stat") as fh:
                    fields = fh.read().rsplit(")", 1)[1].split()
            except OSError:
                continue
            if int(fields[1]) == pid:
                out.append(int(entry))
    return out


def test_ctrl_c_exits_130_quietly(tmp_path):
    scene = tmp_path / "s.toml"
    scene.write_text(PATH_THROUGH_BOB)
    # a scan far too long to finish (7,201 directly integrated turns), interrupted once its workers run
    proc = subprocess.Popen([sys.executable, "-m", "truepull.cli.main", "scan", str(scene), "--turn=-180:180:0.05",
                             "--workers", "2"], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
                            start_new_session=True)
    deadline = time.monotonic() + 60.0
    while time.monotonic() < deadline and proc.poll() is None and not _children(proc.pid):
        time.sleep(0.2)
    time.sleep(2.0)
    assert proc.poll() is None, "the scan ended before it could be interrupted"
    os.killpg(proc.pid, signal.SIGINT)  # as a terminal's Ctrl-C does: the whole group
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == 130, err
    assert err.endswith("truepull: interrupted\n") and "Traceback" not in err and "Warning" not in err, err


def test_version_is_the_installed_one(capsys):
    # --version reads the version only when asked; it must be the installed distribution's
    # (importlib.metadata, the standard library's record of the install, as the reference)
    from importlib.metadata import version

    try:
        main(["--version"])
    except SystemExit as exc:
        assert exc.code in (0, None)
    assert capsys.readouterr().out == f"truepull {version('truepull')}\n"
