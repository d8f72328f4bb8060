"""Employee share purchase plans: offerings, enrollments, their cost and their events, end to end.

Outside references: QuantLib ``blackFormula`` (Black-Scholes-Merton call and put on the forward)
for the look-back's option components (ASC 718-50-55 decomposition, derived in
docs/purchase-plans.md); numerical integration of the plans' payoffs (scipy ``quad`` against the
lognormal law) for the ``max_shares`` cap; the cancellation rule of a withdrawal from Deloitte's
Roadmap section 8.5 (ASC 718-20-35-9) and IFRS 2.28A / 28(a).  Ledgers are invented.
"""

from __future__ import annotations

import datetime as dt
import math
import pathlib
import shutil
import types

import numpy as np
import pytest
import QuantLib as ql
from scipy import integrate, stats

from grantval import api
from grantval.errors import LedgerError
from grantval.reporting.espp_tables import espp_sheet, espp_table
from tests.attribution.reference import schedule_cents
from tests.factory import write_ledger

YEAR = 365.25  # grantval's year fraction: actual days / 365.25

GRANT = {"grant_id": "G1", "holder_id": "H1", "group": "eng", "award_type": "option", "grant_date": "2027-01-01",
         "quantity": "1000", "exercise_price": "10", "expiration_date": "2037-01-01", "vest_start_date": "",
         "vest_months": "48", "vest_every_months": "12", "cliff_months": "0", "assumption_set": ""}
ASSUMPTION = {"assumption_set": "", "grant_date": "2027-01-01", "share_price": "10", "volatility": "0.4",
              "risk_free_rate": "0.04", "dividend_yield": "0"}


def offering(**kw):
    row = {"offering_id": "O27", "start_date": "2027-01-01", "purchase_dates": "2027-07-01", "discount": "0.15",
           "lookback": "yes", "shares_basis": "fixed_shares", "share_price": "20", "volatility": "0.3",
           "risk_free_rate": "0.05", "dividend_yield": "0.01", "max_shares": ""}
    row.update(kw)
    return row


def ledger(folder, offerings, enrollments, events=None, policy=None):
    data = {"grants": [GRANT], "assumptions": [ASSUMPTION], "espp_offerings": offerings,
            "espp_enrollments": enrollments}
    if events:
        data["events"] = events
    if policy:
        data["policy"] = [{"key": k, "value": v} for k, v in policy.items()]
    return write_ledger(folder, data)


def enrol(holder="H1", withholding="1700", offering_id="O27", group="eng"):
    return {"offering_id": offering_id, "holder_id": holder, "group": group, "withholding": withholding}


def event(gid, date, kind, qty="", price=""):
    return {"grant_id": gid, "event_date": date, "event_type": kind, "quantity": qty, "share_price": price}


def ql_components(s, days, r, sigma, q):
    """QuantLib blackFormula call and put struck at ``s`` (at the money) over ``days`` (grantval's year)."""
    t = days / YEAR
    fwd, sd, df = s * math.exp((r - q) * t), sigma * math.sqrt(t), math.exp(-r * t)
    call = ql.blackFormula(ql.Option.Call, s, fwd, sd, df)
    put = ql.blackFormula(ql.Option.Put, s, fwd, sd, df)
    return call, put, t


def ql_espp(s, days, r, sigma, q, d, basis):
    """ASC 718-50-55 components priced with QuantLib: d S e^{-qT} + (1-d) c (+ d p for fixed withholding)."""
    call, put, t = ql_components(s, days, r, sigma, q)
    value = d * s * math.exp(-q * t) + (1 - d) * call
    return value + d * put if basis == "fixed_withholding" else value


def total_cents(run, gid):
    i = list(run.inputs.grant_id).index(gid)
    return int(run.schedule.expense_cents[i].sum())


@pytest.mark.parametrize("basis", ["fixed_shares", "fixed_withholding"])
def test_one_purchase_offering_cost_is_shares_times_quantlib_value(tmp_path, basis):
    # 1,700 withheld at 0.85 x 20 = 17 buys 100 shares; one purchase 181 days after the start
    folder = ledger(tmp_path / "l", [offering(shares_basis=basis)], [enrol()])
    run = api.expense(folder, through="2027-12-31", period="quarter")
    expected = 100 * ql_espp(20, 181, 0.05, 0.3, 0.01, 0.15, basis)  # QuantLib blackFormula components
    assert abs(total_cents(run, "O27/H1") - expected * 100) <= 0.5
    assert run.fair_values.grant_value[1] == pytest.approx(expected / 100, rel=1e-10)


