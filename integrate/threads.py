"""How many numba threads a kernel call gets: one for small work or while the machine's cores are busy.

A `parallel=True` kernel waits at a barrier for all its threads; when another process holds a core,
that wait is a whole scheduler slice (measured: 16 ms for a 1-cell call with 2 threads on 2 busy
cores, against 0.007 ms with one thread). So calls below PARALLEL_MIN_WORK items, and every call while
the 1-minute load average is at least the number of cores less a half, run on one thread; others keep
numba's setting.
"""

from __future__ import annotations

import os
import time
from contextlib import contextmanager

PARALLEL_MIN_WORK = 20_000
"""Items (points, cells times nodes) below which a kernel runs on one thread."""
_LOAD_CHECK_SECONDS = 1.0
_busy = [False, -1e9]  # the last verdict and when it was made


def cores_busy() -> bool:
    """True when the 1-minute load average leaves less than half a core free (checked once a second)."""
    now = time.monotonic()
    if now - _busy[1] > _LOAD_CHECK_SECONDS:
        try:
            load = os.getloadavg()[0]
        except OSError:  # no load average on this system: assume idle cores
            load = 0.0
        _busy[0] = load >= (os.cpu_count() or 1) - 0.5
        _busy[1] = now
    return bool(_busy[0])


@contextmanager
def kernel_threads(work: int):
    """Run the kernel calls inside on one numba thread when `work` is small or the cores are busy."""
    import numba

    before = numba.get_num_threads()
    one = before > 1 and (work < PARALLEL_MIN_WORK or cores_busy())
    if one:
        numba.set_num_threads(1)
    try:
        yield
    finally:
        if one:
            numba.set_num_threads(before)
