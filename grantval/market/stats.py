"""Pure calculations on market series (numpy arrays; no files, no pandas)."""

from __future__ import annotations

import numpy as np

PERIODS_PER_YEAR = {"daily": 252, "weekly": 52, "monthly": 12}


def sample_closes(day_numbers: np.ndarray, closes: np.ndarray, frequency: str) -> tuple[np.ndarray, np.ndarray]:
    """Closes at the sampling frequency: every close (daily), or the last close of each week or month.

    ``day_numbers`` are int64 days since 1970-01-01 (ascending).  Weeks end on
    Sunday (ISO weeks); months are calendar months.
    """
    if frequency == "daily":
        return day_numbers, closes
    if frequency == "weekly":
        bucket = (day_numbers + 3) // 7  # 1970-01-01 was a Thursday: weeks from Monday
    elif frequency == "monthly":
        bucket = day_numbers.astype("datetime64[D]").astype("datetime64[M]").astype(np.int64)
    else:
        raise ValueError(f"frequency must be daily, weekly or monthly; got {frequency!r}")
    last = np.r_[bucket[1:] != bucket[:-1], True]
    return day_numbers[last], closes[last]


def historical_volatility(closes: np.ndarray, frequency: str) -> tuple[float, int]:
    """Annualised sample standard deviation of log returns, and the number of returns.

    ``sigma = std(ln(c_t / c_{t-1}), ddof=1) * sqrt(periods per year)`` with
    252, 52 or 12 periods (common practice; ASC 718-10-55-37 lists historical
    volatility over a period comparable to the expected term).
    """
    r = np.diff(np.log(np.asarray(closes, dtype=float)))
    n = r.size
    if n < 2:
        return float("nan"), n
    return float(np.std(r, ddof=1) * np.sqrt(PERIODS_PER_YEAR[frequency])), n


def interpolate_yield(tenors: np.ndarray, yields: np.ndarray, term: float) -> tuple[float, int, int, bool]:
    """Linear interpolation of a curve at ``term`` years (flat beyond the ends).

    Returns the yield, the indices of the two tenors used, and whether the
    term lies outside the curve (flat extrapolation).
    """
    order = np.argsort(tenors)
    t, y = np.asarray(tenors, float)[order], np.asarray(yields, float)[order]
    if term <= t[0]:
        return float(y[0]), int(order[0]), int(order[0]), term < t[0]
    if term >= t[-1]:
        return float(y[-1]), int(order[-1]), int(order[-1]), term > t[-1]
    j = int(np.searchsorted(t, term, side="right"))
    lo, hi = j - 1, j
    w = (term - t[lo]) / (t[hi] - t[lo])
    return float(y[lo] + w * (y[hi] - y[lo])), int(order[lo]), int(order[hi]), False


def par_to_continuous(par_yield):
    """Continuously compounded rate from a semiannual par (bond-equivalent) yield: 2 ln(1 + y/2)."""
    return 2.0 * np.log1p(np.asarray(par_yield, dtype=float) / 2.0)


def common_log_returns(days_a: np.ndarray, closes_a: np.ndarray, days_b: np.ndarray,
                       closes_b: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Log returns of two series between consecutive dates on which both have a close.

    ``days_*`` are ascending int64 day numbers without repeats.  Returns the
    common dates and the two return arrays (one return fewer than dates): a
    date on which only one series has a close is skipped, so each return of
    one series covers the same interval as the other's (pairwise deletion).
    """
    common, ia, ib = np.intersect1d(days_a, days_b, assume_unique=True, return_indices=True)
    return common, np.diff(np.log(closes_a[ia])), np.diff(np.log(closes_b[ib]))


def return_correlation(returns_a: np.ndarray, returns_b: np.ndarray) -> float:
    """Pearson correlation of two equally long return arrays (NaN with fewer than 3 or a constant one).

    ``sum((a - mean a)(b - mean b)) / sqrt(sum((a - mean a)^2) sum((b - mean b)^2))``
    (the sample correlation; common practice).
    """
    a = np.asarray(returns_a, float) - np.mean(returns_a) if len(returns_a) else np.zeros(0)
    b = np.asarray(returns_b, float) - np.mean(returns_b) if len(returns_b) else np.zeros(0)
    den = np.sqrt(np.dot(a, a) * np.dot(b, b))
    if a.size < 3 or not den > 0:
        return float("nan")
    return float(np.clip(np.dot(a, b) / den, -1.0, 1.0))


def smallest_eigenvalue(matrix: np.ndarray) -> float:
    """Smallest eigenvalue of a symmetric matrix (below about -1e-10: not positive semi-definite)."""
    return float(np.linalg.eigvalsh(np.asarray(matrix, float)).min())
