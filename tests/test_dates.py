"""Month arithmetic on day arrays against the standard library's calendar (an independent computation).

Reference: Python's ``datetime.date`` and ``calendar.monthrange`` (proleptic
Gregorian calendar), one date at a time; the rule (same day of month, clamped to
the month's end) is common practice, stated in docs/ledger-format.md.
"""

import calendar
import datetime as dt

import numpy as np
import pytest

from grantval.dates import add_months, from_month_and_day, month_and_day


def _reference(day: dt.date, months: int) -> dt.date:
    count = day.year * 12 + day.month - 1 + months
    year, month = divmod(count, 12)
    return dt.date(year, month + 1, min(day.day, calendar.monthrange(year, month + 1)[1]))


# dates close together and a few centuries apart (the table of month starts), and far apart for their number
# (over 1,600 years: each date converted on its own, dates.from_month_and_day's other branch)
@pytest.mark.parametrize("spread", [400, 40_000, 300_000])
def test_add_months_matches_the_calendar(spread):
    rng = np.random.default_rng(7)
    days = rng.integers(-spread, spread, 4000)
    months = rng.integers(-600, 600, 4000)
    got = add_months(days.astype("datetime64[D]"), months)
    for d, m, g in zip(days.tolist(), months.tolist(), got.tolist()):
        assert g == _reference(dt.date(1970, 1, 1) + dt.timedelta(days=d), m)


def test_month_ends_leap_days_and_not_a_time():
    d = np.array(["2027-01-31", "2028-01-31", "2100-01-31", "2000-01-31", "NaT", "2027-08-31"], dtype="datetime64[D]")
    got = add_months(d, [1, 1, 1, 1, 5, -6])
    assert got.astype(str).tolist() == ["2027-02-28", "2028-02-29", "2100-02-28", "2000-02-29", "NaT", "2027-02-28"]


def test_month_and_day_round_trip():
    d = np.arange(-3000, 3000).astype("datetime64[D]")
    count, day = month_and_day(d)
    assert (from_month_and_day(count, day) == d).all()
    assert from_month_and_day(np.array([], dtype=np.int64), np.array([], dtype=np.int64)).size == 0
