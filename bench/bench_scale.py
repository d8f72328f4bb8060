"""End-to-end benchmark: check, value and expense on synthetic ledgers of 1,000, 10,000 and 100,000 grants.

    python -m bench.bench_scale [--sizes 1000,10000,100000]   # -> bench/results/scale.txt
    python -m bench.bench_scale --grants 1000000              # one size; -> bench/results/scale_1000000.txt
    python -m bench.bench_scale --grants 300000 --jobs "expense workbook"

Each command runs in a fresh Python process (bench/run_one.py), which reports
its stage timings and its peak resident memory.  Targets for N = 100,000 in
CSV with 40 quarterly periods (issue): check <= 10 s; value <= 15 s (a quarter
of the grants on the lattice); expense to a full workbook <= 120 s and <= 4 GB;
expense to CSV only (--no-workbook) <= 30 s; times growing no worse than linearly.
Issue 21 adds: 1,000,000 grants expensed to CSV in under 120 s and 6 GiB (under
6 KB per grant), 300,000 grants to a full workbook in under 90 s.

Each line gives the wall-clock time, the processor time of the run (``cpu``:
on a shared machine it varies much less than wall-clock time) and of its worker
processes, the peak memory of the run and its workers together (proportional
set size, sampled: shared pages counted once) and that peak per grant, the
peak resident memory of the run's own process, and the stages' wall-clock times.
With ``--grants N`` above 300,000 the jobs are check, value and expense to CSV
(a workbook of a million grants is not a target).
"""

from __future__ import annotations

import argparse
import datetime as _dt
import json
import os
import pathlib
import subprocess
import sys
import tempfile
import time

from bench._machine import describe, write_results
from bench.make_ledger import make_ledger

RESULTS = pathlib.Path(__file__).parent / "results" / "scale.txt"
TARGETS = {"check": 10, "value": 15, "expense workbook": 120, "expense csv": 30}
#: targets (seconds, GiB) at other sizes (issue 21)
SIZE_TARGETS = {("expense csv", 1_000_000): (120, 6), ("expense workbook", 300_000): (90, None)}
JOBS = ("check", "value", "expense csv", "expense workbook")


def _descendants(pid: int) -> list[int]:
    """``pid`` and the processes below it (Linux ``/proc``; just ``pid`` elsewhere)."""
    out, todo = [], [pid]
    while todo:
        p = todo.pop()
        out.append(p)
        try:
            for task in pathlib.Path(f"/proc/{p}/task").iterdir():
                todo += [int(c) for c in (task / "children").read_text().split()]
        except OSError:
            pass
    return out


def _tree_pss_mib(pid: int) -> float:
    """Proportional set size of ``pid`` and its worker processes, MiB (shared pages counted once)."""
    total = 0
    for p in _descendants(pid):
        try:
            for line in pathlib.Path(f"/proc/{p}/smaps_rollup").read_text().splitlines():
                if line.startswith("Pss:"):
                    total += int(line.split()[1])
        except OSError:
            pass
    return total / 1024


def run(args: list[str]) -> dict:
    """Run one command in a fresh process; its report, with the peak memory of it and its workers.

    ``peak_tree_mib`` is the largest proportional set size of the run and its worker
    processes together (sampled every 0.5 s: reading a large process's page tables more
    often slows it): the memory the machine needed, with the
    pages the workers share with the run counted once.
    """
    # a million grants make a grants.csv of about 70 MB, over the default input limit of 64 MiB
    env = {**os.environ, "GRANTVAL_MAX_FILE_MB": os.environ.get("GRANTVAL_MAX_FILE_MB", "1024")}
    with tempfile.TemporaryFile("w+") as so, tempfile.TemporaryFile("w+") as se:
        proc = subprocess.Popen([sys.executable, "-m", "bench.run_one", *args], stdout=so, stderr=se, text=True,
                                cwd=pathlib.Path(__file__).resolve().parents[1], env=env)
        peak = 0.0
        while proc.poll() is None:
            peak = max(peak, _tree_pss_mib(proc.pid))
            time.sleep(0.5)
        so.seek(0), se.seek(0)
        stdout, stderr = so.read(), se.read()
    result = json.loads(stdout.strip().splitlines()[-1])
    if result["exit"] != 0:
        raise SystemExit(f"grantval {' '.join(args)} failed:\n{stdout}\n{stderr}")
    result["peak_tree_mib"] = max(peak, result["peak_mib"])
    return result