def test_two_purchase_offering_is_two_options_each_recognised_to_its_purchase_date(tmp_path):
    # ASC 718-50-55 (several purchase periods, each an option from the start to its purchase date; from
    # memory) with graded attribution (Deloitte Roadmap 8.4: multiple purchase periods are graded vesting,
    # attributed by the entity's ASC 718-10-35-8 policy); 3,400 withheld over two periods: 100 shares each
    folder = ledger(tmp_path / "l", [offering(purchase_dates="2027-07-01;2028-01-01")], [enrol(withholding="3400")],
                    policy={"attribution": "graded", "valuation_unit": "tranche"})
    run = api.expense(folder, through="2028-03-31", period="quarter")
    v1 = ql_espp(20, 181, 0.05, 0.3, 0.01, 0.15, "fixed_shares")
    v2 = ql_espp(20, 365, 0.05, 0.3, 0.01, 0.15, "fixed_shares")
    tv = run.fair_values.tranche_value[run.inputs.t_grant == 1]
    assert tv == pytest.approx([v1, v2], rel=1e-10)
    cum = np.cumsum(run.schedule.expense_cents[1])
    # through 2027-03-31 (90 days served): tranche 1 90/181 of 100 v1, tranche 2 90/365 of 100 v2
    for k, served in enumerate((90, 181, 273, 365, 365)):
        want = 100 * v1 * min(served / 181, 1) + 100 * v2 * min(served / 365, 1)
        assert abs(cum[k] - round(want * 100)) <= 1


@pytest.mark.parametrize("attribution", ["graded", "straight-line"])
def test_each_purchase_period_keeps_its_own_value_under_the_award_unit(tmp_path, attribution):
    # valuation_unit = award averages an award's tranches; a purchase period is its own option (ASC 718-50-55,
    # several purchase periods; from memory), so the ESPP kind is valued per period whatever the policy:
    # the two QuantLib blackFormula component values, as under the tranche unit above
    folder = ledger(tmp_path / "l", [offering(purchase_dates="2027-07-01;2028-01-01")], [enrol(withholding="3400")],
                    policy={"attribution": attribution, "valuation_unit": "award"})
    run = api.expense(folder, through="2028-03-31", period="quarter")
    v1 = ql_espp(20, 181, 0.05, 0.3, 0.01, 0.15, "fixed_shares")
    v2 = ql_espp(20, 365, 0.05, 0.3, 0.01, 0.15, "fixed_shares")
    assert run.fair_values.tranche_value[run.inputs.t_grant == 1] == pytest.approx([v1, v2], rel=1e-10)
    # the award-level figure reported per grant is still the quantity-weighted mean (100 shares each)
    assert run.fair_values.grant_value[1] == pytest.approx((v1 + v2) / 2, rel=1e-10)
    # the option grant G1 beside it is still valued as one award (its four tranches share one value)
    assert len(set(run.fair_values.tranche_value[run.inputs.t_grant == 0])) == 1
    cum = np.cumsum(run.schedule.expense_cents[1])
    for k, served in enumerate((90, 181, 273, 365, 365)):
        if attribution == "graded":
            want = 100 * v1 * min(served / 181, 1) + 100 * v2 * min(served / 365, 1)
        else:  # straight-line to the last purchase date, at least the periods reached (ASC 718-10-35-8)
            want = max((100 * v1 + 100 * v2) * min(served / 365, 1), 100 * v1 * (served >= 181))
        assert abs(cum[k] - round(want * 100)) <= 1


