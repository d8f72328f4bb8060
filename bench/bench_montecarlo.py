"""Benchmark of the market-condition Monte Carlo engine and the ESPP values.

Run from the project root::

    python -m bench.bench_montecarlo        # prints and writes bench/results/montecarlo.txt

1. Speed: one relative-TSR award (company + 20 peers, 3-year period, 20-day
   averaging at both ends, 100,000 paths), best of 3 (goal under 2 s); then
   1,000 awards (different payout curves) on the same simulation; peak
   resident memory of the process.
2. Daily monitoring: a share-price hurdle over 3 years (756 trading days).
3. Accuracy: the Monte Carlo values of tests/pricing/test_montecarlo.py against
   their references, in standard errors and relative terms.
4. ESPP: one vectorised call on 1,000,000 purchase rights.
5. Ledger: 1,000 relative-TSR units (20 peers, one grant date, different payout
   curves) read from a ledger and valued by ``grantval value``: one simulation.
"""

from __future__ import annotations

import datetime as _dt
import pathlib
import resource
import time

import numpy as np

from bench._machine import describe, write_results
from grantval.pricing.espp import espp_value
from grantval.pricing.montecarlo import (
    PayoutCurve,
    derived_service_period,
    market_award_value,
    market_award_values,
    simulate_market,
)

RESULTS = pathlib.Path(__file__).parent / "results" / "montecarlo.txt"


def _peer_group(peers=20):
    rng = np.random.default_rng(5)
    a = peers + 1
    vol = rng.uniform(0.2, 0.55, a)
    q = rng.uniform(0.0, 0.03, a)
    load = rng.uniform(0.3, 0.8, a)
    corr = np.outer(load, load)
    np.fill_diagonal(corr, 1.0)
    return np.full(a, 50.0), vol, q, corr


def _best(fn, repeat=3):
    best, out = np.inf, None
    for _ in range(repeat):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out


def bench_speed(lines):
    s, vol, q, corr = _peer_group()

    def one():
        sim = simulate_market(s, vol, q, 0.04, 3.0, corr, averaging_days=20)
        return sim, market_award_value(sim, "25:0.5;50:1;75:2", "relative_tsr")

    sec, (sim, v) = _best(one)
    sim_sec, _ = _best(lambda: simulate_market(s, vol, q, 0.04, 3.0, corr, averaging_days=20), repeat=1)
    lines.append(
        f"relative TSR, 20 peers, 3 years, 20-day averaging both ends, {sim.paths:,} paths: "
        f"{sec:.2f} s best of 3 (goal < 2 s: {'met' if sec < 2 else 'NOT met'}); "
        f"value {v.value:.4f} +- {v.standard_error:.4f} (1 s.e.) per target unit, P(payout > 0) {v.payout_probability:.3f}"
    )
    rng = np.random.default_rng(6)
    curves = [
        PayoutCurve((a, 50.0, b), (lo, 1.0, hi), negative_tsr_cap=(1.0 if i % 3 == 0 else None))
        for i, (a, b, lo, hi) in enumerate(
            zip(rng.uniform(10, 40, 1000), rng.uniform(60, 95, 1000), rng.uniform(0, 0.5, 1000), rng.uniform(1.5, 2.5, 1000))
        )
    ]
    sec, values = _best(lambda: market_award_values(sim, curves, "relative_tsr"))
    ses = np.array([x.standard_error / x.value for x in values])
    lines.append(
        f"1,000 relative-TSR awards on that one simulation: {sec:.2f} s "
        f"plus one simulation ({sim_sec:.2f} s), instead of 1,000 simulations (about {1000 * sim_sec:.0f} s); "
        f"relative standard errors {ses.min():.2e} to {ses.max():.2e}"
    )
    kept = sim.tsr.nbytes + sim.end_price.nbytes + sim.end_average.nbytes
    lines.append(
        f"memory: kept per-path arrays {kept / 2**20:.0f} MiB (float32 TSRs and end prices); "
        f"peak resident set of this process so far {resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**10:.0f} MiB"
    )


def bench_daily(lines):
    def run():
        sim = simulate_market([40.0], [0.4], [0.0], 0.04, 3.0, daily=True, hurdles=[60.0])
        return sim, market_award_value(sim, "60:1", "share_price", monitoring="any_day")

    sec, (sim, v) = _best(run, repeat=2)
    d = derived_service_period(sim, 60.0)
    lines.append(
        f"share-price hurdle monitored daily, 3 years (756 days), {sim.paths:,} paths: {sec:.2f} s; "
        f"value {v.value:.4f} +- {v.standard_error:.4f}; derived service period {d.years:.3f} +- {d.standard_error:.3f} years "
        f"(P(met) {d.probability:.3f})"
    )


