"""Apply one function to many items, in order: serially, on local processes, or on a Dask cluster.

Shared by the Monte Carlo propagation and by parameter scans. The function and the items must be
picklable for the local process pool: a function defined at the top level of an importable module
(or a functools.partial of one), not a lambda or a nested function. On a Dask cluster the function
is sent with cloudpickle, but every module it uses (truepull included) must be installed on the
workers.

Local processes are started by the "forkserver" method where the platform has it ("spawn"
elsewhere), never by plain fork: a process that has run a numba kernel on the GNU OpenMP threading
layer cannot safely fork. As always with these start methods, a script that calls map_parallel must
keep its top-level work under `if __name__ == "__main__":`. The pool is started once per worker count and kept for later calls, so its
start-up cost is paid once per run. Each worker limits numba to its share of the cores.

Workers ignore SIGINT (Ctrl-C reaches the whole process group; only the parent reports it, and it
stops the workers), and end within about WATCHDOG_SECONDS when the parent process dies, even by
SIGKILL: on Linux the kernel sends them SIGKILL when the process that forked them goes
(prctl PR_SET_PDEATHSIG), and everywhere a watchdog thread in each worker polls the parent's pid.
"""

from __future__ import annotations

import multiprocessing
import os
import pickle
import socket
import sys
import threading
from concurrent.futures import FIRST_EXCEPTION, ProcessPoolExecutor, wait
from concurrent.futures.process import BrokenProcessPool
from dataclasses import dataclass
from functools import partial
from typing import Any, Callable, Iterable

from truepull.geometry.errors import InputError

# seconds to wait for a Dask scheduler given by address before giving up
DEFAULT_CONNECT_TIMEOUT = 10.0

# tasks per worker: a few, so uneven tasks still balance, but few enough that per-task overhead is small
CHUNKS_PER_WORKER = 4

# modules the forkserver imports once, so that each worker starts with them already loaded
_PRELOAD = ["numpy", "scipy", "numba", "truepull.geometry.errors", "truepull.integrate.executor"]

# seconds between a worker's checks that the process that started the pool is still alive
WATCHDOG_SECONDS = 0.5

_pools: dict[int, ProcessPoolExecutor] = {}
_pools_lock = threading.Lock()


def map_parallel(func: Callable[[Any], Any], items: Iterable, *, workers: int | None = None,
                 scheduler=None, progress: bool = False, desc: str = "",
                 connect_timeout: float = DEFAULT_CONNECT_TIMEOUT) -> list:
    """[func(item) for item in items], possibly in parallel; the result keeps the order of items.

    scheduler None: local processes (`workers`, default os.cpu_count()); with one worker or a single
    item, the work runs serially in this process. scheduler "tcp://host:port" or a
    dask.distributed Client: the work runs on that cluster. progress: a tqdm bar on stderr.
    An InputError raised by func in a worker is raised here again as the same InputError.
    """
    items = list(items)
    if not items:
        return []
    if scheduler is not None:
        return _map_dask(func, items, scheduler, progress, desc, connect_timeout)
    n_workers = resolve_workers(workers)
    if n_workers == 1 or len(items) < 2:
        return _map_serial(func, items, progress, desc)
    return _map_pool(func, items, min(n_workers, len(items)), progress, desc)


def resolve_workers(workers: int | None) -> int:
    """The number of local worker processes: `workers`, or all cores when None."""
    if workers is None:
        return max(1, os.cpu_count() or 1)
    if isinstance(workers, bool) or not isinstance(workers, int) or workers < 1:
        raise InputError(None, "--workers", f"must be a whole number of at least 1, got {workers!r}")
    return workers


def chunk_evenly(items: list, n_chunks: int) -> list[list]:
    """Split items into at most n_chunks consecutive runs of nearly equal length (none empty)."""
    n_chunks = max(1, min(n_chunks, len(items)))
    base, extra = divmod(len(items), n_chunks)
    out, start = [], 0
    for k in range(n_chunks):
        stop = start + base + (1 if k < extra else 0)
        out.append(items[start:stop])
        start = stop
    return out


def shutdown_pools() -> None:
    """Stop the kept local worker pools (they are also stopped when the interpreter exits)."""
    with _pools_lock:
        pools = list(_pools.values())
        _pools.clear()
    for pool in pools:
        pool.shutdown(wait=True, cancel_futures=True)