def test_plan_without_a_look_back_costs_only_the_discount(tmp_path):
    # no option feature: the purchase price is (1 - d) S_T; per share d S_0 e^{-qT} (fixed shares) and
    # d S_0 e^{-rT} (fixed withholding: a known gain of d/(1-d) of the withholdings), docs/purchase-plans.md;
    # volatility is not needed
    offs = [offering(lookback="no", volatility=""),
            offering(offering_id="O27B", lookback="no", volatility="", shares_basis="fixed_withholding")]
    folder = ledger(tmp_path / "l", offs, [enrol(), enrol(offering_id="O27B")])
    run = api.expense(folder, through="2027-12-31", period="year")
    t = 181 / YEAR
    assert abs(total_cents(run, "O27/H1") - 100 * 0.15 * 20 * math.exp(-0.01 * t) * 100) <= 0.5
    assert abs(total_cents(run, "O27B/H1") - 100 * 0.15 * 20 * math.exp(-0.05 * t) * 100) <= 0.5


@pytest.mark.parametrize("standard", ["asc718", "ifrs2"])
def test_withdrawal_is_a_cancellation_remaining_cost_recognised_at_once(tmp_path, standard):
    # Deloitte Roadmap 8.5 / ASC 718-20-35-9: a complete withdrawal is a cancellation, unrecognised cost
    # recognised immediately; IFRS 2.28A with 28(a): stopping contributions is a cancellation (accelerated)
    offs, enr = [offering(purchase_dates="2027-07-01;2028-01-01")], [enrol(withholding="3400")]
    pol = {"valuation_unit": "tranche"}
    folder = ledger(tmp_path / "l", offs, enr, [event("O27/H1", "2027-09-30", "withdraw")], policy=pol)
    run = api.expense(folder, through="2028-03-31", period="quarter", standard=standard)
    stay = api.expense(ledger(tmp_path / "s", offs, enr, policy=pol), through="2028-03-31", period="quarter",
                       standard=standard)
    v1 = ql_espp(20, 181, 0.05, 0.3, 0.01, 0.15, "fixed_shares")
    v2 = ql_espp(20, 365, 0.05, 0.3, 0.01, 0.15, "fixed_shares")
    cents, base = run.schedule.expense_cents[1], stay.schedule.expense_cents[1]
    assert np.array_equal(cents[:2], base[:2])  # nothing changes before the withdrawal
    assert abs(cents[:3].sum() - (100 * v1 + 100 * v2) * 100) <= 1  # all of it by the withdrawal quarter
    assert cents[3] == 0 and cents[4] == 0 and base[3] > 0  # without it, cost would still be running


def test_termination_is_a_forfeiture_cost_of_the_open_period_reversed(tmp_path):
    # ASC 718-50-35-2: no cost for awards forfeited by failing the service requirement (termination);
    # the core forfeit event applies to the enrollment's grant id
    folder = ledger(tmp_path / "l", [offering(purchase_dates="2027-07-01;2028-01-01")], [enrol(withholding="3400")],
                    [event("O27/H1", "2027-09-30", "forfeit")], policy={"valuation_unit": "tranche"})
    run = api.expense(folder, through="2028-03-31", period="quarter")
    v1 = ql_espp(20, 181, 0.05, 0.3, 0.01, 0.15, "fixed_shares")
    assert abs(run.schedule.expense_cents[1].sum() - 100 * v1 * 100) <= 1


def test_purchase_is_recorded_without_changing_cost_and_shown_in_the_table(tmp_path):
    offs = [offering(purchase_dates="2027-07-01;2028-01-01")]
    plain = api.expense(ledger(tmp_path / "a", offs, [enrol(withholding="3400")]), through="2028-03-31")
    bought = api.expense(ledger(tmp_path / "b", offs, [enrol(withholding="3400")],
                                [event("O27/H1", "2027-07-01", "purchase", "112", "15.3")]), through="2028-03-31")
    assert np.array_equal(plain.schedule.expense_cents, bought.schedule.expense_cents)
    table = espp_table(bought.ledger, bought.fair_values, "2028-03-31")
    assert list(table["shares_bought"].fillna(-1)) == [112, -1]
    assert list(table["purchase_price"].fillna(-1)) == [15.3, -1]
    assert list(table["status"]) == ["purchase date reached", "purchase date reached"]


