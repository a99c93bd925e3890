"""Tests of the executor: order, local processes, Dask, and errors carried back from workers.

The reference for every result list is Python's built-in map applied serially in this process.
"""

from __future__ import annotations

import os
import socket
import sys
import time

import numba
import numpy as np
import pytest

from truepull.geometry.errors import InputError
from truepull.integrate import executor
from truepull.integrate.executor import chunk_evenly, map_parallel


# top-level helpers, so worker processes can import them -------------------------------------

def square_and_pid(x):
    return x, x * x, os.getpid()


def cube(x):
    return x ** 3


def refuse_seven(x):
    if x == 7:
        raise InputError("scene.toml", "body[bob].radius", "must be greater than zero")
    return x


def numbers_of(results):
    return [r[:2] for r in results]


# local ---------------------------------------------------------------------------------------

def test_serial_order_matches_builtin_map():
    items = list(range(57))
    got = map_parallel(square_and_pid, items, workers=1)
    assert numbers_of(got) == numbers_of(map(square_and_pid, items))  # reference: built-in map
    assert {pid for *_, pid in got} == {os.getpid()}  # one worker: nothing left this process


def test_process_pool_order_and_other_processes():
    items = list(range(203))  # not a multiple of the chunk count, so chunks differ in length
    got = map_parallel(square_and_pid, items, workers=2)
    assert numbers_of(got) == numbers_of(map(square_and_pid, items))  # reference: built-in map
    assert os.getpid() not in {pid for *_, pid in got}  # the work really ran in worker processes


def test_single_item_runs_here():
    (got,) = map_parallel(square_and_pid, [5], workers=2)
    assert got == (5, 25, os.getpid())


def test_empty_items():
    assert map_parallel(cube, [], workers=2) == []


def test_lambda_is_fine_serially_but_refused_by_the_pool():
    assert map_parallel(lambda x: x + 1, [1, 2, 3], workers=1) == [2, 3, 4]
    with pytest.raises(TypeError, match="top level"):
        map_parallel(lambda x: x + 1, [1, 2, 3], workers=2)


@pytest.mark.parametrize("workers", [1, 2])
def test_input_error_from_a_worker_keeps_file_key_and_reason(workers):
    with pytest.raises(InputError) as info:
        map_parallel(refuse_seven, range(20), workers=workers)
    assert (info.value.file, info.value.key, info.value.reason) == (
        "scene.toml", "body[bob].radius", "must be greater than zero")


@pytest.mark.parametrize("bad", [0, -3, 1.5, "2", True])
def test_bad_worker_count(bad):
    with pytest.raises(InputError) as info:
        map_parallel(cube, range(5), workers=bad)
    assert info.value.key == "--workers"


def test_progress_bar_goes_to_stderr_only(capsys):
    assert map_parallel(cube, range(30), workers=2, progress=True, desc="cubes") == [x ** 3 for x in range(30)]
    out, err = capsys.readouterr()
    assert out == ""
    assert "cubes" in err and "30/30" in err


def test_chunks_cover_items_in_order_and_balance():
    items = list(range(23))
    chunks = chunk_evenly(items, 5)
    assert [x for c in chunks for x in c] == items
    assert len(chunks) == 5 and max(map(len, chunks)) - min(map(len, chunks)) <= 1
    assert len(chunk_evenly(items[:3], 8)) == 3  # never an empty chunk


@numba.njit(parallel=True, cache=True)
def _parallel_total(a):
    s = 0.0
    for i in numba.prange(a.size):
        s += a[i]
    return s


def parallel_total_of_ones(n):
    return _parallel_total(np.ones(n))


def test_pool_after_an_openmp_numba_kernel_in_this_process():
    # A process that has run numba's GNU OpenMP threading layer cannot fork a child that runs it
    # too (the child stops with "fork() called from a process already using GNU OpenMP"), so the
    # pool must start its workers some other way. Reference: the sum of n ones is n.
    assert parallel_total_of_ones(1000) == 1000.0
    items = list(range(1, 41))
    assert map_parallel(parallel_total_of_ones, items, workers=2) == [float(n) for n in items]


# Dask ----------------------------------------------------------------------------------------

@pytest.fixture(scope="module")
def dask_cluster():
    distributed = pytest.importorskip("distributed")
    cluster = distributed.LocalCluster(n_workers=1, threads_per_worker=2, processes=False,
                                       protocol="tcp", host="127.0.0.1", dashboard_address=None)
    client = distributed.Client(cluster, set_as_default=False)
    yield cluster, client
    client.close()
    cluster.close()


def test_dask_client_and_address_give_builtin_map_order(dask_cluster):
    cluster, client = dask_cluster
    items = list(range(41))
    reference = [x ** 3 for x in items]  # reference: built-in arithmetic, serially
    assert map_parallel(cube, items, scheduler=client) == reference
    assert map_parallel(cube, items, scheduler=cluster.scheduler_address) == reference