# ---------------------------------------------------------------------------------------------
# running a chunk, and carrying input errors back from a worker


@dataclass(frozen=True)
class _RaisedInputError:
    """An InputError raised in a worker, carried back as plain fields (its own pickling loses them)."""

    file: str | None
    key: str | None
    reason: str

    def reraise(self):
        raise InputError(self.file, self.key, self.reason)


def _run_chunk(func, chunk: list):
    """Worker side: func on each item of a chunk, or the InputError it raised."""
    try:
        return [func(item) for item in chunk]
    except InputError as exc:
        return _RaisedInputError(exc.file, exc.key, exc.reason)
    finally:
        _forget_numba_lock()


_forgotten: set = set()


def _forget_numba_lock() -> None:
    """Worker side: numba's thread start-up makes a named multiprocessing lock that only this process
    uses; unlink it now and take it off the resource tracker's list, so a worker killed with its parent
    leaves nothing for the tracker to warn about ("leaked semaphore objects")."""
    mod = sys.modules.get("numba.np.ufunc.parallel")
    lock = getattr(mod, "_backend_init_process_lock", None) if mod is not None else None
    name = getattr(getattr(lock, "_semlock", None), "name", None)
    if not name or name in _forgotten:
        return
    _forgotten.add(name)
    try:
        from multiprocessing import resource_tracker, util
        from _multiprocessing import sem_unlink

        for f in list(getattr(util, "_finalizer_registry", {}).values()):
            if getattr(f, "_args", None) == (name,):
                f.cancel()
        sem_unlink(name)
        resource_tracker.unregister(name, "semaphore")
    except Exception:  # an unusual setup: at worst the tracker warns at exit
        pass


def _unpack(result):
    if isinstance(result, _RaisedInputError):
        result.reraise()
    return result


def _bar(total: int, progress: bool, desc: str):
    from tqdm import tqdm

    return tqdm(total=total, desc=desc or None, file=sys.stderr, disable=not progress,
                unit="item", dynamic_ncols=True)


# ---------------------------------------------------------------------------------------------
# serial


def _map_serial(func, items, progress, desc):
    out = []
    with _bar(len(items), progress, desc) as bar:
        for item in items:
            out.append(func(item))
            bar.update(1)
    return out


# ---------------------------------------------------------------------------------------------
# local process pool


def _set_parent_death_signal() -> None:
    """Linux: ask the kernel to SIGKILL this process when its parent (the forkserver, which itself ends
    when the main process goes) dies. Elsewhere, or if it fails, the watchdog thread does the job."""
    if not sys.platform.startswith("linux"):
        return
    try:
        import ctypes
        import signal

        libc = ctypes.CDLL(None, use_errno=True)
        PR_SET_PDEATHSIG = 1
        libc.prctl(PR_SET_PDEATHSIG, int(signal.SIGKILL), 0, 0, 0)
    except Exception:  # no libc prctl: the watchdog remains
        pass


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # exists (owned by someone else: our parent's pid was reused)
        return False
    return True


def _watch_parent(main_pid: int, parent_pid: int) -> None:
    """Watchdog thread: end this worker at once when the main process or our parent is gone."""
    import time

    while True:
        time.sleep(WATCHDOG_SECONDS)
        if os.getppid() != parent_pid or not _alive(main_pid):
            os._exit(1)


def _start_worker(threads: int, main_pid: int) -> None:
    """Pool initializer: ignore SIGINT, die with the parent, give numba this worker's share of the cores."""
    import signal

    try:
        signal.signal(signal.SIGINT, signal.SIG_IGN)
    except (ValueError, OSError):
        pass
    _set_parent_death_signal()
    parent = os.getppid()
    if parent == 1 or not _alive(main_pid):  # the parent went before we could watch it
        os._exit(1)
    threading.Thread(target=_watch_parent, args=(main_pid, parent), name="truepull-parent-watchdog",
                     daemon=True).start()
    _limit_worker_threads(threads)
    _forget_numba_lock()