def test_shares_are_rounded_down_and_the_dropped_fraction_is_reported(tmp_path):
    # 1,000 / 17 = 58.8235... shares: 58 are counted (common practice: whole shares are bought)
    run = api.expense(ledger(tmp_path / "l", [offering()], [enrol(withholding="1000")]), through="2027-12-31")
    table = espp_table(run.ledger, run.fair_values, "2027-12-31")
    assert table["shares"].tolist() == [58]
    assert table["shares_dropped_by_rounding"].iloc[0] == pytest.approx(1000 / 17 - 58, abs=1e-12)
    expected = 58 * ql_espp(20, 181, 0.05, 0.3, 0.01, 0.15, "fixed_shares")
    assert abs(total_cents(run, "O27/H1") - expected * 100) <= 0.5


def test_withdrawal_status_and_sheet(tmp_path):
    folder = ledger(tmp_path / "l", [offering(purchase_dates="2027-07-01;2028-01-01")], [enrol(withholding="3400")],
                    [event("O27/H1", "2027-09-30", "withdraw")])
    run = api.expense(folder, through="2028-03-31")
    table = espp_table(run.ledger, run.fair_values, "2028-03-31")
    assert table["status"].tolist() == ["purchase date reached", "withdrawn"]
    sheet = espp_sheet(table)
    assert sheet.name == "purchase_plans" and len(sheet.frame) == 3  # two periods and the Total row
    total = sheet.frame.iloc[-1]
    # live totals of the columns that tie elsewhere: shares (L), grant-date fair value (O), shares bought (Q)
    assert total["offering_id"] == "Total"
    assert (total["shares"], total["grant_date_fair_value"], total["shares_bought"]) == (
        "=SUM(L2:L3)", "=SUM(O2:O3)", "=SUM(Q2:Q3)")
    assert total["status"] is None and total["fair_value_per_share"] is None  # no sum of per-share values


def test_expense_csv_has_a_row_per_enrollment_beside_the_grants(tmp_path):
    folder = ledger(tmp_path / "l", [offering()], [enrol(), enrol(holder="H2", group="ops")])
    run = api.expense(folder, through="2027-12-31", period="quarter")
    out = tmp_path / "out"
    api.write_expense(run, out / "e.xlsx", out / "csv")
    text = (out / "csv" / "expense.csv").read_text()
    ids = {line.split(",")[0] for line in text.splitlines()[1:]}
    assert ids == {"G1", "O27/H1", "O27/H2"}


# --- the max_shares cap, against numerical integration of the payoff (scipy quad) -------------------

def integrated(s, t, r, sigma, q, d, n0, cap, lookback):
    """PV per N_0 of a fixed-withholding right capped at ``cap`` shares, integrating the payoff directly."""
    w = (1 - d) * s * n0

    def gain(st):
        ref = min(s, st) if lookback else st
        shares = min(w / ((1 - d) * ref), cap)
        return shares * (st - (1 - d) * ref) / n0

    mu, sd = math.log(s) + (r - q - sigma ** 2 / 2) * t, sigma * math.sqrt(t)
    f = lambda z: gain(math.exp(mu + sd * z)) * stats.norm.pdf(z)
    val = sum(integrate.quad(f, a, b, limit=200, epsabs=1e-12)[0] for a, b in ((-12, 0), (0, 12)))
    return math.exp(-r * t) * val


@pytest.mark.parametrize("lookback,cap", [("yes", "120"), ("yes", "80"), ("no", "120"), ("no", "90")])
def test_capped_fixed_withholding_matches_integrated_payoff(tmp_path, lookback, cap):
    off = offering(shares_basis="fixed_withholding", lookback=lookback, max_shares=cap, volatility="0.3")
    run = api.expense(ledger(tmp_path / "l", [off], [enrol()]), through="2027-12-31")
    per_n0 = integrated(20, 181 / YEAR, 0.05, 0.3, 0.01, 0.15, 100, float(cap), lookback == "yes")
    counted = min(100, int(cap))
    assert run.fair_values.grant_value[1] * counted == pytest.approx(per_n0 * 100, rel=1e-7)


def test_integration_reference_reproduces_the_uncapped_quantlib_value():
    # the integration helper itself against QuantLib (no cap: a cap far above N_0)
    got = integrated(20, 181 / YEAR, 0.05, 0.3, 0.01, 0.15, 100, 1e9, True)
    assert got == pytest.approx(ql_espp(20, 181, 0.05, 0.3, 0.01, 0.15, "fixed_withholding"), rel=1e-8)


