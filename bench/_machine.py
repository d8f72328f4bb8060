"""Describe the machine a benchmark ran on, for the results files."""

from __future__ import annotations

import os
import platform
import sys


def describe() -> str:
    """One paragraph: CPU model, cores, memory, Python and numpy versions."""
    import numpy

    cpu = platform.processor() or platform.machine()
    try:
        with open("/proc/cpuinfo") as fh:
            for line in fh:
                if line.startswith("model name"):
                    cpu = line.split(":", 1)[1].strip()
                    break
    except OSError:
        pass
    mem = ""
    try:
        with open("/proc/meminfo") as fh:
            kb = int(fh.readline().split()[1])
            mem = f", {kb / 2**20:.1f} GiB memory"
    except (OSError, ValueError, IndexError):
        pass
    return (
        f"machine: {cpu}, {os.cpu_count()} cores{mem}; "
        f"Python {sys.version.split()[0]}, numpy {numpy.__version__}, {platform.system()} {platform.release()}"
    )


def write_results(path, lines: list[str]) -> None:
    """Print the benchmark's lines and keep them in ``path`` (bench/results/...)."""
    import pathlib

    text = "\n".join(lines) + "\n"
    print(text, end="")
    path = pathlib.Path(path)
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text)