def _limit_worker_threads(threads: int) -> None:
    """Give numba in this worker its share of the cores: by its environment variable before numba is
    imported, else by set_num_threads only (changing the variable once numba's threads have launched
    makes its next configuration reload raise)."""
    if "numba" not in sys.modules:
        os.environ.setdefault("NUMBA_NUM_THREADS", str(threads))
        return
    try:
        import numba

        numba.set_num_threads(min(threads, numba.config.NUMBA_NUM_THREADS))
    except Exception:  # an unusual numba setup must not stop the worker
        pass


def _context():
    methods = multiprocessing.get_all_start_methods()
    if "forkserver" in methods:
        ctx = multiprocessing.get_context("forkserver")
        ctx.set_forkserver_preload(_PRELOAD)
        return ctx
    return multiprocessing.get_context("spawn")


def _start_helpers(ctx) -> None:
    """Start the forkserver (and the resource tracker) with SIGINT ignored, which they inherit: a
    Ctrl-C while the forkserver imports its preload modules would otherwise print its traceback."""
    if ctx.get_start_method() != "forkserver" or threading.current_thread() is not threading.main_thread():
        return
    import signal
    from multiprocessing import forkserver, resource_tracker

    old = signal.signal(signal.SIGINT, signal.SIG_IGN)
    try:
        resource_tracker.ensure_running()
        forkserver.ensure_running()
    finally:
        signal.signal(signal.SIGINT, old)


def _pool(n_workers: int) -> ProcessPoolExecutor:
    with _pools_lock:
        pool = _pools.get(n_workers)
        if pool is None or getattr(pool, "_broken", False):
            _start_helpers(_context())
            threads = max(1, (os.cpu_count() or 1) // n_workers)
            pool = ProcessPoolExecutor(max_workers=n_workers, mp_context=_context(),
                                       initializer=_start_worker, initargs=(threads, os.getpid()))
            _pools[n_workers] = pool
        return pool


def _drop_pool(n_workers: int, pool: ProcessPoolExecutor) -> None:
    with _pools_lock:
        if _pools.get(n_workers) is pool:
            del _pools[n_workers]
    pool.shutdown(wait=False, cancel_futures=True)


def _stop_pool(n_workers: int, pool: ProcessPoolExecutor) -> None:
    """Interrupted: end this pool's workers now (they ignore SIGINT) rather than let them finish."""
    with _pools_lock:
        if _pools.get(n_workers) is pool:
            del _pools[n_workers]
    for proc in list((getattr(pool, "_processes", None) or {}).values()):
        try:
            proc.kill()
        except Exception:
            pass
    # no cancel_futures here: the pool's own thread fails the pending futures as it finds the workers
    # gone, and a future cancelled meanwhile makes that thread print an error (Python 3.11)
    pool.shutdown(wait=True)
    # release the pool's queues now, so their semaphores are unregistered before exit (else the resource
    # tracker warns of "leaked semaphore objects" on the way out)
    for name in ("_call_queue", "_result_queue", "_executor_manager_thread_wakeup"):
        if hasattr(pool, name):
            setattr(pool, name, None)
    import gc

    gc.collect()


class _sigint_held:
    """Hold SIGINT back (delivered on leaving) while worker processes are being started, so every
    started worker is known to the pool when the KeyboardInterrupt arrives. Main thread, POSIX only."""

    def __enter__(self):
        import signal

        self._held = False
        if hasattr(signal, "pthread_sigmask") and threading.current_thread() is threading.main_thread():
            signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT})
            self._held = True
        return self

    def __exit__(self, *exc):
        if self._held:
            import signal

            signal.pthread_sigmask(signal.SIG_UNBLOCK, {signal.SIGINT})
        return False


def _check_picklable(func) -> None:
    try:
        pickle.dumps(func)
    except Exception as exc:
        raise TypeError(
            f"{getattr(func, '__qualname__', func)!r} cannot be sent to worker processes "
            f"({type(exc).__name__}: {exc}); use a function defined at the top level of a module "
            "(or a functools.partial of one), or workers=1") from None