# --- bad input: clear errors naming file, row and column --------------------------------------------

def problems_of(folder):
    with pytest.raises(LedgerError) as err:
        api.expense(folder, through="2027-12-31")
    return [(p.source, p.row, p.column, p.message) for p in err.value.problems if p.severity == "error"]


@pytest.mark.parametrize("cells,column,words", [
    ({"discount": "1"}, "discount", "up to but excluding 1"),
    ({"discount": "-0.1"}, "discount", "up to but excluding 1"),
    ({"purchase_dates": "2027-01-01"}, "purchase_dates", "not after the start date"),
    ({"purchase_dates": "2027-12-31;2027-07-01"}, "purchase_dates", "must increase"),
    ({"purchase_dates": "2027-07-01;2027-07-01"}, "purchase_dates", "must increase"),
    ({"purchase_dates": "2027-07-01;July"}, "purchase_dates", "not an ISO date"),
    ({"volatility": ""}, "volatility", "required for an offering with a look-back"),
    ({"share_price": "0"}, "share_price", "above zero"),
    ({"max_shares": "0"}, "max_shares", "positive whole number"),
])
def test_bad_offering_cells(tmp_path, cells, column, words):
    found = problems_of(ledger(tmp_path / "l", [offering(**cells)], [enrol()]))
    assert [(s, r, c) for s, r, c, m in found if words in m] == [("espp_offerings.csv", 2, column)]


def test_negative_withholding_and_unknown_offering(tmp_path):
    found = problems_of(ledger(tmp_path / "l", [offering()],
                               [enrol(), enrol(holder="H2", withholding="-5"), enrol(holder="H3", offering_id="X")]))
    assert ("espp_enrollments.csv", 3, "withholding") in [(s, r, c) for s, r, c, m in found]
    assert ("espp_enrollments.csv", 4, "offering_id") in [(s, r, c) for s, r, c, m in found]
    assert len(found) == 2


def test_duplicate_enrollment_and_duplicate_offering(tmp_path):
    found = problems_of(ledger(tmp_path / "l", [offering(), offering()], [enrol(), enrol()]))
    cols = [(s, r, c) for s, r, c, m in found]
    assert ("espp_offerings.csv", 3, "offering_id") in cols and ("espp_enrollments.csv", 3, "holder_id") in cols


@pytest.mark.parametrize("events,row,column,words", [
    ([event("G1", "2027-09-30", "withdraw")], 2, "event_type", "ESPP enrollments only"),
    ([event("O27/H1", "2027-07-01", "withdraw")], 2, "event_date", "nothing is left"),
    ([event("O27/H1", "2027-03-01", "withdraw", "5")], 2, "quantity", "leave blank"),
    ([event("O27/H1", "2027-03-01", "withdraw"), event("O27/H1", "2027-04-01", "withdraw")], 3, "event_date",
     "after the withdrawal"),
    ([event("O27/H1", "2027-03-01", "withdraw"), event("O27/H1", "2027-03-01", "withdraw")], 3, "event_type",
     "already withdrawn"),
    ([event("O27/H1", "2027-06-30", "purchase", "100", "17")], 2, "event_date", "not a purchase date"),
    ([event("O27/H1", "2027-07-01", "purchase", "", "17")], 2, "quantity", "required for a purchase"),
    ([event("O27/H1", "2027-07-01", "purchase", "100", "")], 2, "share_price", "required for a purchase"),
    ([event("O27/H1", "2027-07-01", "purchase", "100", "17"), event("O27/H1", "2027-07-01", "purchase", "1", "17")],
     3, "event_date", "already recorded"),
    ([event("O27/H1", "2026-12-01", "withdraw")], 2, "event_date", "before the offering start"),
])
def test_bad_events(tmp_path, events, row, column, words):
    found = problems_of(ledger(tmp_path / "l", [offering()], [enrol()], events))
    assert [(s, r, c) for s, r, c, m in found if words in m] == [("events.csv", row, column)]


