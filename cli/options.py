"""Options shared by the verbs: one name, metavar, help wording and default style for each.

Every verb defines its common options through these helpers, so that `--test`, `--source`,
`--position`, `--group`, `--rtol`, `--workers`, `--scheduler` and `--quiet` read the same
everywhere, defaults written "(default: X)". Length and angle values on the command line take a
unit (`"0.1 mm"`, `"-5:5:1 deg"`); plain numbers are in the scene's length unit (lengths) or
degrees (turns).
"""

from __future__ import annotations

import math
import sys

from truepull.geometry.errors import InputError
from truepull.geometry.quantities import parse_scalar

TEST_HELP = "group that feels the pull"
SOURCE_HELP = "group that pulls"


def add_scene(parser, help_text: str = "scene file (TOML)") -> None:
    """The positional SCENE."""
    parser.add_argument("scene", metavar="SCENE", help=help_text)


def add_groups(parser, test: str = TEST_HELP, source: str = SOURCE_HELP) -> None:
    """--test NAME (default pendulum) and --source NAME (default attractor); `test=None` leaves --test out."""
    if test is not None:
        parser.add_argument("--test", metavar="NAME", default="pendulum", help=f"{test} (default: pendulum)")
    parser.add_argument("--source", metavar="NAME", default="attractor", help=f"{source} (default: attractor)")


def add_group(parser) -> None:
    """--group NAME: the group that moves."""
    parser.add_argument("--group", metavar="NAME", default="attractor",
                        help="group that moves (default: attractor)")


def add_position(parser, default: str = "the scene as drawn", what: str = "at this [[position]] of the scene") -> None:
    """--position NAME."""
    parser.add_argument("--position", metavar="NAME", default=None, help=f"{what} (default: {default})")


def add_rtol(parser, default: float = 1e-9, what: str = "relative tolerance of the engine",
             flag: str = "--rtol") -> None:
    """--rtol X: a relative tolerance (checked greater than zero where it is used)."""
    parser.add_argument(flag, metavar="X", type=float, default=default, help=f"{what} (default: {default:g})")


def add_parallel(parser) -> None:
    """--workers N and --scheduler ADDRESS, for verbs that spread their work."""
    parser.add_argument("--workers", metavar="N", type=int, default=None,
                        help="local worker processes (default: one per core; 1 runs here)")
    parser.add_argument("--scheduler", metavar="ADDRESS", default=None,
                        help="run on a Dask cluster, e.g. tcp://127.0.0.1:8786 (default: local processes)")


def add_quiet(parser) -> None:
    """--quiet: no progress on stderr (progress is shown only when stderr is a terminal anyway)."""
    parser.add_argument("--quiet", action="store_true",
                        help="no progress bars or progress lines on stderr (shown only on a terminal anyway)")


def show_progress(args, stream=None) -> bool:
    """Whether to draw progress: stderr (or `stream`) is a terminal and neither --quiet nor
    --no-progress was given."""
    stream = sys.stderr if stream is None else stream
    if getattr(args, "quiet", False) or getattr(args, "no_progress", False):
        return False
    try:
        return bool(stream.isatty())
    except (AttributeError, ValueError):
        return False


# ------------------------------------------------------------------------------------------------
# values with units


def _plain(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def _shared_unit(parts: list[str]) -> str | None:
    """The unit written after the last part when every other part is a plain number (e.g. '1,2,3 mm'
    or '0:10:1 deg'), else None."""
    last = parts[-1].strip()
    if not all(_plain(p) for p in parts[:-1]) or _plain(last):
        return None
    head, _, unit = last.partition(" ")
    return unit.strip() if unit.strip() and _plain(head) else None


def quantities(text: str, sep: str, n: int | None, kind: str, default_unit: str, key: str, file=None,
               what: str = "values") -> list[float]:
    """Numbers separated by `sep` (n of them, or any number when n is None) in SI: each plain number
    in `default_unit`, each with its own unit in that unit, or one unit after the last number for all
    (`'0.1,0,0 mm'`). No uncertainty is taken."""
    parts = [p.strip() for p in str(text).split(sep)]
    if n is not None and len(parts) != n:
        raise InputError(file, key, f"expected {n} {what} separated by '{sep}', got '{text}'")
    shared = _shared_unit(parts)
    out = []
    for i, p in enumerate(parts):
        if not p:
            raise InputError(file, key, f"an empty value in '{text}'")
        raw = p if shared is None else (f"{p} {shared}" if i < len(parts) - 1 else p)
        m = parse_scalar(raw, kind, default_unit, file, key)
        if m.u is not None:
            raise InputError(file, key, f"give '{p}' without an uncertainty")
        out.append(m.value)
    return out


def length(text: str, scene, key: str) -> float:
    """One length in m: '0.1 mm', or a plain number in the scene's length unit."""
    return quantities(text, ",", 1, "length", scene.length_unit, key, scene.path, "length")[0]


def length_vector(text: str, scene, key: str) -> list[float]:
    """'dx,dy,dz' in m: plain numbers in the scene's length unit, or with units ('0.1,0,0 mm')."""
    return quantities(text, ",", 3, "length", scene.length_unit, key, scene.path, "numbers")


def sweep_range(text: str, kind: str, default_unit: str, key: str, file=None):
    """'START:STOP:STEP' (with an optional unit, e.g. '-5:5:1 deg' or '0:2:0.5 mm') -> (values in SI,
    values as shown: degrees for an angle, metres for a length), STOP included when it falls on the
    grid (integrate.scans.parse_range). Plain numbers are in `default_unit`."""
    from truepull.integrate.scans import parse_range

    parts = str(text).split(":")
    if len(parts) != 3:
        raise InputError(file, key, f"expected START:STOP:STEP, got '{text}'")
    if all(_plain(p) for p in parts):
        values = parse_range(text, key, file)
        if kind == "angle" and default_unit in ("deg", "degree", "degrees"):
            return tuple(math.radians(v) for v in values), values
        factor = quantities("1", ":", 1, kind, default_unit, key, file)[0]
    else:
        start, stop, step = quantities(text, ":", 3, kind, default_unit, key, file, "values (START, STOP, STEP)")
        values, factor = parse_range(f"{start!r}:{stop!r}:{step!r}", key, file), 1.0
    si = tuple(v * factor for v in values)
    return si, (tuple(math.degrees(v) for v in si) if kind == "angle" else si)
