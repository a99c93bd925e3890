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


def write_atomic(path: str | os.PathLike, data: str | bytes) -> None:
    """Write a whole file: to a temporary file beside it, then rename over the target."""
    path = Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    mode = "wb" if isinstance(data, bytes) else "w"
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", dir=path.parent)
    try:
        with os.fdopen(fd, mode) as fh:
            fh.write(data)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
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