def bench_accuracy(lines):
    import tests.pricing.test_montecarlo as checks

    rows = []

    def row(name, mc, ref):
        rows.append(f"  {name}: MC {mc.value:.5f} +- {mc.standard_error:.5f}, reference {ref:.5f}, "
                    f"diff {(mc.value - ref) / mc.standard_error:+.2f} s.e., {(mc.value - ref) / ref:+.2e} relative")

    s, q, vol, vol_i, q_i, rho, r, t = 40.0, 0.02, 0.35, 0.18, 0.015, 0.55, 0.04, 2.0
    sim = simulate_market([s, 2500.0], [vol, vol_i], [q, q_i], r, t, rho)
    row("index-outperformance digital (closed form)", market_award_value(sim, "0:1", "index_tsr", index=1),
        checks.outperformance_digital(s, q, vol, vol_i, rho, t))
    s, q, vol, r, t = 80.0, 0.03, 0.3, 0.045, 3.0
    sim = simulate_market([s], [vol], [q], r, t)
    row("absolute-TSR digital, TSR >= 25% (closed form)", market_award_value(sim, "0.25:1", "absolute_tsr"),
        checks.absolute_tsr_digital(s, q, vol, r, t, 0.25))
    s, q, vol, r, t, h = 50.0, 0.01, 0.35, 0.04, 2.0, 70.0
    sim = simulate_market([s], [vol], [q], r, t, daily=True)
    mc = market_award_value(sim, f"{h}:1", "share_price", monitoring="any_day")
    shifted = h * np.exp(checks.BGK * vol * np.sqrt(1 / 252))
    drift = r - q + 0.5 * vol**2
    row("daily hurdle unit vs continuous barrier + BGK shift", mc,
        s * np.exp(-q * t) * checks.up_crossing_probability(drift, vol, t, np.log(shifted / s)))
    row("daily hurdle unit vs continuous barrier, no shift (should fail)", mc,
        s * np.exp(-q * t) * checks.up_crossing_probability(drift, vol, t, np.log(h / s)))
    s, vol, r, h, k = 50.0, 0.4, 0.04, 65.0, 45.0
    sim = simulate_market([s], [vol], [0.0], r, 1.0, daily=True)
    mc = market_award_value(sim, f"{h}:1", "share_price", monitoring="any_day", kind="option", strike=k)
    shifted = h * np.exp(checks.BGK * vol * np.sqrt(1 / 252))
    row("option with daily hurdle vs QuantLib AnalyticBarrierEngine up-and-in", mc,
        checks.ql_up_and_in_call(s, k, shifted, 365, r, vol, 0.0))
    s1, s2, v1, v2, rho = 40.0, 38.0, 0.3, 0.25, -0.3
    sim = simulate_market([s1, s2], [v1, v2], [0.02, 0.0], 0.04, 2.0, rho)
    end = sim.end_price.astype(float)
    pay = np.exp(-0.04 * sim.term) * np.maximum(end[:, 0] - end[:, 1], 0).reshape(-1, 2).mean(axis=1)
    ref = checks.ql_margrabe(s1, s2, 0.02, 0.0, v1, v2, rho, 0.04, 730)
    se = pay.std(ddof=1) / np.sqrt(pay.size)
    rows.append(f"  exchange option on the end prices vs QuantLib AnalyticEuropeanMargrabeEngine: MC {pay.mean():.5f} "
                f"+- {se:.5f}, reference {ref:.5f}, diff {(pay.mean() - ref) / se:+.2f} s.e. (no control variate)")
    rows.append(_service_period_row(checks))
    lines.append("accuracy (100,000 paths, antithetic + control variate):")
    lines.extend(rows)


def _service_period_row(checks):
    from scipy.optimize import brentq
    from scipy.stats import invgauss

    s, vol, r, t, h = 40.0, 0.3, 0.05, 4.0, 52.0
    sim = simulate_market([s], [vol], [0.0], r, t, daily=True, hurdles=[h])
    got = derived_service_period(sim, h)
    nu = r - 0.5 * vol**2
    b = np.log(h * np.exp(checks.BGK * vol * np.sqrt(1 / 252)) / s)
    law = invgauss(mu=(b / nu) / (b**2 / vol**2), scale=b**2 / vol**2)
    median = brentq(lambda u: law.cdf(u) - law.cdf(sim.term) / 2, 1e-6, sim.term)
    return (f"  derived service period vs inverse-Gaussian median (BGK-shifted hurdle): {got.years:.4f} "
            f"+- {got.standard_error:.4f} years, reference {median:.4f}, diff {(got.years - median) * 252:+.2f} trading days")


