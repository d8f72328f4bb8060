"""Benchmark of a what-if grid: 25 scenarios (5 x 5) on a 10,000-grant synthetic ledger.

    python -m bench.bench_whatif      # -> bench/results/whatif.txt

Target (issue): at most 30 s on this machine.  The run re-values only the
distinct input sets and reuses every price computed in an earlier scenario.
"""

from __future__ import annotations

import datetime as _dt
import pathlib
import tempfile
import time

from bench._machine import describe, write_results
from bench.make_ledger import make_ledger
from grantval import api

RESULTS = pathlib.Path(__file__).parent / "results" / "whatif.txt"


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        ledger = make_ledger(10_000, pathlib.Path(tmp) / "ledger", seed=6)
        t0 = time.perf_counter()
        run = api.whatif(ledger, vary=["volatility=-0.1,-0.05,+0.05,+0.1,+0.15",
                                       "expected_term_years=-1,-0.5,+0.5,+1,+10%"], through="2026-12-31")
        el = time.perf_counter() - t0
        t1 = time.perf_counter()
        api.write_whatif(run, pathlib.Path(tmp) / "w.xlsx", pathlib.Path(tmp) / "csv")
        wr = time.perf_counter() - t1
    lines = [f"grantval what-if benchmark, {_dt.date.today().isoformat()}", describe(),
             f"10,000 grants, {len(run.results) - 1} grid scenarios plus base, {len(run.tornado)} one-at-a-time runs: "
             f"{el:.1f} s to value and expense (target <= 30 s), {run.priced:,} input sets priced in all; "
             f"writing the workbook and CSV files {wr:.1f} s"]
    write_results(RESULTS, lines)


if __name__ == "__main__":
    main()