def test_dask_input_error_comes_back(dask_cluster):
    _, client = dask_cluster
    with pytest.raises(InputError) as info:
        map_parallel(refuse_seven, range(20), scheduler=client)
    assert info.value.key == "body[bob].radius"


def _closed_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def test_unreachable_address_is_an_input_error_quickly():
    pytest.importorskip("distributed")
    address = f"tcp://127.0.0.1:{_closed_port()}"
    start = time.monotonic()
    with pytest.raises(InputError) as info:
        map_parallel(cube, range(5), scheduler=address, connect_timeout=1.0)
    assert time.monotonic() - start < 5.0
    assert info.value.key == "--scheduler" and address in info.value.reason


@pytest.mark.parametrize("address", ["nonsense:::", "tcp://127.0.0.1", "   "])
def test_malformed_address_is_an_input_error(address):
    pytest.importorskip("distributed")
    with pytest.raises(InputError) as info:
        map_parallel(cube, range(5), scheduler=address, connect_timeout=1.0)
    assert info.value.key == "--scheduler"


def test_scheduler_of_the_wrong_kind():
    with pytest.raises(InputError) as info:
        map_parallel(cube, range(5), scheduler=8786)
    assert info.value.key == "--scheduler"


def test_missing_distributed_package_is_explained(monkeypatch):
    monkeypatch.setitem(sys.modules, "distributed", None)  # makes `import distributed` fail
    with pytest.raises(InputError) as info:
        map_parallel(cube, range(5), scheduler="tcp://127.0.0.1:8786")
    assert info.value.key == "--scheduler" and "distributed" in info.value.reason


def test_kept_pools_can_be_stopped_and_restarted():
    assert map_parallel(cube, range(9), workers=2) == [x ** 3 for x in range(9)]
    executor.shutdown_pools()
    assert map_parallel(cube, range(9), workers=2) == [x ** 3 for x in range(9)]


# ---------------------------------------------------------------------------------------------
# workers end with their parent and leave Ctrl-C to it

_PARENT_SCRIPT = r"""
import os, sys, time
from truepull.integrate.executor import map_parallel

def slow(x):
    print("worker", os.getpid(), flush=True)
    time.sleep(60)
    return x

def run():
    try:
        map_parallel(slow, [1, 2, 3, 4], workers=2)
    except KeyboardInterrupt:  # as cli/main.py does
        sys.stderr.write("interrupted\n")
        return 130


if __name__ == "__main__":
    raise SystemExit(run())
"""


def _run_parent(tmp_path):
    import subprocess

    script = tmp_path / "parent.py"
    script.write_text(_PARENT_SCRIPT)
    proc = subprocess.Popen([sys.executable, str(script)], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True, start_new_session=True, cwd=tmp_path)
    line = proc.stdout.readline()  # the first task has started in a worker
    assert line.startswith("worker"), proc.stderr.read()
    time.sleep(0.5)
    pids = _session(proc.pid) - {proc.pid}  # the forkserver, the workers, the resource tracker
    assert int(line.split()[1]) in pids
    return proc, pids


def _session(sid: int) -> set[int]:
    """Live processes of session `sid` (from /proc)."""
    out = set()
    for entry in os.listdir("/proc"):
        if entry.isdigit():
            try:
                with open(f"/proc/{entry}/stat") as fh:
                    fields = fh.read().rsplit(")", 1)[1].split()
            except OSError:
                continue
            if fields[0] != "Z" and int(fields[3]) == sid:
                out.add(int(entry))
    return out


def _gone_within(pids, seconds: float) -> bool:
    deadline = time.monotonic() + seconds
    while time.monotonic() < deadline:
        if not any(_exists(p) for p in pids):
            return True
        time.sleep(0.1)
    return False


def _exists(pid: int) -> bool:
    try:
        with open(f"/proc/{pid}/stat") as fh:
            return fh.read().split(")")[-1].split()[0] != "Z"  # a zombie has ended
    except FileNotFoundError:
        return False


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads /proc")
def test_workers_end_promptly_when_the_parent_is_killed(tmp_path):
    import signal

    proc, pids = _run_parent(tmp_path)
    os.kill(proc.pid, signal.SIGKILL)
    proc.wait(timeout=10)
    # the tasks sleep 60 s: without the parent-death signal and the watchdog they would live that long
    assert _gone_within(pids, 5.0)


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="reads /proc")
def test_sigint_to_the_group_reaches_only_the_parent(tmp_path):
    import signal

    proc, pids = _run_parent(tmp_path)
    os.killpg(proc.pid, signal.SIGINT)
    _, err = proc.communicate(timeout=30)
    assert proc.returncode == 130
    assert err == "interrupted\n"  # no worker's traceback, no thread's, no resource-tracker warning
    assert _gone_within(pids, 5.0)  # the parent stopped its workers (they ignore SIGINT)
