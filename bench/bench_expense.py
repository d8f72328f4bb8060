"""Benchmark of the expense engine (excluding file writing).

100,000 grants of 4 tranches over 40 quarterly periods with 5% of grants
forfeited, built directly as engine inputs (seeded).  Reports the engine's
time and peak memory (tracemalloc of numpy allocations, and the process's
maximum resident set size).

    python -m bench.bench_expense     # -> bench/results/expense.txt
"""

from __future__ import annotations

import datetime as _dt
import pathlib
import resource
import time
import tracemalloc

import numpy as np

from bench._machine import describe, write_results
from grantval.attribution.inputs import ExpenseInputs
from grantval.attribution.periods import compute_schedule
from grantval.policy import Policy

RESULTS = pathlib.Path(__file__).parent / "results" / "expense.txt"


def synthetic_inputs(n: int = 100_000, tranches: int = 4, seed: int = 3) -> ExpenseInputs:
    rng = np.random.default_rng(seed)
    grant_date = np.datetime64("2025-01-01") + rng.integers(0, 3 * 365, n).astype("timedelta64[D]")
    t_grant = np.repeat(np.arange(n), tranches)
    k = np.tile(np.arange(1, tranches + 1), n)
    t_vest = (grant_date[t_grant].astype("datetime64[M]") + (12 * k).astype("timedelta64[M]")).astype("datetime64[D]")
    qty = rng.integers(100, 5000, n)
    t_qty = np.diff(np.column_stack([np.zeros(n, int)] + [(qty * j) // tranches for j in range(1, tranches + 1)]),
                    axis=1).ravel()
    t_fv = np.repeat(rng.uniform(2, 30, n), tranches)
    forfeit = rng.random(n) < 0.05
    fg = np.flatnonzero(forfeit)
    fdate = grant_date[fg] + rng.integers(30, 1400, fg.size).astype("timedelta64[D]")
    # forfeit every tranche not vested on the date
    rows = [(g * tranches + j, d) for g, d in zip(fg, fdate) for j in range(tranches)
            if t_vest[g * tranches + j] > d]
    c_tranche = np.array([r[0] for r in rows], dtype=np.int64)
    c_date = np.array([r[1] for r in rows], dtype="datetime64[D]")
    return ExpenseInputs(
        grant_id=np.array([f"G{i:06d}" for i in range(n)], dtype=object),
        group=np.array(["eng", "ops", "sales", "g&a"], dtype=object)[rng.integers(0, 4, n)],
        grant_date=grant_date, last_vest=t_vest.reshape(n, tranches)[:, -1],
        t_grant=t_grant, t_vest=t_vest, t_qty=t_qty.astype(np.int64), t_fv=t_fv,
        c_tranche=c_tranche, c_date=c_date, c_qty=t_qty[c_tranche].astype(np.int64),
        c_kind=np.full(c_tranche.size, "forfeit", dtype=object),
        est_applies_to=np.array(["*"], dtype=object), est_effective=np.array(["2024-01-01"], dtype="datetime64[D]"),
        est_rate=np.array([0.06]), est_fraction=np.array([np.nan]),
    )


def main() -> None:
    inp = synthetic_inputs()
    lines = [f"grantval expense-engine benchmark, {_dt.date.today().isoformat()}", describe(),
             f"inputs: {inp.n_grants:,} grants, {len(inp.t_qty):,} tranches, {len(inp.c_qty):,} forfeited tranches"]
    for attribution, forfeitures in (("straight-line", "as-occur"), ("graded", "estimate")):
        policy = Policy(attribution=attribution, forfeitures=forfeitures, period="quarter")
        tracemalloc.start()
        t0 = time.perf_counter()
        sched = compute_schedule(inp, policy, "2034-12-31", start="2025-01-01")
        el = time.perf_counter() - t0
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
        lines.append(
            f"{attribution}, {forfeitures}: {len(sched.period_ends)} quarterly periods in {el:.2f} s "
            f"(target <= 10 s), peak traced memory {peak / 2**20:.0f} MiB (target <= 4 GB); "
            f"total expense {sched.expense_cents.sum() / 100:,.2f}")
    rss = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**10
    lines.append(f"process maximum resident set size: {rss:.0f} MiB")
    write_results(RESULTS, lines)


if __name__ == "__main__":
    main()
