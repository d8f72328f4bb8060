"""The ordered map over worker processes (grantval/workers.py).

Reference: the same function mapped in this process (the builtin ``map``); the worker
processes are a performance device and must not change a result, its order or an error.
"""

from __future__ import annotations

import os
import sys
import tempfile
import threading

import numpy as np
import pytest

from grantval import workers
from grantval.errors import UsageError

pytestmark = pytest.mark.skipif(not sys.platform.startswith("linux"), reason="worker processes are forked on Linux only")


def _pid_and_square(x):
    return os.getpid(), x * x


def test_results_come_back_in_order_from_other_processes(monkeypatch):
    monkeypatch.setenv(workers.ENV, "2")
    got = list(workers.ordered_map(_pid_and_square, list(range(40))))
    assert [sq for _, sq in got] == [x * x for x in range(40)]
    assert {pid for pid, _ in got} - {os.getpid()}  # made elsewhere: the map did use workers


def test_one_process_when_asked_and_for_one_item(monkeypatch):
    monkeypatch.setenv(workers.ENV, "1")
    assert {pid for pid, _ in workers.ordered_map(_pid_and_square, [1, 2, 3])} == {os.getpid()}
    monkeypatch.setenv(workers.ENV, "2")
    assert workers.processes(1) == 0 and workers.processes(5) == 2


def test_no_fork_while_another_thread_runs(monkeypatch):
    # a fork copies only the calling thread: with another thread alive the map stays here
    monkeypatch.setenv(workers.ENV, "2")
    stop = threading.Event()
    other = threading.Thread(target=stop.wait)
    other.start()
    try:
        assert workers.processes(10) == 0
    finally:
        stop.set()
        other.join()
    assert workers.processes(10) == 2


def test_large_results_come_back_whole_and_leave_no_files(tmp_path, monkeypatch):
    monkeypatch.setenv(workers.ENV, "2")
    monkeypatch.setattr(tempfile, "tempdir", str(tmp_path))  # the map's folder is made here
    arrays = [np.arange(300_000, dtype=np.float64) * k for k in range(6)]  # 2.4 MB each: over BY_FILE
    got = list(workers.ordered_map(lambda a: a + 0.5, arrays))
    assert all(np.array_equal(g, a + 0.5) for g, a in zip(got, arrays))
    assert list(tmp_path.iterdir()) == []


class _Odd(Exception):
    """An error whose constructor takes other arguments than its message (not picklable as such)."""

    def __init__(self, number, note):
        super().__init__(f"{number} is odd ({note})")


def _refuse_odd(x):
    if x % 2:
        raise _Odd(x, "refused")
    return x


def test_an_error_in_a_worker_is_raised_as_in_one_process(monkeypatch):
    monkeypatch.setenv(workers.ENV, "2")
    with pytest.raises(_Odd, match=r"^3 is odd \(refused\)$"):
        list(workers.ordered_map(_refuse_odd, [0, 2, 4, 3, 6]))


def test_a_bad_process_count_is_a_usage_error(monkeypatch):
    monkeypatch.setenv(workers.ENV, "two")
    for pieces in (4, 1):  # refused even where no worker would be used
        with pytest.raises(UsageError, match="GRANTVAL_PROCESSES must be a whole number"):
            workers.processes(pieces)


def test_the_check_of_the_workers_can_fail(monkeypatch):
    # the first test's proof that workers ran turns false when they do not
    monkeypatch.setenv(workers.ENV, "1")
    got = list(workers.ordered_map(_pid_and_square, list(range(40))))
    assert not ({pid for pid, _ in got} - {os.getpid()})


def test_a_result_that_cannot_be_handed_back_is_made_here(tmp_path, monkeypatch):
    # the workers cannot write their result files (a full disk, say): the parent makes the items itself
    from grantval.io import handoff

    def full(*_):
        raise OSError(28, "No space left on device")

    monkeypatch.setenv(workers.ENV, "2")
    monkeypatch.setattr(handoff, "put", full)
    arrays = [np.full(300_000, float(k)) for k in range(4)]  # over BY_FILE: handed back by file
    got = list(workers.ordered_map(lambda a: (os.getpid(), a * 2), arrays))
    assert all(np.array_equal(g, a * 2) for (_, g), a in zip(got, arrays))
    assert {pid for pid, _ in got} == {os.getpid()}  # every one made here
