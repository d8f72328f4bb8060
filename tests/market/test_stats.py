"""Market-data calculations: volatility, sampling, curve interpolation, compounding."""

import numpy as np
import pytest

from grantval.market.stats import historical_volatility, interpolate_yield, par_to_continuous, sample_closes


def test_volatility_equals_direct_numpy_computation():
    rng = np.random.default_rng(1)
    closes = 30 * np.exp(np.cumsum(rng.normal(0, 0.02, 500)))
    vol, n = historical_volatility(closes, "daily")
    r = np.log(closes[1:] / closes[:-1])
    assert n == 499
    assert vol == pytest.approx(np.std(r, ddof=1) * np.sqrt(252), rel=1e-14)


@pytest.mark.parametrize("sigma, frequency, n", [(0.35, "daily", 1500), (0.6, "weekly", 400), (0.25, "monthly", 240)])
def test_gbm_volatility_recovered_within_two_standard_errors(sigma, frequency, n):
    # seeded geometric Brownian motion with known sigma; the standard error of an
    # annualised volatility estimate from n returns is about sigma / sqrt(2 n) (common practice)
    per_year = {"daily": 252, "weekly": 52, "monthly": 12}[frequency]
    rng = np.random.default_rng(11)
    dt = 1 / per_year
    x = np.cumsum((0.05 - 0.5 * sigma**2) * dt + sigma * np.sqrt(dt) * rng.standard_normal(n))
    vol, m = historical_volatility(50 * np.exp(np.r_[0.0, x]), frequency)
    assert m == n
    assert abs(vol - sigma) <= 2 * sigma / np.sqrt(2 * n)


def test_weekly_and_monthly_sampling_take_the_last_close():
    # business days 2027-01-01 (a Friday) to 2027-02-26; close = position + 1.  The
    # expected dates are read off the 2027 calendar (hand-worked): weeks run Monday to
    # Sunday, so every Friday ends a week; January's last business day is Friday the
    # 29th, February's is Friday the 26th.  The Friday 2027-01-15 is removed (a holiday),
    # so that week ends on Thursday the 14th.
    days = np.arange(np.datetime64("2027-01-01"), np.datetime64("2027-03-01"))
    days = days[np.is_busday(days) & (days != np.datetime64("2027-01-15"))].astype(np.int64)
    closes = np.arange(days.size, dtype=float) + 1
    as_text = lambda d: [str(np.datetime64(int(x), "D")) for x in d]  # noqa: E731
    close_on = {t: c for t, c in zip(as_text(days), closes)}
    d, c = sample_closes(days, closes, "monthly")
    assert as_text(d) == ["2027-01-29", "2027-02-26"]
    assert list(c) == [close_on["2027-01-29"], close_on["2027-02-26"]] == [20.0, 40.0]  # 20 business days in each month here
    d, c = sample_closes(days, closes, "weekly")
    fridays = ["2027-01-01", "2027-01-08", "2027-01-14", "2027-01-22", "2027-01-29",
               "2027-02-05", "2027-02-12", "2027-02-19", "2027-02-26"]
    assert as_text(d) == fridays
    assert list(c) == [close_on[t] for t in fridays]


def test_interpolation_exact_at_tenors_and_linear_between():
    tenors = np.array([1 / 12, 1.0, 5.0, 10.0])
    yields = np.array([0.05, 0.045, 0.04, 0.042])
    for t, y in zip(tenors, yields):
        assert interpolate_yield(tenors, yields, t)[0] == pytest.approx(y, abs=1e-15)
    assert interpolate_yield(tenors, yields, 3.0)[0] == pytest.approx(0.045 + (0.04 - 0.045) * 0.5)
    assert interpolate_yield(tenors, yields, 7.5)[0] == pytest.approx(0.041)
    y, lo, hi, outside = interpolate_yield(tenors, yields, 30.0)
    assert y == 0.042 and outside


def test_semiannual_par_yield_to_continuous_hand_worked():
    # 4% a year compounded twice a year: 2 ln(1.02) = 0.039605254... (hand-worked)
    assert par_to_continuous(0.04) == pytest.approx(0.0396052546, abs=1e-10)
    assert np.exp(par_to_continuous(0.04)) == pytest.approx(1.02**2, rel=1e-15)
