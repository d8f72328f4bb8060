"""Stage timings and progress display for long runs.

A run reports its stages (read, check, value, schedule, write) to the
current :class:`Reporter`.  On a terminal a spinner shows the stage in
progress (rich, which typer ships with); with ``--quiet`` or when standard
error is not a terminal nothing is shown; with ``--verbose`` each stage's
time is printed when it ends.  The Python API runs silently unless a caller
installs a reporter.
"""

from __future__ import annotations

import contextlib
import sys
import time
from typing import Iterator


class Reporter:
    """Collects stage timings; shows progress according to its mode."""

    def __init__(self, show: bool = False, verbose: bool = False):
        self.show = show
        self.verbose = verbose
        self.timings: list[tuple[str, float]] = []
        self._status = None

    @contextlib.contextmanager
    def stage(self, name: str) -> Iterator[None]:
        status = None
        if self.show:
            from rich.console import Console

            status = Console(stderr=True).status(f"{name}...", spinner="dots")
            status.start()
            self._status = status
        t0 = time.perf_counter()
        try:
            yield
        finally:
            elapsed = time.perf_counter() - t0
            if status is not None:
                status.stop()
                self._status = None
            self.timings.append((name, elapsed))
            if self.verbose:
                print(f"  {name:<10} {elapsed:8.2f} s", file=sys.stderr)


    def track(self, items, total: int, label: str):
        """Iterate over ``items``, showing a progress bar on a terminal."""
        if not self.show:
            yield from items
            return
        from rich.console import Console
        from rich.progress import Progress

        paused = self._status
        if paused is not None:
            paused.stop()  # one live display at a time
        try:
            with Progress(console=Console(stderr=True), transient=True) as bar:
                task = bar.add_task(label, total=total)
                for item in items:
                    yield item
                    bar.advance(task)
        finally:
            if paused is not None:
                paused.start()


_current = Reporter()


def reporter() -> Reporter:
    """The reporter runs report to (silent unless the command layer set one)."""
    return _current


def install(r: Reporter) -> None:
    global _current
    _current = r


def stage(name: str):
    """Context manager timing one stage of the current run."""
    return _current.stage(name)


def track(items, total: int, label: str):
    """Iterate with a progress bar from the current reporter (silent unless shown)."""
    return _current.track(items, total, label)