def test_espp_award_type_in_the_grants_table_is_refused(tmp_path):
    folder = ledger(tmp_path / "l", [offering()], [enrol()])
    text = (folder / "grants.csv").read_text().replace(",option,", ",espp,")
    (folder / "grants.csv").write_text(text)
    found = problems_of(folder)
    assert [(s, r, c) for s, r, c, m in found if "espp_enrollments" in m] == [("grants.csv", 2, "award_type")]


def test_enrollment_clashing_with_a_grant_id_is_refused(tmp_path):
    folder = ledger(tmp_path / "l", [offering()], [enrol()])
    text = (folder / "grants.csv").read_text().replace("G1,H1", "O27/H1,H1")
    (folder / "grants.csv").write_text(text)
    (folder / "assumptions.csv").write_text((folder / "assumptions.csv").read_text())
    found = problems_of(folder)
    assert ("espp_enrollments.csv", 2, "grant_id") in [(s, r, c) for s, r, c, m in found]


def test_zero_withholding_is_a_warning_and_costs_nothing(tmp_path):
    folder = ledger(tmp_path / "l", [offering()], [enrol(withholding="0")])
    run = api.expense(folder, through="2027-12-31")
    assert list(run.inputs.grant_id) == ["G1"]
    assert any(w.column == "withholding" and "no whole share" in w.message for w in run.ledger.warnings)


def test_events_of_an_enrollment_in_a_bad_offering_are_not_reported_as_unknown_grants(tmp_path):
    found = problems_of(ledger(tmp_path / "l", [offering(discount="1.5")], [enrol()],
                               [event("O27/H1", "2027-03-01", "withdraw"), event("O27/H9", "2027-03-01", "withdraw")]))
    assert [(s, r, c) for s, r, c, m in found] == [("espp_offerings.csv", 2, "discount"), ("events.csv", 3, "grant_id")]


def test_workbook_ledger_gives_the_same_cost_with_a_date_cell_for_a_single_purchase_date(tmp_path):
    from openpyxl import load_workbook

    from grantval.io.convert import csv_folder_to_workbook
    from grantval.ledger.schema import TABLE_NAMES, TEXT_COLUMNS

    folder = ledger(tmp_path / "l", [offering()], [enrol()])
    book = tmp_path / "ledger.xlsx"
    csv_folder_to_workbook(folder, book, TABLE_NAMES, TEXT_COLUMNS)
    wb = load_workbook(book)
    import datetime as dt

    wb["espp_offerings"]["C2"].value = dt.datetime(2027, 7, 1)  # a date cell: the reader gives its ISO text
    wb.save(book)
    a = api.expense(folder, through="2027-12-31")
    b = api.expense(book, through="2027-12-31")
    assert np.array_equal(a.schedule.expense_cents, b.schedule.expense_cents)
    assert total_cents(b, "O27/H1") > 0


def test_partial_forfeiture_then_withdrawal_cancels_only_what_is_left(tmp_path):
    # 30 shares of the last period forfeited (reversed), then a withdrawal cancels the other 170 open
    # shares (accelerated, Deloitte Roadmap 8.5); the first period was purchased
    dates = "2027-07-01;2028-01-01;2028-07-01"
    folder = ledger(tmp_path / "l", [offering(purchase_dates=dates)], [enrol(withholding="5100")],
                    [event("O27/H1", "2027-08-01", "forfeit", "30"), event("O27/H1", "2027-09-30", "withdraw")],
                    policy={"valuation_unit": "tranche"})
    run = api.expense(folder, through="2028-12-31", period="quarter")
    v = [ql_espp(20, n, 0.05, 0.3, 0.01, 0.15, "fixed_shares") for n in (181, 365, 547)]
    assert abs(total_cents(run, "O27/H1") - (100 * v[0] + 100 * v[1] + 70 * v[2]) * 100) <= 1
    ch = run.ledger.changes
    assert sorted(zip(ch["kind"], ch["quantity"])) == [("cancel", 70), ("cancel", 100), ("forfeit", 30)]


def test_core_event_after_a_withdrawal_is_refused(tmp_path):
    found = problems_of(ledger(tmp_path / "l", [offering(purchase_dates="2027-07-01;2028-01-01")], [enrol()],
                               [event("O27/H1", "2027-03-01", "withdraw"), event("O27/H1", "2027-04-01", "forfeit")]))
    assert [(s, r, c) for s, r, c, m in found if "after the withdrawal" in m] == [("events.csv", 3, "event_date")]