def _map_pool(func, items, n_workers, progress, desc):
    _check_picklable(func)
    chunks = chunk_evenly(items, n_workers * CHUNKS_PER_WORKER)
    pool = _pool(n_workers)
    futures = {}
    try:
        with _sigint_held():  # a Ctrl-C while workers start would leave one we cannot stop
            futures = {pool.submit(_run_chunk, func, chunk): k for k, chunk in enumerate(chunks)}
        results: list = [None] * len(chunks)
        pending = set(futures)
        with _bar(len(items), progress, desc) as bar:
            while pending:
                done, pending = wait(pending, return_when=FIRST_EXCEPTION)
                for fut in done:
                    k = futures[fut]
                    results[k] = _unpack(fut.result())
                    bar.update(len(chunks[k]))
    except BrokenProcessPool:
        _drop_pool(n_workers, pool)
        raise RuntimeError("a worker process stopped abruptly: it ran out of memory or was killed, "
                           "or the main script lacks an `if __name__ == '__main__':` guard") from None
    except BaseException as exc:
        if isinstance(exc, KeyboardInterrupt):
            _stop_pool(n_workers, pool)
        else:
            for fut in futures:
                fut.cancel()
        raise
    return [value for chunk_result in results for value in chunk_result]


# ---------------------------------------------------------------------------------------------
# Dask cluster


def _connect(scheduler, connect_timeout: float):
    """(client, whether we opened it) for an address or an existing Client."""
    if isinstance(scheduler, str):
        try:
            import distributed
        except ImportError:
            raise InputError(None, "--scheduler",
                             "running on a Dask cluster needs the 'distributed' package "
                             "(pip install 'dask[distributed]')") from None
        address = scheduler.strip()
        _probe(address, connect_timeout)
        try:
            client = distributed.Client(address, timeout=connect_timeout, set_as_default=False)
        except Exception as exc:  # reachable, but not a Dask scheduler (or it failed to answer)
            raise InputError(None, "--scheduler",
                             f"the Dask scheduler at '{address}' did not answer: {_one_line(exc)}") from None
        return client, True
    if all(hasattr(scheduler, name) for name in ("map", "gather", "cancel")):
        return scheduler, False
    raise InputError(None, "--scheduler",
                     f"expected a scheduler address such as 'tcp://127.0.0.1:8786' or a "
                     f"dask.distributed Client, got {type(scheduler).__name__}")


def _one_line(exc: BaseException) -> str:
    return " ".join(str(exc).split()) or type(exc).__name__


def _probe(address: str, connect_timeout: float) -> None:
    """Check that a scheduler address is well formed and, for tcp/tls, that something listens there.

    Checked before a Client is made: a Client that fails to connect hangs at its own clean-up."""
    from distributed.comm import parse_address
    from distributed.comm.addressing import parse_host_port

    if not address:
        raise InputError(None, "--scheduler", "the scheduler address is empty")
    try:
        scheme, location = parse_address(address)
        if scheme not in ("tcp", "tls"):
            return
        host, port = parse_host_port(location)
    except (ValueError, TypeError) as exc:
        raise InputError(None, "--scheduler", f"'{address}' is not a scheduler address such as "
                         f"'tcp://127.0.0.1:8786' ({_one_line(exc)})") from None
    try:
        with socket.create_connection((host, int(port)), timeout=connect_timeout):
            pass
    except OSError as exc:
        raise InputError(None, "--scheduler", f"cannot reach the Dask scheduler at '{address}' "
                         f"({_one_line(exc)})") from None


def _map_dask(func, items, scheduler, progress, desc, connect_timeout):
    client, opened = _connect(scheduler, connect_timeout)
    futures = []
    try:
        try:
            threads = sum(client.nthreads().values())
        except Exception:
            threads = 1
        chunks = chunk_evenly(items, max(1, threads) * CHUNKS_PER_WORKER)
        futures = client.map(partial(_run_chunk, func), chunks, pure=False)
        from distributed import as_completed

        position = {fut.key: k for k, fut in enumerate(futures)}
        results: list = [None] * len(chunks)
        with _bar(len(items), progress, desc) as bar:
            for fut in as_completed(futures, loop=client.loop):
                k = position[fut.key]
                results[k] = _unpack(fut.result())
                bar.update(len(chunks[k]))
        return [value for chunk_result in results for value in chunk_result]
    except BaseException:
        if futures:
            try:
                client.cancel(futures)
            except Exception:
                pass
        raise
    finally:
        if opened:
            client.close()

