"""End-to-end benchmark: check, value and expense on synthetic ledgers of 1,000, 10,000 and 100,000 grants.

    python -m bench.bench_scale [--sizes 1000,10000,100000]   # -> bench/results/scale.txt

Each command runs in a fresh Python process (bench/run_one.py), which reports
its stage timings and its peak resident memory.  Targets for N = 100,000 in
CSV with 40 quarterly periods (issue): check <= 10 s; value <= 15 s (a quarter
of the grants on the lattice); expense to a full workbook <= 120 s and <= 4 GB;
expense to CSV only (--no-workbook) <= 30 s; times growing no worse than linearly.
"""

from __future__ import annotations

import argparse
import datetime as _dt
import json
import pathlib
import subprocess
import sys
import tempfile

from bench._machine import describe, write_results
from bench.make_ledger import make_ledger

RESULTS = pathlib.Path(__file__).parent / "results" / "scale.txt"
TARGETS = {"check": 10, "value": 15, "expense workbook": 120, "expense csv": 30}


def run(args: list[str]) -> dict:
    out = subprocess.run([sys.executable, "-m", "bench.run_one", *args], capture_output=True, text=True,
                         cwd=pathlib.Path(__file__).resolve().parents[1])
    last = out.stdout.strip().splitlines()[-1]
    result = json.loads(last)
    if result["exit"] != 0:
        raise SystemExit(f"grantval {' '.join(args)} failed:\n{out.stdout}\n{out.stderr}")
    return result


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--sizes", default="1000,10000,100000")
    sizes = [int(x) for x in ap.parse_args().sizes.split(",")]
    lines = [f"grantval scale benchmark, {_dt.date.today().isoformat()}", describe(),
             "synthetic ledgers from bench/make_ledger.py (seed 1); expense from 2019-01-01 through 2028-12-31 "
             "(40 quarterly periods)", ""]
    table: dict[str, dict[int, float]] = {}
    with tempfile.TemporaryDirectory() as tmp:
        tmp = pathlib.Path(tmp)
        for n in sizes:
            led = make_ledger(n, tmp / f"L{n}")
            jobs = {
                "check": ["check", str(led)],
                "value": ["value", str(led), "--csv-dir", str(tmp / f"v{n}")],
                "expense csv": ["expense", str(led), "--through", "2028-12-31", "--from", "2019-01-01",
                                "--csv-dir", str(tmp / f"c{n}"), "--no-workbook"],
                "expense workbook": ["expense", str(led), "--through", "2028-12-31", "--from", "2019-01-01",
                                     "-o", str(tmp / f"e{n}.xlsx")],
            }
            for name, args in jobs.items():
                r = run(args)
                table.setdefault(name, {})[n] = r["seconds"]
                stages = ", ".join(f"{s} {t:.2f}" for s, t in r["stages"])
                target = f" (target <= {TARGETS[name]} s)" if n == 100_000 else ""
                lines.append(f"N={n:>7,} {name:<17} {r['seconds']:7.2f} s{target}, peak {r['peak_mib']:6.0f} MiB"
                             f"{'  [' + stages + ']' if stages else ''}")
    lines.append("")
    for name, by_n in table.items():
        ns = sorted(by_n)
        if len(ns) > 1:
            ratios = ", ".join(f"x{by_n[b] / by_n[a]:.1f} for x{b // a} grants" for a, b in zip(ns, ns[1:]))
            lines.append(f"growth {name}: {ratios}")
    write_results(RESULTS, lines)


if __name__ == "__main__":
    main()
