"""Calendar arithmetic on numpy ``datetime64[D]`` arrays.

Year fractions are actual days / 365.25 (common practice for terms measured
in years over spans that include leap years); the convention is stated in the
outputs.
"""

from __future__ import annotations

import datetime as _dt

import numpy as np

DAYS_PER_YEAR = 365.25
DAY = np.timedelta64(1, "D")


def to_days(values) -> np.ndarray:
    """Return ``values`` as a ``datetime64[D]`` array."""
    return np.asarray(values, dtype="datetime64[D]")


def add_months(dates, months) -> np.ndarray:
    """Add whole months, keeping the day of month and clamping to the month's end.

    ``add_months(2027-01-31, 1) == 2027-02-28``; ``add_months(2028-01-31, 1) == 2028-02-29``.
    """
    d = to_days(dates)
    months = np.asarray(months, dtype=np.int64)
    month0 = d.astype("datetime64[M]")
    day_index = (d - month0.astype("datetime64[D]")).astype(np.int64)  # 0-based day of month
    target = month0 + months.astype("timedelta64[M]")
    month_len = ((target + np.timedelta64(1, "M")).astype("datetime64[D]") - target.astype("datetime64[D]")).astype(np.int64)
    return target.astype("datetime64[D]") + np.minimum(day_index, month_len - 1).astype("timedelta64[D]")


def year_fraction(start, end) -> np.ndarray:
    """Years from ``start`` to ``end``: actual days / 365.25."""
    return (to_days(end) - to_days(start)).astype(np.int64) / DAYS_PER_YEAR


def iso(d) -> str:
    """ISO text of one ``datetime64[D]`` or ``datetime.date``."""
    if isinstance(d, _dt.date):
        return d.isoformat()
    return str(np.datetime64(d, "D"))


def period_ends(first_day, last_day, period: str, fiscal_year_end_month: int = 12) -> np.ndarray:
    """Last days of the fiscal periods that overlap ``[first_day, last_day]``.

    Parameters
    ----------
    first_day, last_day : datetime64[D]
        The window; the first period is the one containing ``first_day`` and
        the last the one containing ``last_day``.
    period : {"month", "quarter", "year"}
    fiscal_year_end_month : int
        Month (1-12) in which the fiscal year ends; quarters end every third
        month counting back from it.
    """
    step = {"month": 1, "quarter": 3, "year": 12}[period]
    first = np.datetime64(first_day, "M")
    last = np.datetime64(last_day, "M")
    # month index (0 = January of year 0) of period-ending months satisfy
    # (index - (fye - 1)) % step == 0
    fye = fiscal_year_end_month - 1
    start_idx = int(first.astype(np.int64))
    # calendar month number: datetime64[M] counts from 1970-01
    def is_end(idx):
        return ((idx % 12) - fye) % step == 0

    idx = start_idx
    while not is_end(idx):
        idx += 1
    end_idx = int(last.astype(np.int64))
    while not is_end(end_idx):
        end_idx += 1
    months = np.arange(idx, end_idx + 1, step).astype("datetime64[M]")
    return (months + np.timedelta64(1, "M")).astype("datetime64[D]") - DAY
