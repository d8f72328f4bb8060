"""An ordered map over forked worker processes, used where independent pieces of work pay for it.

The pieces of a large run that do not depend on each other (blocks of grants in the expense
schedule, blocks of options on the lattice, blocks of rows being encoded for a CSV file or
deflated for a workbook) can run on every core.  :func:`ordered_map` hands them to worker
processes forked from this one, which inherit the inputs without copying or pickling them
and send back only the results, in order.  Elsewhere it runs them here, one after another.
Either way the results are the same: the same code on the same numbers.

Forking is used only where it is safe: on Linux, with no other Python thread running (a
fork copies only the thread that calls it), and not inside a worker process itself.
``GRANTVAL_PROCESSES`` sets the number of worker processes (default: the cores this
process may use, at most 4); ``GRANTVAL_PROCESSES=1`` runs everything in this process.
A piece that fails in a worker is run again here, so that its error is raised as it would
be without workers (with its own type, message and traceback).  Large results come back
through files in a private temporary folder (:mod:`grantval.io.handoff`), about ten times
faster than the pipes of :mod:`multiprocessing`.
"""

from __future__ import annotations

import os
import pickle
import sys
import threading
from typing import Callable, Iterator, Sequence

from grantval.io import handoff

#: the environment variable that sets the number of worker processes
ENV = "GRANTVAL_PROCESSES"
#: at most this many worker processes by default
DEFAULT_MAX = 4
#: results whose pickle is larger than this (bytes) come back through a file
BY_FILE = 1 << 20
#: the function, items and folder of the map running (inherited by the worker processes when they are forked)
_JOB: tuple | None = None


def _run(index: int):
    """Item ``index`` of the job run in a worker: ``(False, None)`` if it raised, else
    ``(True, pickled result)`` or ``(True, path of the file holding it)``."""
    func, items, folder = _JOB
    try:
        data = pickle.dumps(func(items[index]), protocol=pickle.HIGHEST_PROTOCOL)
        return True, data if len(data) <= BY_FILE else handoff.put(folder, str(index), data)
    except Exception:  # the parent runs the item once more: its own error, or its result (a full disk here)
        return False, None


def _result(payload):
    """The result a worker sent: unpickled from the bytes, or from the file (then removed)."""
    return pickle.loads(payload if isinstance(payload, bytes) else handoff.take(payload))


def processes(pieces: int) -> int:
    """Worker processes for ``pieces`` independent pieces of work: 0 (run them here) unless forking is safe and pays.

    Parameters
    ----------
    pieces : int
        Number of pieces; one piece is always run here.

    Returns
    -------
    int
        0, or the number of worker processes (2 or more, never more than ``pieces``).
    """
    import multiprocessing

    wanted = requested()
    if pieces < 2 or not sys.platform.startswith("linux") or threading.active_count() > 1 \
            or multiprocessing.current_process().daemon:
        return 0
    wanted = min(wanted, pieces)
    return wanted if wanted > 1 else 0


def requested() -> int:
    """Worker processes asked for: ``GRANTVAL_PROCESSES``, else the cores this process may use (at most 4)."""
    if ENV in os.environ:
        try:
            return int(os.environ[ENV])
        except ValueError:
            from grantval.errors import UsageError

            raise UsageError(f"{ENV} must be a whole number of worker processes; got {os.environ[ENV]!r}") from None
    try:
        cores = len(os.sched_getaffinity(0))
    except (AttributeError, OSError):
        cores = os.cpu_count() or 1
    return min(cores, DEFAULT_MAX)


def ordered_map(func: Callable, items: Sequence) -> Iterator:
    """``func(item)`` for each of ``items``, in order, made in worker processes where that is safe and pays.

    Parameters
    ----------
    func : callable
        Function of one item; it may be a closure or a lambda (nothing is pickled but its results).
    items : sequence
        The items (indexable); they are inherited by the workers, not copied.

    Yields
    ------
    object
        The results in the order of ``items``.
    """
    global _JOB
    workers = processes(len(items))
    if not workers:
        yield from map(func, items)
        return
    import multiprocessing

    previous = _JOB
    with handoff.handoff_folder() as folder:
        _JOB = (func, items, folder)
        try:
            with multiprocessing.get_context("fork").Pool(workers) as pool:
                for index, (ok, payload) in enumerate(pool.imap(_run, range(len(items)))):
                    yield _result(payload) if ok else func(items[index])
        finally:
            _JOB = previous
