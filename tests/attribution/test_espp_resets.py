"""Purchase-plan resets to a lower price: a modification of the purchase rights not yet reached.

Rule: ASC 718-20-35-3 and IFRS 2.27, B43(a): the incremental value (modified right less original
right, both on the reset date) is added to the grant-date cost, which continues.  Values: the
increment derived in docs/purchase-plans.md priced with QuantLib ``blackFormula``.  Withdrawal as
a cancellation: Deloitte's Roadmap section 8.5 (ASC 718-20-35-9), as in test_espp.py.  Ledgers are
invented.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
import QuantLib as ql

from grantval import api
from grantval.errors import LedgerError
from grantval.ledger import load_ledger
from tests.attribution import test_espp as ES
from tests.factory import write_ledger

YEAR = 365.25
POLICY = {"attribution": "graded", "valuation_unit": "tranche"}


def reset(date="2027-07-01", price="15", offering_id="O27", vol="0.35", rate="0.045", q="0.02"):
    return {"offering_id": offering_id, "reset_date": date, "share_price": price, "volatility": vol,
            "risk_free_rate": rate, "dividend_yield": q}


def black(kind, s, k, days, r, vol, q):
    """QuantLib blackFormula on the forward, discounted (grantval's year of 365.25 days)."""
    t = days / YEAR
    kind = ql.Option.Call if kind == "call" else ql.Option.Put
    return ql.blackFormula(kind, k, s * math.exp((r - q) * t), vol * math.sqrt(t), math.exp(-r * t))


def fixed_shares_increment(s, k, days, r, vol, q, d):
    owed = lambda x: x * math.exp(-r * days / YEAR) - black("put", s, x, days, r, vol, q)  # noqa: E731
    return (1 - d) * (owed(k) - owed(s))


def fixed_withholding_increment(s, k, s0, days, r, vol, q):
    return s0 * (black("call", s, s, days, r, vol, q) / s - black("call", s, k, days, r, vol, q) / k)


def _run(folder, resets, events=None, basis="fixed_shares", dates="2027-07-01;2028-01-01", withholding="3400",
         through="2028-03-31", **kw):
    ES.ledger(folder, [ES.offering(purchase_dates=dates, shares_basis=basis, **kw)],
              [ES.enrol(withholding=withholding)], events, policy=POLICY)
    if resets:
        write_ledger(folder, {"espp_resets": resets})
    return api.expense(folder, through=through, period="quarter")


def test_reset_adds_the_increment_of_the_period_not_yet_reached(tmp_path):
    # 3,400 withheld over two periods at 0.85 x 20: 100 shares each; reset on the first purchase date to 15:
    # the second right (184 days left) takes 100 x the increment, from the reset to its purchase date
    base = _run(tmp_path / "a", None)
    run = _run(tmp_path / "b", [reset()])
    inc = fixed_shares_increment(15, 20, 184, 0.045, 0.35, 0.02, 0.15)
    cents, before = run.schedule.expense_cents[1], base.schedule.expense_cents[1]
    assert np.array_equal(cents[:2], before[:2])  # nothing changes through the reset date's quarter
    assert abs((cents.sum() - before.sum()) - 100 * inc * 100) <= 1
    # served from 2027-07-01: 92 of 184 days by 2027-09-30, the rest by the purchase date
    assert abs((cents[2] - before[2]) - 100 * inc * 92 / 184 * 100) <= 1
    assert cents[4] == 0
    assert run.inputs.espp_resets.incremental == pytest.approx([100 * inc], rel=1e-10)


def test_two_resets_under_fixed_withholding_chain_their_reference_prices(tmp_path):
    # three purchases; reset to 15 on 2027-07-01 (periods 2 and 3), then to 12 on 2028-01-01 (period 3,
    # from 15); per share counted at 0.85 x 20: S_0 [c(S)/S - c(K)/K], docs/purchase-plans.md
    dates = "2027-07-01;2028-01-01;2028-07-01"
    base = _run(tmp_path / "a", None, basis="fixed_withholding", dates=dates, withholding="5100", through="2028-09-30")
    run = _run(tmp_path / "b", [reset(), reset("2028-01-01", "12", vol="0.4", rate="0.04", q="0.02")],
               basis="fixed_withholding", dates=dates, withholding="5100", through="2028-09-30")
    first = [fixed_withholding_increment(15, 20, 20, n, 0.045, 0.35, 0.02) for n in (184, 366)]
    second = fixed_withholding_increment(12, 15, 20, 182, 0.04, 0.4, 0.02)
    got = run.inputs.espp_resets
    assert got.layers.fair_value == pytest.approx([*first, second], rel=1e-10)
    assert got.incremental == pytest.approx([100 * sum(first), 100 * second], rel=1e-10)
    extra = run.schedule.expense_cents[1].sum() - base.schedule.expense_cents[1].sum()
    assert abs(extra - 100 * (sum(first) + second) * 100) <= 1


def test_a_withdrawal_before_the_reset_takes_nothing_and_after_it_accelerates_the_increment(tmp_path):
    base = _run(tmp_path / "a", None, [ES.event("O27/H1", "2027-05-15", "withdraw")])
    early = _run(tmp_path / "b", [reset()], [ES.event("O27/H1", "2027-05-15", "withdraw")])
    assert np.array_equal(early.schedule.expense_cents, base.schedule.expense_cents)
    assert early.inputs.espp_resets is None  # no right was outstanding on the reset date
    late = _run(tmp_path / "c", [reset()], [ES.event("O27/H1", "2027-09-30", "withdraw")])
    v = [ES.ql_espp(20, n, 0.05, 0.3, 0.01, 0.15, "fixed_shares") for n in (181, 365)]
    inc = fixed_shares_increment(15, 20, 184, 0.045, 0.35, 0.02, 0.15)
    cents = late.schedule.expense_cents[1]
    # a cancellation: the grant-date cost and the increment are all recognised by the withdrawal's quarter
    assert abs(cents[:3].sum() - 100 * (v[0] + v[1] + inc) * 100) <= 1 and cents[3] == 0


def test_the_bridge_shows_the_reset_on_its_modifications_line(tmp_path):
    # purchases on 2027-07-01 and 2028-07-01; reset on 2028-01-01 to 15, served in 2028 in full: the 2028
    # bridge of the offering (granted in 2027) carries it on the modifications line, and the lines still tie
    from grantval.reporting.bridge import MODIFICATIONS
    from tests.reporting.test_bridge import _bridge_of, _lines

    folder = tmp_path / "l"
    _run(folder, [reset("2028-01-01")], dates="2027-07-01;2028-07-01", through="2028-12-31")
    br, s = _bridge_of(folder, "2028-12-31", "2028-01-01")
    inc = fixed_shares_increment(15, 20, 182, 0.045, 0.35, 0.02, 0.15)
    lines = _lines(br, 0)
    assert abs(lines[MODIFICATIONS] - 100 * inc * 100) <= 1
    assert sum(lines.values()) == int(s.expense_cents[:, 0].sum())


def test_a_capped_fixed_shares_offering_resets_per_share_counted(tmp_path):
    # fixed shares with max_shares 60: 60 of the 100 shares a period's withholding buys are counted, at
    # the same value per share (the cap fixes the count whatever the price); the reset adds 60 x the
    # uncapped increment
    run = _run(tmp_path / "l", [reset()], max_shares="60")
    inc = fixed_shares_increment(15, 20, 184, 0.045, 0.35, 0.02, 0.15)
    assert run.inputs.espp_resets.incremental == pytest.approx([60 * inc], rel=1e-10)


@pytest.mark.parametrize("row, offering, column, words", [
    (reset(offering_id="NOPE"), {}, "offering_id", "not an offering"),
    (reset(), {"lookback": "no", "volatility": ""}, "offering_id", "no look-back"),
    (reset(), {"max_shares": "50", "shares_basis": "fixed_withholding"}, "offering_id", "not supported yet"),
    (reset("2027-01-01"), {}, "reset_date", "after the offering's start"),
    (reset("2028-01-01"), {}, "reset_date", "before its last purchase date"),
    (reset(price="20"), {}, "share_price", "lowers the reference price"),
    (reset(price="25"), {}, "share_price", "below 20"),
    (reset(vol="-0.1"), {}, "volatility", "from 0"),
    (reset(rate="0.9"), {}, "risk_free_rate", "must be from"),
])
def test_bad_resets_are_named_with_file_row_and_column(tmp_path, row, offering, column, words):
    folder = ES.ledger(tmp_path / "l", [ES.offering(purchase_dates="2027-07-01;2028-01-01", **offering)],
                       [ES.enrol(withholding="3400")])
    write_ledger(folder, {"espp_resets": [row]})
    with pytest.raises(LedgerError) as e:
        load_ledger(folder)
    p = [p for p in e.value.problems if p.source == "espp_resets.csv"]
    assert p and (p[0].row, p[0].column) == (2, column) and words in p[0].message, p


def test_a_second_reset_must_go_below_the_first_and_not_share_its_date(tmp_path):
    folder = ES.ledger(tmp_path / "l", [ES.offering(purchase_dates="2027-07-01;2028-01-01;2028-07-01")],
                       [ES.enrol(withholding="5100")])
    write_ledger(folder, {"espp_resets": [reset(), reset("2028-01-01", "16"), reset("2027-07-01", "14")]})
    with pytest.raises(LedgerError) as e:
        load_ledger(folder)
    p = {(p.row, p.column): p.message for p in e.value.problems if p.source == "espp_resets.csv"}
    assert "below 15 (the reset on 2027-07-01)" in p[3, "share_price"]
    assert "already resets on 2027-07-01 (row 2)" in p[4, "reset_date"]


def test_straight_line_attribution_recognises_the_same_total(tmp_path):
    _run(tmp_path / "a", None)
    folder = tmp_path / "b"
    _run(folder, [reset()])
    write_ledger(folder, {"policy": [{"key": "attribution", "value": "straight-line"},
                                     {"key": "valuation_unit", "value": "tranche"}]})
    run = api.expense(folder, through="2028-03-31", period="quarter")
    plain = api.expense(write_ledger(tmp_path / "a", {"policy": [{"key": "attribution", "value": "straight-line"},
                                                                 {"key": "valuation_unit", "value": "tranche"}]}),
                        through="2028-03-31", period="quarter")
    inc = fixed_shares_increment(15, 20, 184, 0.045, 0.35, 0.02, 0.15)
    assert abs(run.schedule.expense_cents[1].sum() - plain.schedule.expense_cents[1].sum() - 100 * inc * 100) <= 1


def test_the_resets_sheet_ties_to_the_layers_and_its_total_recalculates(tmp_path):
    import openpyxl

    from grantval.io.xlsx.write import write_workbook
    from grantval.reporting.espp_tables import reset_sheet, reset_table
    from tests.io.test_recalculation import SOFFICE, recalculate

    run = _run(tmp_path / "l", [reset(), reset("2028-01-01", "12")], basis="fixed_withholding",
               dates="2027-07-01;2028-01-01;2028-07-01", withholding="5100", through="2028-09-30")
    table = reset_table(run.inputs)
    assert list(table["purchase_date"].astype(str)) == ["2028-01-01", "2028-07-01", "2028-07-01"]
    assert list(table["reference_price_before"]) == [20, 20, 15]
    rc = run.inputs.espp_resets
    assert table["incremental_cost"].sum() == pytest.approx(rc.incremental.sum(), rel=1e-12)
    book = tmp_path / "r.xlsx"
    write_workbook(book, [reset_sheet(table)])
    ws = openpyxl.load_workbook(book)["purchase_plan_resets"]
    assert (ws["A5"].value, ws["K5"].value, ws["L5"].value) == ("Total", "=SUM(K2:K4)", "=SUM(L2:L4)")
    if SOFFICE is None:
        pytest.skip("LibreOffice is not installed")  # .ci/run installs it
    (tmp_path / "lo").mkdir()
    got = openpyxl.load_workbook(recalculate(book, tmp_path / "lo"), data_only=True)["purchase_plan_resets"]
    assert got["K5"].value == 300 and got["L5"].value == pytest.approx(table["incremental_cost"].sum(), abs=1e-9)


def test_the_disclosure_lists_resets_as_modifications_and_its_check_can_fail(tmp_path):
    # ASC 718-10-50-2(h)(2) (incremental cost of modifications; paragraph letter from memory)
    from grantval.reporting.disclosure_features import FeatureSections, modification_section

    run = _run(tmp_path / "l", [reset(), reset("2028-01-01", "12")], basis="fixed_withholding",
               dates="2027-07-01;2028-01-01;2028-07-01", withholding="5100", through="2028-09-30")
    out = FeatureSections()
    modification_section(run.inputs, run.ledger, "2027-01-01", "2027-12-31", out)
    table = out.tables["modification_disclosure.csv"]
    assert list(table["change"]) == ["purchase-plan reset to a lower price"]  # the 2028 reset is outside
    assert table["units_affected"].tolist() == [200] and table["grants"].tolist() == [1]
    assert table["incremental_cost"].iloc[0] == pytest.approx(run.inputs.espp_resets.incremental[0], rel=1e-12)
    assert out.checks[0].tool_pass
    run.inputs.espp_resets.incremental[0] += 0.02  # the per-reset total no longer matches the layers
    bad = FeatureSections()
    modification_section(run.inputs, run.ledger, "2027-01-01", "2027-12-31", bad)
    assert not bad.checks[0].tool_pass
