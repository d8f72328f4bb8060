"""Roll-overs of purchase-plan offerings: the new offering's enrollments replace the old ones.

Rule: a roll-over is a modification of the old purchase rights (ASC 718-20-35-3 and 35-8; IFRS 2.27,
2.28(c)): the old rights' grant-date cost continues, and the new enrollment adds only the increment,
its fair value less the old rights' value immediately before (ignored when negative: IFRS 2 B44(a)).
Values: the component formulas of docs/purchase-plans.md priced with QuantLib ``blackFormula``
(the old rights on the roll-over date: d S e^{-qt} + (1 - d) c(S, K), fixed shares).  Ledgers are
invented.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from grantval import api
from grantval.errors import LedgerError
from grantval.ledger import load_ledger
from tests.attribution import test_espp as ES
from tests.attribution.test_espp_resets import POLICY, YEAR, black
from tests.factory import write_ledger

NEW = {"offering_id": "O27B", "start_date": "2027-07-01", "purchase_dates": "2028-01-01;2028-07-01",
       "share_price": "15", "volatility": "0.35", "risk_free_rate": "0.045", "dividend_yield": "0.02",
       "rolls_over_from": "O27"}


def _ledger(folder, events=None, new=None, enrol_new=True, old=None):
    offers = [ES.offering(purchase_dates="2027-07-01;2028-01-01", rolls_over_from="", **(old or {})),
              ES.offering(**{**NEW, **(new or {})})]
    enrolls = [ES.enrol(withholding="3400")] + ([ES.enrol(withholding="2550", offering_id="O27B")] if enrol_new else [])
    return ES.ledger(folder, offers, enrolls, events, policy=POLICY)


def _run(folder, **kw):
    return api.expense(_ledger(folder, **kw), through="2028-09-30", period="quarter")


def _old_value(days):
    # the old right (reference 20) on the roll-over date, share price 15, per share counted (fixed shares)
    t = days / YEAR
    return 0.15 * 15 * math.exp(-0.02 * t) + 0.85 * black("call", 15, 20, days, 0.045, 0.35, 0.02)


def _new_value(days):
    return ES.ql_espp(15, days, 0.045, 0.35, 0.02, 0.15, "fixed_shares")


def test_the_new_enrollment_carries_only_the_increment(tmp_path):
    # old: 3,400 over two periods at 0.85 x 20 = 17: 100 shares each (2027-07-01, 2028-01-01); new: 2,550
    # over two periods at 0.85 x 15 = 12.75: 100 shares each (2028-01-01 in 184 days, 2028-07-01 in 366)
    run = _run(tmp_path / "l")
    total_new = 100 * (_new_value(184) + _new_value(366))
    before = 100 * _old_value(184)  # the old period not yet reached
    table = run.inputs.modifications.replacements
    assert table.values.value_before == pytest.approx([before], rel=1e-10)
    assert table.replacement_value == pytest.approx([total_new], rel=1e-10)
    assert ES.total_cents(run, "O27B/H1") == pytest.approx(round((total_new - before) * 100), abs=1)


def test_the_old_rights_cost_continues_on_their_own_dates(tmp_path):
    # the same schedule as without the roll-over: nothing is accelerated on the roll-over date
    run = _run(tmp_path / "l")
    plain = api.expense(ES.ledger(tmp_path / "p", [ES.offering(purchase_dates="2027-07-01;2028-01-01")],
                                  [ES.enrol(withholding="3400")], policy=POLICY), through="2028-09-30", period="quarter")
    i, j = list(run.inputs.grant_id).index("O27/H1"), list(plain.inputs.grant_id).index("O27/H1")
    assert run.schedule.expense_cents[i].tolist() == plain.schedule.expense_cents[j].tolist()
    v = [ES.ql_espp(20, n, 0.05, 0.3, 0.01, 0.15, "fixed_shares") for n in (181, 365)]
    assert ES.total_cents(run, "O27/H1") == pytest.approx(round(100 * sum(v) * 100), abs=1)


def test_a_leaver_after_the_roll_over_forfeits_both(tmp_path):
    # a termination on 2027-10-15, before the old period's date (2028-01-01) and the new ones: both the
    # new enrollment's cost and the old period's are reversed (ASC 718-20-55-107; IFRS 2.19-20, from memory)
    run = _run(tmp_path / "l", events=[ES.event("O27B/H1", "2027-10-15", "forfeit")])
    v1 = ES.ql_espp(20, 181, 0.05, 0.3, 0.01, 0.15, "fixed_shares")
    assert ES.total_cents(run, "O27/H1") == pytest.approx(round(100 * v1 * 100), abs=1)
    assert ES.total_cents(run, "O27B/H1") == 0


def test_a_holder_who_withdrew_before_the_roll_over_enrolls_afresh(tmp_path):
    # withdrawn on 2027-05-01 (a cancellation of the old rights): the new enrollment is a new grant
    run = _run(tmp_path / "l", events=[ES.event("O27/H1", "2027-05-01", "withdraw")])
    assert run.inputs.modifications is None
    assert ES.total_cents(run, "O27B/H1") == pytest.approx(round(100 * (_new_value(184) + _new_value(366)) * 100),
                                                           abs=1)


def test_a_holder_left_in_the_old_offering_is_named(tmp_path):
    folder = _ledger(tmp_path / "l", enrol_new=False)
    with pytest.raises(LedgerError) as e:
        load_ledger(folder)
    p = [x for x in e.value.problems if x.source == "espp_enrollments.csv"]
    assert p and p[0].row == 2 and p[0].column == "holder_id"
    assert "rolls over into offering 'O27B' on 2027-07-01" in p[0].message


@pytest.mark.parametrize("new,old,words", [
    ({"rolls_over_from": "O99"}, None, "'O99' is not an offering"),
    ({"rolls_over_from": "O27B"}, None, "cannot roll over from itself"),
    ({"start_date": "2028-01-01", "purchase_dates": "2028-07-01"}, None, "before its last purchase date 2028-01-01"),
    ({}, {"max_shares": "500", "shares_basis": "fixed_withholding"}, "not supported yet"),
])
def test_bad_roll_overs_are_named_with_file_row_and_column(tmp_path, new, old, words):
    folder = _ledger(tmp_path / "l", new=new, old=old)
    with pytest.raises(LedgerError) as e:
        load_ledger(folder)
    p = [x for x in e.value.problems if x.column == "rolls_over_from"]
    assert p and p[0].source == "espp_offerings.csv" and p[0].row == 3 and words in p[0].message


def test_an_offering_rolls_over_once(tmp_path):
    folder = _ledger(tmp_path / "l")
    write_ledger(folder, {"espp_offerings": [ES.offering(purchase_dates="2027-07-01;2028-01-01", rolls_over_from=""),
                                             ES.offering(**NEW),
                                             ES.offering(**{**NEW, "offering_id": "O27C"})]})
    with pytest.raises(LedgerError) as e:
        load_ledger(folder)
    p = [x for x in e.value.problems if x.column == "rolls_over_from"]
    assert p and p[0].row == 4 and "already rolls over into offering 'O27B'" in p[0].message


def test_the_purchase_plan_table_shows_the_old_period_rolled_over(tmp_path):
    from grantval.reporting.espp_tables import espp_table

    run = _run(tmp_path / "l")
    table = espp_table(run.ledger, run.fair_values, np.datetime64("2028-09-30"))
    old = table[table["grant_id"] == "O27/H1"]
    assert old["status"].tolist() == ["purchase date reached", "rolled over into O27B/H1"]


def test_a_withdrawal_from_the_new_offering_cancels_the_old_periods_too(tmp_path):
    # a withdrawal (a cancellation, ASC 718-20-35-9) from the new enrollment on 2027-08-15: the old period
    # still ahead (2028-01-01) is cancelled with it, so its remaining cost is recognised in that quarter
    run = _run(tmp_path / "l", events=[ES.event("O27B/H1", "2027-08-15", "withdraw")])
    v = [ES.ql_espp(20, n, 0.05, 0.3, 0.01, 0.15, "fixed_shares") for n in (181, 365)]
    i = list(run.inputs.grant_id).index("O27/H1")
    cents = run.schedule.expense_cents[i]
    assert abs(cents[:3].sum() - round(100 * sum(v) * 100)) <= 1 and cents[3:].sum() == 0


def test_a_capped_fixed_shares_offering_rolls_over_per_share_counted(tmp_path):
    # max_shares 60 on the old offering: 60 shares counted per period, at the uncapped value per share
    run = _run(tmp_path / "l", old={"max_shares": "60"})
    assert run.inputs.modifications.replacements.values.value_before == pytest.approx([60 * _old_value(184)],
                                                                                      rel=1e-10)


def test_the_activity_roll_forward_shows_the_roll_over_and_ties(tmp_path):
    # the old period not yet reached (100 shares) leaves the roll-forward as rolled over, not as forfeited
    from grantval.reporting.espp_tables import purchase_plan_activity

    run = _run(tmp_path / "l")
    frame, (a, b) = purchase_plan_activity(run.ledger, run.fair_values, "2027-01-01", "2028-09-30")
    lines = dict(zip(frame["line"], frame["number"]))
    assert lines["Rolled over into a new offering"] == 100 and lines["Forfeited or cancelled"] == 0
    assert lines["Granted (enrolled)"] == 400 and lines["Purchase date reached"] == 300 and a == b == 0
