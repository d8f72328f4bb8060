"""Run one grantval command in this process and print its stage timings and peak memory as JSON.

    python -m bench.run_one COMMAND ARGS...     (used by bench/bench_scale.py)

Besides the wall-clock time of each stage (``stages``, as ``grantval -v``
shows it) it records the processor time of this process in each stage
(``cpu_stages``) and in all (``cpu_seconds``): on a machine shared with other
work, processor time varies much less than wall-clock time.  ``peak_mib_after``
is the peak resident memory at the end of each stage, which shows the stage
that set the peak; ``cpu_children_seconds`` the processor time of the worker
processes (bench/bench_scale.py adds their memory).
"""

from __future__ import annotations

import contextlib
import json
import resource
import sys
import time


def _count_cpu(progress) -> list:
    """Patch the stage timer so that each stage's processor time and the peak memory at its end (MiB)
    are recorded too; the two lists it fills."""
    cpu: list[tuple[str, float]] = []
    peaks: list[tuple[str, float]] = []
    wall_stage = progress.Reporter.stage

    @contextlib.contextmanager
    def stage(self, name):
        c0 = time.process_time()
        try:
            with wall_stage(self, name):
                yield
        finally:
            cpu.append((name, time.process_time() - c0))
            peaks.append((name, resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024))

    progress.Reporter.stage = stage
    return cpu, peaks


def _children_cpu() -> float:
    """Processor time of the worker processes that have ended (grantval/workers.py), seconds."""
    usage = resource.getrusage(resource.RUSAGE_CHILDREN)
    return usage.ru_utime + usage.ru_stime


def main() -> None:
    from grantval import progress
    from grantval.cli import app

    cpu, peaks = _count_cpu(progress)
    t0, c0 = time.perf_counter(), time.process_time()
    code = 0
    try:
        # without standalone mode the command's exit status is returned, not raised
        code = app(args=["--quiet", *sys.argv[1:]], prog_name="grantval", standalone_mode=False) or 0
    except SystemExit as exc:
        code = exc.code or 0
    finally:
        total, cpu_total = time.perf_counter() - t0, time.process_time() - c0
        print(json.dumps({"exit": code, "seconds": total, "stages": progress.reporter().timings,
                          "cpu_seconds": cpu_total, "cpu_stages": cpu, "peak_mib_after": peaks,
                          "cpu_children_seconds": _children_cpu(),
                          "peak_mib": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024}))


if __name__ == "__main__":
    main()
