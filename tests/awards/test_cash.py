"""Cash-settled award kinds: registry, ledger checks, grant-date values, remeasurement (QuantLib)."""

import numpy as np
import pytest
import QuantLib as ql

from grantval import api
from grantval.attribution.liability import cash_grants, liability_engine
from grantval.awards.registry import AWARD_TYPES, flag, kind
from grantval.errors import LedgerError
from grantval.pricing import bsm_value
from tests.attribution.cash_ledgers import assumption, event, grant, ifrs_example_12, mixed_ledger
from tests.ledger.test_problems import assert_problem


def test_kinds_are_registered_and_settled_in_cash():
    assert {"cash_sar", "cash_unit"} <= set(AWARD_TYPES)
    assert kind("cash_sar").settlement == kind("cash_unit").settlement == "cash"
    assert kind("option").settlement == kind("rsu").settlement == "shares"
    types = np.array(["option", "cash_sar", "rsu", "cash_unit"], dtype=object)
    assert flag(types, "exercisable").tolist() == [True, True, False, False]
    assert flag(types, "option_terms").tolist() == [True, True, False, False]
    assert cash_grants(types).tolist() == [False, True, False, True]


def test_grant_date_values_on_the_remeasurement_basis(tmp_path):
    run = api.value(mixed_ledger(tmp_path / "l"))
    t = run.fair_values.table.set_index("grant_id")
    days = (np.datetime64("2035-01-01") - np.datetime64("2029-01-01")).astype(int)
    # the pricing core's BSM over the contractual term (IFRS 2.33: fair value by an option pricing model)
    assert t.loc["S1", "fair_value_per_unit"] == pytest.approx(
        bsm_value(20, 20, days / 365.25, 0.03, 0.35, 0.01), rel=1e-12)
    assert t.loc["S1", "model"] == "bsm" and t.loc["S1", "expected_term_years"] == pytest.approx(days / 365.25)
    # cash unit: S e^{-q t} per tranche (1 and 2 years), quantity-weighted (common practice, as for RSUs)
    t1, t2 = 365 / 365.25, 730 / 365.25
    want = (300 * 20 * np.exp(-0.01 * t1) + 300 * 20 * np.exp(-0.01 * t2)) / 600
    assert t.loc["U1", "fair_value_per_unit"] == pytest.approx(want, rel=1e-12)


def _ql_bsm(s, k, days, r, vol, q):
    # QuantLib AnalyticEuropeanEngine with Actual/365.25, grantval's year fraction
    today = ql.Date(30, 6, 2031)
    ql.Settings.instance().evaluationDate = today
    dc = ql.Actual36525()
    proc = ql.BlackScholesMertonProcess(
        ql.QuoteHandle(ql.SimpleQuote(s)), ql.YieldTermStructureHandle(ql.FlatForward(today, q, dc)),
        ql.YieldTermStructureHandle(ql.FlatForward(today, r, dc)),
        ql.BlackVolTermStructureHandle(ql.BlackConstantVol(today, ql.NullCalendar(), vol, dc)))
    opt = ql.VanillaOption(ql.PlainVanillaPayoff(ql.Option.Call, k), ql.EuropeanExercise(today + int(days)))
    opt.setPricingEngine(ql.AnalyticEuropeanEngine(proc))
    return opt.NPV()


@pytest.mark.parametrize("d, s", [("2029-12-31", 22.0), ("2030-12-31", 18.0), ("2031-12-31", 26.0),
                                  ("2032-12-31", 30.0)])
def test_bsm_remeasurement_matches_quantlib(tmp_path, d, s):
    run = api.expense(mixed_ledger(tmp_path / "l"), through="2032-12-31", period="year")
    engine = liability_engine(run.inputs)
    g = list(run.inputs.grant_id).index("S1")
    got = engine.values.values_at(np.datetime64(d), np.arange(3) == g)
    days = int((np.datetime64("2035-01-01") - np.datetime64(d)).astype(int))
    want = _ql_bsm(s, 20.0, days, 0.03, 0.35, 0.01)
    assert got.tranche_value[run.inputs.t_grant == g] == pytest.approx(want, rel=1e-10)
    assert got.method[g] == f"bsm, remaining contractual term, assumptions.csv row {3 + ['2029-12-31', '2030-12-31', '2031-12-31', '2032-12-31'].index(d)}"


def test_most_specific_liability_value_wins(tmp_path):
    values = [{"applies_to": k, "measured_on": "2029-12-31", "fair_value": v} for k, v in
              (("*", "1"), ("eng", "2"), ("S1", "3"))]
    run = api.expense(mixed_ledger(tmp_path / "l", liability_values=values), through="2029-12-31", period="year")
    got = liability_engine(run.inputs).values.values_at(np.datetime64("2029-12-31"), np.array([True, True, False]))
    assert got.tranche_value[run.inputs.t_grant == 0].tolist() == [3.0, 3.0]   # grant row
    assert got.tranche_value[run.inputs.t_grant == 1].tolist() == [1.0, 1.0]   # '*' (U1 is in group ops)
    assert got.method[:2].tolist() == ["liability_values.csv row 4", "liability_values.csv row 2"]