def _target(name: str, n: int) -> str:
    if n == 100_000:
        return f" (target <= {TARGETS[name]} s)"
    if (name, n) in SIZE_TARGETS:
        secs, gib = SIZE_TARGETS[name, n]
        return f" (target <= {secs} s" + (f", <= {gib} GiB)" if gib else ")")
    return ""


def _line(n: int, name: str, r: dict) -> str:
    stages = ", ".join(f"{s} {t:.2f}" for s, t in r["stages"])
    cpu = f", cpu {r['cpu_seconds']:7.2f} s" if "cpu_seconds" in r else ""
    if "cpu_children_seconds" in r:
        cpu += f" (+ workers {r['cpu_children_seconds']:.2f} s)"
    peak = r.get("peak_tree_mib", r["peak_mib"])
    return (f"N={n:>9,} {name:<17} {r['seconds']:7.2f} s{_target(name, n)}{cpu}, peak {peak:6.0f} MiB "
            f"({peak * 1024 / n:5.1f} KiB/grant; this process {r['peak_mib']:.0f})"
            + (f"  [{stages}]" if stages else ""))


def main() -> None:
    ap = argparse.ArgumentParser()
    ap.add_argument("--sizes", default="1000,10000,100000")
    ap.add_argument("--grants", type=int, help="one ledger size only (results in scale_N.txt)")
    ap.add_argument("--jobs", help=f"comma-separated jobs among: {', '.join(JOBS)}")
    ap.add_argument("--out", type=pathlib.Path, help="results file (default bench/results/scale.txt)")
    a = ap.parse_args()
    sizes = [a.grants] if a.grants else [int(x) for x in a.sizes.split(",")]
    jobs = [j.strip() for j in a.jobs.split(",")] if a.jobs else (
        list(JOBS[:3]) if a.grants and a.grants > 300_000 else list(JOBS))
    out = a.out or (RESULTS.with_name(f"scale_{a.grants}.txt") if a.grants else RESULTS)
    lines = [f"grantval scale benchmark, {_dt.date.today().isoformat()}", describe(),
             "synthetic ledgers from bench/make_ledger.py (seed 1); expense from 2019-01-01 through 2028-12-31 "
             "(40 quarterly periods)", ""]
    table: dict[str, dict[int, float]] = {}
    with tempfile.TemporaryDirectory() as tmp:
        tmp = pathlib.Path(tmp)
        for n in sizes:
            led = make_ledger(n, tmp / f"L{n}")
            commands = {
                "check": ["check", str(led)],
                "value": ["value", str(led), "--csv-dir", str(tmp / f"v{n}")],
                "expense csv": ["expense", str(led), "--through", "2028-12-31", "--from", "2019-01-01",
                                "--csv-dir", str(tmp / f"c{n}"), "--no-workbook"],
                "expense workbook": ["expense", str(led), "--through", "2028-12-31", "--from", "2019-01-01",
                                     "-o", str(tmp / f"e{n}.xlsx")],
            }
            for name, args in commands.items():
                if name not in jobs:
                    continue
                r = run(args)
                table.setdefault(name, {})[n] = r["seconds"]
                lines.append(_line(n, name, r))
                print(lines[-1], flush=True)
    lines.append("")
    for name, by_n in table.items():
        ns = sorted(by_n)
        if len(ns) > 1:
            ratios = ", ".join(f"x{by_n[b] / by_n[a]:.1f} for x{b // a} grants" for a, b in zip(ns, ns[1:]))
            lines.append(f"growth {name}: {ratios}")
    write_results(out, lines)


if __name__ == "__main__":
    main()
