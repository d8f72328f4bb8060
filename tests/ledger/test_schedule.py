"""Tranche schedules: dates, cumulative rounding, cliffs (rules of docs/ledger-format.md)."""

import numpy as np
import pandas as pd

from grantval.dates import add_months, period_ends
import pytest

from grantval.ledger import schedule
from grantval.ledger.schedule import generate_tranches


def grants(**cols):
    base = dict(quantity=[1000], vest_months=[48], vest_every_months=[12], cliff_months=[0],
                vest_start_date=np.array(["2027-01-31"], dtype="datetime64[D]"))
    base.update(cols)
    return pd.DataFrame(base)


def test_month_end_clamping():
    # common practice: the same day of month, or the month's last day when it has fewer days
    d = np.array(["2027-01-31", "2027-01-31", "2028-01-31", "2027-08-31"], dtype="datetime64[D]")
    got = add_months(d, [1, 13, 1, 6])
    assert list(got.astype(str)) == ["2027-02-28", "2028-02-29", "2028-02-29", "2028-02-29"]


def test_cumulative_rounding_sums_to_quantity():
    t = generate_tranches(grants(quantity=[1001], vest_months=[36], vest_every_months=[12]))
    # floor(1001 k / 3) - floor(1001 (k - 1) / 3): 333, 334, 334
    assert t["quantity"].tolist() == [333, 334, 334]
    assert t["vest_date"].astype(str).tolist() == ["2028-01-31", "2029-01-31", "2030-01-31"]


def test_monthly_after_one_year_cliff():
    t = generate_tranches(grants(quantity=[4800], vest_months=[48], vest_every_months=[1], cliff_months=[12],
                                 vest_start_date=np.array(["2027-03-15"], dtype="datetime64[D]")))
    assert len(t) == 37  # the cliff tranche plus 36 monthly ones
    assert t["vest_date"].iloc[0] == np.datetime64("2028-03-15")
    assert t["quantity"].iloc[0] == 1200
    assert t["quantity"].sum() == 4800
    assert t["vest_date"].iloc[-1] == np.datetime64("2031-03-15")


def test_cliff_not_on_a_tranche_date():
    t = generate_tranches(grants(quantity=[100], vest_months=[10], vest_every_months=[5], cliff_months=[7],
                                 vest_start_date=np.array(["2027-01-01"], dtype="datetime64[D]")))
    assert t["vest_date"].astype(str).tolist() == ["2027-08-01", "2027-11-01"]
    assert t["quantity"].tolist() == [50, 50]


def test_zero_vest_months_is_immediate():
    t = generate_tranches(grants(vest_months=[0], vest_every_months=[1]))
    assert len(t) == 1 and t["vest_date"].iloc[0] == np.datetime64("2027-01-31")


def test_many_grants_vectorised():
    n = 500
    g = grants(quantity=np.arange(1, n + 1) * 7, vest_months=np.full(n, 48), vest_every_months=np.full(n, 3),
               cliff_months=np.full(n, 12), vest_start_date=np.full(n, np.datetime64("2027-05-31")))
    t = generate_tranches(g)
    assert (t.groupby("grant_idx")["quantity"].sum().to_numpy() == g["quantity"].to_numpy()).all()


def _grouped_reference(g: pd.DataFrame) -> pd.DataFrame:
    """Tranches built one grant at a time by the documented rule, merged by grouping (docs/ledger-format.md)."""
    rows = []
    for i, r in enumerate(g.itertuples()):
        n = 1 if r.vest_months == 0 else r.vest_months // r.vest_every_months
        cliff = add_months(np.array([r.vest_start_date], dtype="datetime64[D]"), [r.cliff_months])[0]
        for k in range(1, n + 1):
            off = 0 if r.vest_months == 0 else r.vest_every_months * k
            d = max(add_months(np.array([r.vest_start_date], dtype="datetime64[D]"), [off])[0], cliff)
            rows.append((i, d, (r.quantity * k) // n - (r.quantity * (k - 1)) // n))
    f = pd.DataFrame(rows, columns=["grant_idx", "vest_date", "quantity"])
    f = f.groupby(["grant_idx", "vest_date"], as_index=False)["quantity"].sum()
    f = f[f["quantity"] > 0].reset_index(drop=True)
    f["tranche"] = f.groupby("grant_idx").cumcount() + 1
    return f[["grant_idx", "tranche", "vest_date", "quantity"]]


@pytest.mark.parametrize("block", [16_384, 7, 1])
def test_random_schedules_match_grouping_one_grant_at_a_time(block, monkeypatch):
    monkeypatch.setattr(schedule, "GRANTS_PER_BLOCK", block)  # blocks of grants give the same table
    # month-end starts, cliffs between and on tranche dates, quantities smaller than the tranche count
    rng = np.random.default_rng(3)
    n = 300
    every = rng.choice([1, 3, 6, 12], n)
    g = pd.DataFrame({
        "quantity": rng.integers(1, 200, n), "vest_months": every * rng.integers(0, 9, n), "vest_every_months": every,
        "cliff_months": rng.choice([0, 5, 12, 13, 24, 60], n),
        "vest_start_date": np.datetime64("2027-01-28") + rng.integers(0, 40, n).astype("timedelta64[D]")})
    got = generate_tranches(g)
    want = _grouped_reference(g)
    assert len(got) == len(want) and got.dtypes.to_dict() == want.dtypes.to_dict()
    pd.testing.assert_frame_equal(got, want, check_exact=True)


def test_no_grants_no_tranches():
    t = generate_tranches(grants(quantity=[], vest_months=[], vest_every_months=[], cliff_months=[],
                                 vest_start_date=np.array([], dtype="datetime64[D]")))
    assert len(t) == 0 and list(t.columns) == ["grant_idx", "tranche", "vest_date", "quantity"]
    assert str(t["vest_date"].dtype).startswith("datetime64") and t["quantity"].dtype == np.int64


def test_fiscal_periods():
    ends = period_ends(np.datetime64("2027-02-10"), np.datetime64("2027-12-31"), "quarter", 6)
    assert ends.astype(str).tolist() == ["2027-03-31", "2027-06-30", "2027-09-30", "2027-12-31"]
    ends = period_ends(np.datetime64("2027-02-10"), np.datetime64("2028-07-01"), "year", 6)
    assert ends.astype(str).tolist() == ["2027-06-30", "2028-06-30", "2029-06-30"]