def _report(tmp_path, **changes):
    return api.check(mixed_ledger(tmp_path / "l", **changes))


def test_negative_fair_value_is_an_error(tmp_path):
    values = [{"applies_to": "S1", "measured_on": "2029-12-31", "fair_value": "-1.5"}]
    assert_problem(_report(tmp_path, liability_values=values), "liability_values.csv", 2, "fair_value",
                   "must be zero or more (a fair value per unit); got -1.5")


def test_exercise_without_share_price_is_an_error(tmp_path):
    events = [event("S1", "2031-06-30", "exercise", "300", "")]
    assert_problem(_report(tmp_path, events=events), "events.csv", 2, "share_price",
                   "is required for an exercise of the cash-settled grant S1")


def test_liability_values_rows_are_checked(tmp_path):
    values = [{"applies_to": "nobody", "measured_on": "2029-12-31", "fair_value": "1"},
              {"applies_to": "S1", "measured_on": "2029-12-31", "fair_value": "1"},
              {"applies_to": "S1", "measured_on": "2029-12-31", "fair_value": "2"},
              {"applies_to": "S1", "measured_on": "", "fair_value": "2"}]
    r = _report(tmp_path, liability_values=values)
    assert_problem(r, "liability_values.csv", 2, "applies_to", "'nobody' is not a grant_id, a group or '*'")
    assert_problem(r, "liability_values.csv", 4, "measured_on", "'S1' already has a liability value measured on 2029-12-31")
    assert_problem(r, "liability_values.csv", 5, "measured_on", "is required and is empty")
    o1 = [{"applies_to": "O1", "measured_on": "2029-12-31", "fair_value": "1"}]
    warn = _report(tmp_path, liability_values=o1).warnings
    assert any("has no cash-settled award" in p.message and p.row == 2 for p in warn)


def test_cash_sar_needs_option_terms_and_cash_units_are_not_exercised(tmp_path):
    grants = [grant(grant_id="S1", quantity="10", exercise_price="", expiration_date="")]
    r = _report(tmp_path, grants=grants, events=[["grant_id", "event_date", "event_type"]],
                liability_values=[["applies_to", "measured_on", "fair_value"]])
    assert_problem(r, "grants.csv", 2, "exercise_price", "is required")
    assert_problem(r, "grants.csv", 2, "expiration_date", "is required")
    r = _report(tmp_path, events=[event("U1", "2031-06-30", "exercise", "10", "5")])
    assert_problem(r, "events.csv", 2, "event_type", "are not exercised")


def test_no_value_and_no_assumptions_to_compute_one(tmp_path):
    # an assumptions row for the date without volatility: the error names its row and column
    rows = [assumption(grant_date="2029-01-01", share_price="20", volatility="0.35", risk_free_rate="0.03"),
            assumption(assumption_set="2029-12-31", share_price="22", risk_free_rate="0.03")]
    with pytest.raises(LedgerError) as e:
        api.expense(mixed_ledger(tmp_path / "l", assumptions=rows), through="2029-12-31", period="year")
    assert "assumptions.csv, row 3, volatility: is required to remeasure cash-settled share appreciation" in str(e.value)
    # no row at all: the error names the grant, its row and the date
    with pytest.raises(LedgerError, match=r"grant S1 \(grants.csv row 2\) has no fair value for 2029-12-31"):
        api.expense(mixed_ledger(tmp_path / "m", assumptions=rows[:1]), through="2029-12-31", period="year")


def test_supplied_fair_value_in_a_dated_assumptions_row(tmp_path):
    rows = [assumption(grant_date="2029-01-01", share_price="20", volatility="0.35", risk_free_rate="0.03"),
            assumption(grant_date="2029-12-31", share_price="22", fair_value="7.25")]
    run = api.expense(mixed_ledger(tmp_path / "l", assumptions=rows, liability_values=[["applies_to", "measured_on",
                                                                                      "fair_value"]]),
                      through="2029-12-31", period="year")
    got = liability_engine(run.inputs).values.values_at(np.datetime64("2029-12-31"), np.array([True, True, False]))
    assert np.all(got.tranche_value[run.inputs.t_grant < 2] == 7.25)
    assert got.method[0] == "supplied in assumptions.csv row 3"


def test_ifrs_example_ledger_is_clean(tmp_path):
    report = api.check(ifrs_example_12(tmp_path / "l"))
    assert report.ok and not report.warnings, [str(p) for p in report.problems]


def test_only_iso_set_names_are_dates(tmp_path):
    # an assumption_set named "2029" is a name, not 2029-01-01
    from grantval.measurement.remeasure import Remeasurer
    rows = [assumption(grant_date="2029-01-01", share_price="20", volatility="0.35", risk_free_rate="0.03"),
            assumption(assumption_set="2029", share_price="22", volatility="0.35", risk_free_rate="0.03")]
    from grantval.ledger import load_ledger
    ledger = load_ledger(mixed_ledger(tmp_path / "l", assumptions=rows))
    dates = Remeasurer(ledger)._by_date
    assert list(dates) == [int(np.datetime64("2029-01-01").astype(np.int64))] and dates[list(dates)[0]] == 0
