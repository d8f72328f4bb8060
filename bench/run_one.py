"""Run one grantval command in this process and print its stage timings and peak memory as JSON.

    python -m bench.run_one COMMAND ARGS...     (used by bench/bench_scale.py)
"""

from __future__ import annotations

import json
import resource
import sys
import time


def main() -> None:
    from grantval import progress
    from grantval.cli import app

    t0 = time.perf_counter()
    code = 0
    try:
        app(args=["--quiet", *sys.argv[1:]], prog_name="grantval", standalone_mode=False)
    except SystemExit as exc:
        code = exc.code or 0
    finally:
        total = time.perf_counter() - t0
        print(json.dumps({"exit": code, "seconds": total, "stages": progress.reporter().timings,
                          "peak_mib": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024}))


if __name__ == "__main__":
    main()
