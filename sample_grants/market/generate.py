"""Invented market data for Corvane Instruments, Inc. (ticker CRVN) and three invented peers.

Run from the project root to rewrite ``prices.csv``, ``curve.csv``,
``dividends.csv`` and ``peers.csv`` beside this file::

    python sample_grants/market/generate.py

Seeded, so it always writes the same files.  CRVN's closes pass through the
share prices of the demo ledger's assumptions on its grant dates (a Brownian
bridge between them, about 45% volatility); the peers are plain geometric
Brownian motions.  The curve has par yields in percent.

``prices.csv`` also holds, from 2020 on, the closes of six invented peers
PEERA..PEERF (the demo ledger's peer set ``sector_peers``): each a log-normal
walk whose daily log return loads on CRVN's own standardised return and on a
common sector factor (``SECTOR_PEERS``: volatility, loading on CRVN, loading on
the sector), drawn from a generator of their own so that the older rows are
unchanged.  ``grantval assumptions --peer-tables`` derives their volatilities
and correlations from these closes.
"""

from __future__ import annotations

import csv
import pathlib

import numpy as np

HERE = pathlib.Path(__file__).parent
RNG = np.random.default_rng(7)
ANCHORS = {"2024-02-15": 18.40, "2024-05-15": 19.85, "2024-08-15": 17.60, "2024-11-15": 21.10,
           "2025-02-18": 23.45, "2025-05-15": 22.80, "2025-08-15": 25.30, "2025-11-17": 27.15,
           "2026-02-17": 26.40, "2026-05-15": 29.90, "2026-08-17": 31.25}
PEERS = {"HLXS": (0.38, 0.6), "VNTR": (0.52, 0.25), "QSMT": (0.44, 0.15)}  # (volatility, weight)
SECTOR_PEERS = {"PEERA": (0.32, 0.45, 0.40), "PEERB": (0.38, 0.35, 0.50), "PEERC": (0.45, 0.30, 0.45),
                "PEERD": (0.52, 0.25, 0.35), "PEERE": (0.41, 0.40, 0.30), "PEERF": (0.60, 0.20, 0.40)}
SECTOR_START = "2020-01-02"
TENORS = ["1m", "3m", "6m", "1y", "2y", "3y", "5y", "7y", "10y", "20y", "30y"]


def business_days(start: str, end: str) -> np.ndarray:
    d = np.arange(np.datetime64(start), np.datetime64(end) + 1)
    return d[np.is_busday(d)]


def own_path(days: np.ndarray, sigma: float = 0.45) -> np.ndarray:
    step = sigma / np.sqrt(252)
    idx = {str(d): i for i, d in enumerate(days)}
    anchors = sorted((idx[k], np.log(v)) for k, v in ANCHORS.items())
    x = np.empty(days.size)
    i0, x0 = anchors[0]
    x[: i0 + 1] = x0 - np.cumsum(np.r_[0.0, RNG.normal(0, step, i0)])[::-1]
    for (ia, xa), (ib, xb) in zip(anchors[:-1], anchors[1:]):
        n = ib - ia
        walk = np.cumsum(RNG.normal(0, step, n))
        bridge = walk - np.arange(1, n + 1) / n * walk[-1]
        x[ia + 1 : ib + 1] = xa + (xb - xa) * np.arange(1, n + 1) / n + bridge
    il, xl = anchors[-1]
    x[il + 1 :] = xl + np.cumsum(RNG.normal(0, step, days.size - il - 1))
    return np.exp(x)


def sector_rows(days: np.ndarray, own: np.ndarray) -> list[list[str]]:
    """Closes of PEERA..PEERF from SECTOR_START: loadings on CRVN's standardised log return and a sector factor."""
    rng = np.random.default_rng(16)
    keep = days >= np.datetime64(SECTOR_START)
    r_own = np.diff(np.log(own[keep]))  # CRVN's return from each kept day to the next
    z_own = (r_own - r_own.mean()) / r_own.std()
    sector = rng.normal(size=z_own.size)
    rows = []
    for t, (vol, a, b) in SECTOR_PEERS.items():
        z = a * z_own + b * sector + np.sqrt(1 - a * a - b * b) * rng.normal(size=z_own.size)
        x = np.log(rng.uniform(20, 80)) + np.r_[0.0, np.cumsum(vol / np.sqrt(252) * z)]
        rows += [[str(d), t, f"{c:.2f}"] for d, c in zip(days[keep], np.exp(x))]
    return rows


def main() -> None:
    days = business_days("2012-01-02", "2026-11-30")
    with open(HERE / "prices.csv", "w", newline="") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["date", "ticker", "close"])
        own = own_path(days)
        rows = [[str(d), "CRVN", f"{c:.2f}"] for d, c in zip(days, own)]
        for t, (vol, _) in PEERS.items():
            x = np.log(40.0) + np.cumsum(RNG.normal(0.0002, vol / np.sqrt(252), days.size))
            rows += [[str(d), t, f"{c:.2f}"] for d, c in zip(days, np.exp(x))]
        w.writerows(rows + sector_rows(days, own))
    with open(HERE / "peers.csv", "w", newline="") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["ticker", "weight"])
        w.writerows([[t, wt] for t, (_, wt) in PEERS.items()])
    # monthly curve rows plus every grant date
    month_starts = days[np.r_[True, days[1:].astype("datetime64[M]") != days[:-1].astype("datetime64[M]")]]
    month_starts = month_starts[month_starts >= np.datetime64("2023-01-01")]
    curve_days = sorted(set(month_starts) | {np.datetime64(k) for k in ANCHORS})
    base = np.array([5.30, 5.35, 5.20, 4.90, 4.50, 4.30, 4.10, 4.15, 4.20, 4.50, 4.40])
    with open(HERE / "curve.csv", "w", newline="") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["date"] + TENORS)
        level = 0.0
        for d in curve_days:
            level += RNG.normal(-0.02, 0.08)
            w.writerow([str(d)] + [f"{y:.3f}" for y in base + level * np.linspace(1.0, 0.6, len(base))])
    with open(HERE / "dividends.csv", "w", newline="") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(["ex_date", "ticker", "amount"])
        for d in ["2025-01-10", "2025-04-10", "2025-07-10", "2025-10-10", "2026-01-09", "2026-04-10",
                  "2026-07-10", "2026-10-09"]:
            w.writerow([d, "CRVN", "0.05"])


if __name__ == "__main__":
    main()
