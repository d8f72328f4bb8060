"""Seeded generator of synthetic ledgers for benchmarks (invented data).

    python -m bench.make_ledger N OUT_FOLDER [--seed S]

N grants over about 300 distinct grant dates for N = 100,000 (fewer for
smaller N), a realistic mix of schedules (annual, monthly after a one-year
cliff, three-year cliff, quarterly RSUs), about 30% RSUs, a quarter of the
grants valued on the lattice, forfeitures for about 5% of grants, a few
exercises and expirations, forfeiture estimates and a policy table.
"""

from __future__ import annotations

import argparse
import csv
import pathlib

import numpy as np

SCHEDULES = np.array([(48, 12, 0), (48, 1, 12), (36, 36, 0), (48, 3, 12)])
GROUPS = np.array(["engineering", "sales", "operations", "finance", "research", "support"])


def _add_months(d: np.ndarray, m) -> np.ndarray:
    month0 = d.astype("datetime64[M]")
    day = (d - month0.astype("datetime64[D]")).astype(np.int64)
    target = month0 + np.asarray(m).astype("timedelta64[M]")
    length = ((target + np.timedelta64(1, "M")).astype("datetime64[D]") - target.astype("datetime64[D]")).astype(np.int64)
    return target.astype("datetime64[D]") + np.minimum(day, length - 1).astype("timedelta64[D]")


def make_ledger(n: int, out: pathlib.Path, seed: int = 1) -> pathlib.Path:
    rng = np.random.default_rng(seed)
    out.mkdir(parents=True, exist_ok=True)
    n_dates = int(min(300, max(4, n // 330)))
    start = np.datetime64("2019-01-02")
    date_pool = np.sort(start + np.sort(rng.choice(np.arange(0, 7 * 365), n_dates, replace=False)).astype("timedelta64[D]"))
    price = 20.0 * np.exp(np.cumsum(rng.normal(0.0004, 0.02, n_dates)))
    lattice_date = rng.random(n_dates) < 0.25
    gi = rng.integers(0, n_dates, n)
    gdate = date_pool[gi]
    rsu = rng.random(n) < 0.3
    sched = np.where(rsu, 3, rng.integers(0, 3, n))
    months, every, cliff = SCHEDULES[sched].T
    qty = np.where(rsu, rng.integers(4, 80, n) * 25, rng.integers(4, 120, n) * 50)
    strike = np.round(price[gi], 2)
    expiry = _add_months(gdate, 120)
    group = GROUPS[rng.integers(0, len(GROUPS), n)]
    ids = np.char.add("B", np.char.zfill(np.arange(n).astype(str), 7))
    with open(out / "grants.csv", "w", newline="") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["grant_id", "holder_id", "group", "award_type", "grant_date", "quantity", "exercise_price",
                    "expiration_date", "vest_months", "vest_every_months", "cliff_months"])
        for i in range(n):
            w.writerow([ids[i], f"E{rng.integers(0, n // 2 + 1):07d}", group[i], "rsu" if rsu[i] else "option",
                        str(gdate[i]), int(qty[i]), "" if rsu[i] else f"{strike[i]:.2f}",
                        "" if rsu[i] else str(expiry[i]), int(months[i]), int(every[i]), int(cliff[i])])
    with open(out / "assumptions.csv", "w", newline="") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["grant_date", "share_price", "volatility", "risk_free_rate", "dividend_yield", "model",
                    "exercise_multiple", "post_vest_exit_rate"])
        for j in range(n_dates):
            lat = lattice_date[j]
            w.writerow([str(date_pool[j]), f"{price[j]:.2f}", f"{rng.uniform(0.3, 0.6):.4f}",
                        f"{rng.uniform(0.005, 0.05):.4f}", f"{rng.choice([0.0, 0.01]):.4f}",
                        "lattice" if lat else "bsm", "2.5" if lat else "", "0.05" if lat else ""])
    # events: forfeit ~5% (after some service), exercise of part of the first tranche ~3%, expire ~1%
    u = rng.random(n)
    rows = []
    first_vest = _add_months(gdate, np.where(cliff > 0, cliff, every))
    for i in np.flatnonzero(u < 0.05):
        d = gdate[i] + np.timedelta64(int(rng.integers(30, 1200)), "D")
        rows.append([ids[i], str(d), "forfeit", "", ""])
    for i in np.flatnonzero((u >= 0.05) & (u < 0.08) & ~rsu):
        d = first_vest[i] + np.timedelta64(int(rng.integers(1, 200)), "D")
        q1 = int(qty[i]) * 12 // 48 if sched[i] != 2 else int(qty[i])
        rows.append([ids[i], str(d), "exercise", max(1, q1 // 2), f"{strike[i] * 1.3:.2f}"])
    for i in np.flatnonzero((u >= 0.08) & (u < 0.09) & ~rsu & (sched != 2)):
        d = first_vest[i] + np.timedelta64(10, "D")
        rows.append([ids[i], str(d), "forfeit", "", ""])
        rows.append([ids[i], str(d + np.timedelta64(90, "D")), "expire", "", ""])
    with open(out / "events.csv", "w", newline="") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["grant_id", "event_date", "event_type", "quantity", "share_price"])
        w.writerows(rows)
    with open(out / "estimates.csv", "w", newline="") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["applies_to", "effective_date", "annual_forfeiture_rate", "expected_vest_fraction"])
        w.writerows([["*", "2018-01-01", "0.06", ""], ["sales", "2018-01-01", "0.12", ""], ["*", "2023-01-01", "0.05", ""]])
    with open(out / "policy.csv", "w", newline="") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerows([["key", "value"], ["standard", "asc718"], ["attribution", "straight-line"],
                     ["forfeitures", "estimate"], ["period", "quarter"]])
    return out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("n", type=int)
    ap.add_argument("out", type=pathlib.Path)
    ap.add_argument("--seed", type=int, default=1)
    a = ap.parse_args()
    make_ledger(a.n, a.out, a.seed)


if __name__ == "__main__":
    main()
