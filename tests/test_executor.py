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