def test_purchase_plan_activity_rolls_forward_and_ties(tmp_path):
    from grantval.reporting.espp_tables import purchase_plan_activity

    offs = [offering(purchase_dates="2027-07-01;2028-01-01")]
    folder = ledger(tmp_path / "l", offs, [enrol(withholding="3400"), enrol(holder="H2", withholding="1700")],
                    [event("O27/H2", "2027-09-30", "withdraw"), event("O27/H1", "2027-07-01", "purchase", "100", "17"),
                     event("O27/H1", "2028-01-01", "purchase", "100", "16")])
    run = api.expense(folder, through="2028-12-31")
    year1, tie1 = purchase_plan_activity(run.ledger, run.fair_values, "2027-01-01", "2027-12-31")
    # counted by hand from the ledger above (no roll-over: that line is 0)
    assert year1["number"].tolist()[:7] == [0, 300, 150, 50, 0, 0, 100]
    assert tie1 == (100, 100)
    assert year1["number"].iloc[7] == 100 and year1["number"].iloc[8] == 17
    year2, tie2 = purchase_plan_activity(run.ledger, run.fair_values, "2028-01-01", "2028-12-31")
    assert year2["number"].tolist()[:7] == [100, 0, 100, 0, 0, 0, 0] and tie2 == (0, 0)
    assert year2["number"].iloc[8] == 16
    from grantval.reporting.espp_tables import activity_sheet

    sheet = activity_sheet(year1)
    assert sheet.name == "purchase_plan_activity"
    # one unit per column: share counts (whole-number format) apart from the price paid per share
    assert list(sheet.frame.columns) == ["line", "shares", "weighted_average_grant_date_fair_value",
                                         "weighted_average_purchase_price"]
    assert sheet.frame["shares"].tolist() == [0, 300, 150, 50, 0, 0, 100, 100]
    assert sheet.frame["weighted_average_purchase_price"].iloc[-1] == 17
    assert sheet.frame["weighted_average_purchase_price"].iloc[:-1].isna().all()
    assert sheet.formats["shares"] == "#,##0"


def test_cap_on_fixed_shares_limits_the_shares_not_the_value(tmp_path):
    # fixed shares buy min(N_0, M) shares whatever the price: 80 of the 100 shares, same value per share
    off = offering(max_shares="80")
    run = api.expense(ledger(tmp_path / "l", [off], [enrol()]), through="2027-12-31")
    assert run.ledger.tranches["quantity"].tolist()[-1] == 80
    assert run.fair_values.grant_value[1] == pytest.approx(ql_espp(20, 181, 0.05, 0.3, 0.01, 0.15, "fixed_shares"),
                                                           rel=1e-10)


def test_capped_fixed_withholding_value_rises_with_the_cap_to_the_uncapped_value():
    # properties (derived): the cap takes value away, less as it rises; at k <= 1 it is a fixed-shares right
    from grantval.awards.espp import _capped
    from grantval.pricing import espp_value

    ks = np.array([0.5, 0.9, 1.0, 1.000001, 1.2, 1.5, 2.0, 5.0, 50.0])
    n = len(ks)
    args = {"share_price": np.full(n, 20.0), "term": np.full(n, 0.5), "rate": np.full(n, 0.05),
            "volatility": np.full(n, 0.4), "dividend_yield": np.full(n, 0.01), "discount": np.full(n, 0.15)}
    free = espp_value(**args, lookback=True, basis="fixed_withholding")
    fixed = espp_value(**args, lookback=True, basis="fixed_shares")
    got = _capped(args, free, ks, True, None)
    assert np.all(got[ks <= 1] == fixed[ks <= 1])
    assert np.all(np.diff(got) >= -1e-12) and np.all(got <= free + 1e-12)
    assert got[-1] == pytest.approx(free[-1], rel=1e-9)
    assert got[3] == pytest.approx(fixed[3], rel=1e-5)  # continuous at k = 1


# --- the demo ledger's offering (sample_grants/, invented) ------------------------------------------

