"""Output helpers: JSON of numpy values, plain-text tables, and files written whole or not at all."""

from __future__ import annotations

import json
import math
import os
import sys
import tempfile
from pathlib import Path

import numpy as np


def to_jsonable(obj):
    """Convert numpy arrays and scalars (recursively) to plain Python for json; NaN/inf -> None."""
    if isinstance(obj, dict):
        return {str(k): to_jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [to_jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return to_jsonable(obj.tolist())
    if isinstance(obj, (np.floating, float)):
        v = float(obj)
        return v if math.isfinite(v) else None
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (np.bool_,)):
        return bool(obj)
    return obj


def dumps(obj) -> str:
    return json.dumps(to_jsonable(obj), indent=2)


def print_json(obj) -> None:
    sys.stdout.write(dumps(obj) + "\n")


EXIT_NOT_REACHED = 3
"""Exit code when the result was printed but an engine did not reach the asked tolerance."""


def not_reached_exit(verb: str, reached: bool | None, what: str = "") -> int:
    """0, or (after a one-line warning on stderr) EXIT_NOT_REACHED when `reached` is False."""
    if reached is False:
        sys.stderr.write(f"truepull {verb}: warning: tolerance not reached{' ' + what if what else ''}; "
                         f"the result above carries the error estimates that were reached (exit {EXIT_NOT_REACHED})\n")
        return EXIT_NOT_REACHED
    return 0


def current_umask() -> int:
    """The process umask, read without changing it where the platform allows (/proc), else set and reset."""
    try:
        with open("/proc/self/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith("Umask:"):
                    return int(line.split()[1], 8)
    except (OSError, ValueError):
        pass
    mask = os.umask(0o022)  # no thread of ours creates files meanwhile (the read above is the usual path)
    os.umask(mask)
    return mask


def file_mode() -> int:
    """Mode a newly created file gets under the umask (0o666 & ~umask); mkstemp alone gives 0600."""
    return 0o666 & ~current_umask()


def folder_mode() -> int:
    """Mode a newly created folder gets under the umask (0o777 & ~umask); mkdtemp alone gives 0700."""
    return 0o777 & ~current_umask()


def _input_error_for(path, exc: OSError):
    from truepull.geometry.errors import InputError

    why = exc.strerror or type(exc).__name__
    return InputError(None, None, f"cannot write '{path}': {why}; choose a writable place with free space")


def make_parents(path: Path) -> None:
    """Create the folders above `path`, or raise InputError naming it (read-only, a file in the way...)."""
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise _input_error_for(path, exc) from None


def write_atomic(path: str | os.PathLike, data: str | bytes) -> None:
    """Write a whole file: to a temporary file beside it, then rename over the target.

    The file gets the mode the umask gives new files. A place that cannot be written (read-only file
    system, a file where a folder should be, a full disk) raises InputError naming the path and leaves
    nothing behind."""
    path = Path(path)
    make_parents(path)
    mode = "wb" if isinstance(data, bytes) else "w"
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", dir=path.parent)
    except OSError as exc:
        raise _input_error_for(path, exc) from None
    try:
        try:
            os.fchmod(fd, file_mode())
        except (OSError, AttributeError):
            pass
        with os.fdopen(fd, mode) as fh:
            fh.write(data)
        os.replace(tmp, path)
    except BaseException as exc:
        if os.path.exists(tmp):
            os.unlink(tmp)
        if isinstance(exc, OSError):
            raise _input_error_for(path, exc) from None
        raise


def save_figure_atomic(fig, path: str | os.PathLike, **kwargs) -> None:
    """Save a matplotlib figure whole or not at all."""
    import io

    buf = io.BytesIO()
    fmt = Path(path).suffix.lstrip(".") or "png"
    fig.savefig(buf, format=fmt, **kwargs)
    write_atomic(path, buf.getvalue())


def format_table(headers: list[str], rows: list[list], align: str | None = None) -> str:
    """A plain-text table; numbers should be formatted by the caller."""
    cells = [[str(h) for h in headers]] + [[str(c) for c in r] for r in rows]
    widths = [max(len(r[i]) for r in cells) for i in range(len(headers))]
    align = align or ("l" + "r" * (len(headers) - 1))
    out = []
    for j, r in enumerate(cells):
        line = "  ".join(c.ljust(w) if a == "l" else c.rjust(w) for c, w, a in zip(r, widths, align))
        out.append(line.rstrip())
        if j == 0:
            out.append("  ".join("-" * w for w in widths))
    return "\n".join(out)


def fmt(x: float, digits: int = 6) -> str:
    """A number in compact engineering-friendly form."""
    if x is None or (isinstance(x, float) and not math.isfinite(x)):
        return "-"
    return f"{x:.{digits}g}"


def guarded_ratio(a: float, b: float, error: float) -> float | None:
    """a / b, or None when both a and b lie within `error` of zero (their ratio then says nothing, e.g.
    two forces that vanish by symmetry) or b is zero. `error` is the absolute error estimate of the
    computed value a; the point model's b is compared with the same error."""
    a, b, error = float(a), float(b), abs(float(error))
    if b == 0 or not (math.isfinite(a) and math.isfinite(b)) or (abs(a) <= error and abs(b) <= error):
        return None
    return a / b