def bench_espp(lines):
    rng = np.random.default_rng(3)
    n = 1_000_000
    args = (rng.uniform(5, 200, n), rng.choice([0.5, 1.0, 2.0], n), rng.uniform(0, 0.06, n), rng.uniform(0.1, 0.9, n))
    sec, _ = _best(lambda: espp_value(*args, basis="fixed_withholding"))
    from tests.pricing.test_espp import ql_black

    m = 2000
    ours = espp_value(*(a[:m] for a in args), basis="fixed_withholding")
    theirs = np.array([
        0.15 * s + 0.85 * ql_black("call", s, s, t, r, v, 0.0) + 0.15 * ql_black("put", s, s, t, r, v, 0.0)
        for s, t, r, v in zip(*(a[:m] for a in args))
    ])
    lines.append(
        f"ESPP look-back, fixed withholding, 1,000,000 rights in one call: {sec * 1e9 / n:.0f} ns per right; "
        f"max relative difference from the components priced with QuantLib blackFormula (2,000 rights): "
        f"{np.max(np.abs(ours / theirs - 1)):.1e}"
    )


def _tsr_ledger(folder: pathlib.Path, awards=1000, peers=20) -> pathlib.Path:
    """A ledger of ``awards`` relative-TSR units on one peer set and date (invented data)."""
    import csv

    _, vol, q, corr = _peer_group(peers)
    folder.mkdir(parents=True, exist_ok=True)
    tables = {
        "grants": [["grant_id", "holder_id", "group", "award_type", "grant_date", "quantity", "vest_months",
                    "vest_every_months", "cliff_months", "condition_set"]]
        + [[f"T{i:04d}", f"H{i:04d}", "exec", "psu", "2027-03-01", 1000 + i, 36, 36, 0, f"C{i % 50}"]
           for i in range(awards)],
        "assumptions": [["grant_date", "share_price", "volatility", "risk_free_rate", "dividend_yield", "model"],
                        ["2027-03-01", 50, vol[0], 0.04, q[0], "bsm"]],
        "market_conditions": [["condition_set", "metric", "start_date", "end_date", "averaging_days", "peer_set",
                               "payout_curve"]]
        + [[f"C{k}", "relative_tsr", "2027-03-01", "2030-02-28", 20, "P", f"{20 + k % 10}:0.5;50:1;{75 + k % 20}:2"]
           for k in range(50)],
        "peers": [["peer_set", "peer_id", "volatility", "dividend_yield"]]
        + [["P", f"X{j}", vol[j], q[j]] for j in range(1, peers + 1)],
        "correlations": [["peer_set", "first", "second", "correlation"]]
        + [["P", "self" if i == 0 else f"X{i}", f"X{j}", corr[i, j]] for i in range(peers + 1)
           for j in range(i + 1, peers + 1)],
    }
    for name, rows in tables.items():
        with open(folder / f"{name}.csv", "w", newline="") as fh:
            csv.writer(fh).writerows(rows)
    return folder


def bench_ledger(lines):
    import tempfile

    from grantval.api import value

    with tempfile.TemporaryDirectory() as tmp:
        folder = _tsr_ledger(pathlib.Path(tmp))
        seconds, run = _best(lambda: value(folder), repeat=2)
    t = run.fair_values.table
    lines.append(
        f"ledger: 1,000 relative-TSR units (20 peers, 50 payout curves, one date), grantval value: {seconds:.2f} s "
        f"best of 2, {run.fair_values.distinct_valuations} simulation(s); values "
        f"{t['fair_value_per_unit'].min():.4f} to {t['fair_value_per_unit'].max():.4f}, "
        f"largest standard error {t['std_error'].max():.4f}"
    )


def main() -> None:
    import os

    lines = [
        f"grantval market-condition Monte Carlo benchmark, {_dt.date.today().isoformat()}",
        describe(),
        f"load average at start (other work on the machine): {os.getloadavg()[0]:.2f}",
    ]
    bench_speed(lines)
    bench_daily(lines)
    bench_accuracy(lines)
    bench_espp(lines)
    bench_ledger(lines)
    write_results(RESULTS, lines)


if __name__ == "__main__":
    main()
