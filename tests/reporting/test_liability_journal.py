"""``liability_tables.liability_journal``: a view of the close journal (reporting.journal.build_journal).

Hand values: IFRS 2 IG Example 12 (figures in tests/attribution/cash_ledgers.py; the liability 194,400 at
the end of year 1 is the standard's), cash paid 15,000 x (25 - 10) = 225,000 on 2032-01-01.
"""

from __future__ import annotations

import pandas as pd

from grantval import api
from grantval.reporting import liability_tables as LT
from grantval.runs import close as C
from tests.attribution.cash_ledgers import IFRS_VALUES, ifrs_example_12, mixed_ledger

VALUES = IFRS_VALUES + (("2031-12-31", "18.20"), ("2032-12-31", "21.40"))


def test_ig_example_12_lines_by_hand(tmp_path):
    run = api.expense(ifrs_example_12(tmp_path / "l", values=VALUES), through="2032-12-31", period="year")
    j = LT.liability_journal(run)
    assert list(j.columns) == ["period_end", "account", "group", "debit", "credit", "description"]
    y1 = j[j["period_end"].astype(str) == "2029-12-31"]
    assert y1.loc[y1["account"] == LT.EXPENSE_ACCOUNT, "debit"].sum() == 194_400.00
    assert y1.loc[y1["account"] == LT.LIABILITY_ACCOUNT, "credit"].sum() == 194_400.00
    y4 = j[j["period_end"].astype(str) == "2032-12-31"]
    assert y4.loc[y4["account"] == LT.CASH_ACCOUNT, "credit"].sum() == 225_000.00
    assert j["debit"].sum() == j["credit"].sum()


def test_liability_journal_is_the_close_journal_of_the_cash_awards(tmp_path):
    led = mixed_ledger(tmp_path / "l")
    res = C.close(led, register=tmp_path / "r.gvreg", through="2032-12-31", period="year")
    lines = res.plan.journal
    cash_lines = lines[lines["description"].str.contains("cash-settled", regex=False)]
    from grantval.reporting.journal import journal_csv_frame

    want = journal_csv_frame(cash_lines).reset_index(drop=True)
    got = LT.liability_journal(res.plan.run).reset_index(drop=True)
    pd.testing.assert_frame_equal(got, want)


def test_accounts_table_renames_the_lines(tmp_path):
    accounts = [{"award_type": "*", "entry": "liability", "account": "Phantom plan liability"}]
    run = api.expense(mixed_ledger(tmp_path / "l", accounts=accounts), through="2030-12-31", period="year")
    assert "Phantom plan liability" in set(LT.liability_journal(run)["account"])