SAMPLE = pathlib.Path(__file__).resolve().parents[2] / "sample_grants"


def _espp_only(ledger, esp):
    """The ESPP grants of a loaded ledger as a ledger view for tests/attribution/reference.py."""
    g, tr, ch = ledger.grants, ledger.tranches, ledger.changes
    keep = np.flatnonzero(esp)
    gpos = {old: new for new, old in enumerate(keep)}
    tgi = tr["grant_idx"].to_numpy()
    tsel = np.flatnonzero(esp[tgi])
    tpos = {old: new for new, old in enumerate(tsel)}
    m = ch["tranche_idx"].isin(tsel).to_numpy()
    return types.SimpleNamespace(
        grants=g.iloc[keep].reset_index(drop=True), estimates=ledger.estimates,
        tranches=tr.iloc[tsel].assign(grant_idx=[gpos[x] for x in tgi[tsel]]).reset_index(drop=True),
        changes=ch[m].assign(tranche_idx=[tpos[x] for x in ch["tranche_idx"].to_numpy()[m]]).reset_index(drop=True))


def test_demo_offering_values_and_cost_against_quantlib_and_the_reference(tmp_path):
    # the demo's CV-ESPP-2026 (sample_grants/generate.py): S_0 24.30, 42%, r 3.85%, q 0.8%, 15%, look-back,
    # fixed shares, purchases 180, 364, 545 and 729 days after 2026-01-01, under the demo's policy
    # (valuation_unit award, straight-line, estimated forfeitures): each period's value is its QuantLib
    # blackFormula components, and the cost of every quarter is the independent reference implementation's
    run = api.expense(SAMPLE, through="2026-12-31")
    g, tr = run.ledger.grants, run.ledger.tranches
    esp = (g["award_type"] == "espp").to_numpy()
    mt = esp[tr["grant_idx"].to_numpy()]
    assert esp.sum() == 12 and mt.sum() == 48
    days = (tr["vest_date"].to_numpy("datetime64[D]")[mt] - np.datetime64("2026-01-01")).astype(int)
    want = np.array([ql_espp(24.30, d, 0.0385, 0.42, 0.008, 0.15, "fixed_shares") for d in days])
    assert sorted(set(days)) == [180, 364, 545, 729]
    assert run.fair_values.tranche_value[mt] == pytest.approx(want, rel=1e-10)
    _ends, ref = schedule_cents(_espp_only(run.ledger, esp), want, dt.date(2024, 1, 1), dt.date(2026, 12, 31),
                               "straight-line", "estimate", "quarter", 12)
    ids = list(run.inputs.grant_id)
    for gid, cents in ref.items():
        assert list(run.schedule.expense_cents[ids.index(gid)]) == cents, gid
    # 20,054.20 through 2026-12-31 (E2115's withdrawal on 2026-09-15 recognises its open periods at once)
    assert sum(sum(c) for c in ref.values()) == 2_005_420


def test_demo_total_is_the_ledger_without_the_plan_plus_the_plan(tmp_path):
    # the offering adds its own cost and changes nobody else's: every other grant's schedule is the same
    # as in the demo without the purchase-plan tables and events (the demo total was 1,372,969.73 before)
    bare = tmp_path / "bare"
    shutil.copytree(SAMPLE, bare, ignore=shutil.ignore_patterns("*.xlsx", "*.py", "market", "espp_*.csv"))
    lines = (SAMPLE / "events.csv").read_text().splitlines(keepends=True)
    (bare / "events.csv").write_text("".join(x for x in lines if not x.startswith("CV-ESPP-")))
    full, plain = api.expense(SAMPLE, through="2026-12-31"), api.expense(bare, through="2026-12-31")
    ids = list(full.inputs.grant_id)
    others = [ids.index(k) for k in plain.inputs.grant_id]
    assert np.array_equal(full.schedule.expense_cents[others], plain.schedule.expense_cents)
    espp = [i for i, k in enumerate(ids) if k.startswith("CV-ESPP-2026/")]
    assert len(espp) == 12 and len(ids) == len(plain.inputs.grant_id) + 12
    assert full.schedule.expense_cents.sum() == plain.schedule.expense_cents.sum() + full.schedule.expense_cents[
        espp].sum()
