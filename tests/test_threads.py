"""kernel_threads: one numba thread for small work, numba's own setting restored afterwards."""

import numba

from truepull.integrate import threads


def test_small_work_runs_on_one_thread_and_the_setting_comes_back():
    before = numba.get_num_threads()
    with threads.kernel_threads(threads.PARALLEL_MIN_WORK - 1):
        assert numba.get_num_threads() == 1
    assert numba.get_num_threads() == before


def test_large_work_keeps_the_threads_unless_the_cores_are_busy(monkeypatch):
    before = numba.get_num_threads()
    monkeypatch.setattr(threads, "cores_busy", lambda: False)
    with threads.kernel_threads(10 * threads.PARALLEL_MIN_WORK):
        assert numba.get_num_threads() == before
    monkeypatch.setattr(threads, "cores_busy", lambda: True)
    with threads.kernel_threads(10 * threads.PARALLEL_MIN_WORK):
        assert numba.get_num_threads() == 1
    assert numba.get_num_threads() == before
