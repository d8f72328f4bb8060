"""Every problem `check` must catch, each named by table, row and column.

Row numbers are as a spreadsheet shows them (header = row 1, first data row =
row 2).  The ledgers are invented for the tests.
"""

import pytest

from grantval import api
from tests.factory import BASE, set_cell, tables, write_ledger


def problems_of(tmp_path, data):
    report = api.check(write_ledger(tmp_path / "ledger", data))
    return report


def assert_problem(report, source, row, column, fragment):
    for p in report.errors:
        if p.source == source and p.row == row and p.column == column and fragment in p.message:
            return
    raise AssertionError(f"no error {source}, row {row}, {column}: ...{fragment}... in\n" +
                         "\n".join(str(p) for p in report.problems))


def test_base_ledger_is_clean(tmp_path):
    report = problems_of(tmp_path, tables())
    assert report.ok, [str(p) for p in report.problems]
    assert not report.warnings


def test_missing_required_table(tmp_path):
    data = tables()
    del data["assumptions"]
    report = problems_of(tmp_path, data)
    assert any("assumptions.csv is missing" in p.message for p in report.errors)


def test_missing_required_column(tmp_path):
    data = tables()
    for r in data["grants"]:
        del r["quantity"]
    assert_problem(problems_of(tmp_path, data), "grants.csv", 1, "quantity", "required column is missing")


def test_unknown_column_is_a_warning(tmp_path):
    data = tables()
    for r in data["grants"]:
        r["colour"] = "blue"
    report = problems_of(tmp_path, data)
    assert report.ok
    assert any(w.column == "colour" and "unknown column" in w.message for w in report.warnings)


@pytest.mark.parametrize("value, fragment", [("", "is required and is empty"), ("G1", "used twice (first in row 2)")])
def test_empty_or_duplicate_grant_id(tmp_path, value, fragment):
    data = set_cell(BASE, "grants", 1, "grant_id", value)
    assert_problem(problems_of(tmp_path, data), "grants.csv", 3, "grant_id", fragment)


@pytest.mark.parametrize("column, value, fragment", [
    ("grant_date", "01/02/2027", "not an ISO date"),
    ("grant_date", "2027-02-30", "not a calendar date"),
    ("exercise_price", "ten", "not a number"),
    ("exercise_price", "1,000.50", "thousands separators"),
])
def test_unparseable_dates_and_numbers(tmp_path, column, value, fragment):
    data = set_cell(BASE, "grants", 0, column, value)
    assert_problem(problems_of(tmp_path, data), "grants.csv", 2, column, fragment)


@pytest.mark.parametrize("value, fragment", [("0", "positive whole number"), ("-5", "positive whole number"),
                                             ("10.5", "whole number")])
def test_quantity_not_positive_whole(tmp_path, value, fragment):
    data = set_cell(BASE, "grants", 0, "quantity", value)
    assert_problem(problems_of(tmp_path, data), "grants.csv", 2, "quantity", fragment)


def test_non_positive_exercise_price(tmp_path):
    data = set_cell(BASE, "grants", 0, "exercise_price", "0")
    assert_problem(problems_of(tmp_path, data), "grants.csv", 2, "exercise_price", "greater than zero")


def test_option_needs_exercise_price_and_expiration(tmp_path):
    data = set_cell(BASE, "grants", 0, "exercise_price", "")
    data = set_cell(data, "grants", 0, "expiration_date", "")
    report = problems_of(tmp_path, data)
    assert_problem(report, "grants.csv", 2, "exercise_price", "required for an option")
    assert_problem(report, "grants.csv", 2, "expiration_date", "required for an option")


def test_expiration_on_or_before_grant_date(tmp_path):
    data = set_cell(BASE, "grants", 0, "expiration_date", "2027-01-01")
    assert_problem(problems_of(tmp_path, data), "grants.csv", 2, "expiration_date", "not after the grant date")


def test_last_vest_after_expiration(tmp_path):
    data = set_cell(BASE, "grants", 0, "expiration_date", "2030-06-30")
    assert_problem(problems_of(tmp_path, data), "grants.csv", 2, "expiration_date", "last tranche vests on 2031-01-01")


def test_cliff_above_vest_months(tmp_path):
    data = set_cell(BASE, "grants", 0, "cliff_months", "60")
    assert_problem(problems_of(tmp_path, data), "grants.csv", 2, "cliff_months", "more than vest_months")


def test_vest_months_not_multiple(tmp_path):
    data = set_cell(BASE, "grants", 0, "vest_every_months", "5")
    assert_problem(problems_of(tmp_path, data), "grants.csv", 2, "vest_months", "not a multiple of vest_every_months")


def test_no_matching_assumptions(tmp_path):
    report = problems_of(tmp_path, set_cell(BASE, "grants", 0, "grant_date", "2027-01-02"))
    assert_problem(report, "grants.csv", 2, "grant_date", "no assumptions row has grant_date 2027-01-02")
    report = problems_of(tmp_path / "b", set_cell(BASE, "grants", 2, "assumption_set", "nope"))
    assert_problem(report, "grants.csv", 4, "assumption_set", "'nope' is not an assumption_set")


@pytest.mark.parametrize("column, value, fragment", [
    ("share_price", "0", "greater than zero"),
    ("volatility", "0", "greater than 0 and at most 5"),
    ("volatility", "35", "greater than 0 and at most 5"),
    ("volatility", "35%", "percentage"),
    ("risk_free_rate", "0.6", "between -0.05 and 0.5"),
    ("risk_free_rate", "-0.06", "between -0.05 and 0.5"),
    ("dividend_yield", "-0.01", "zero or more"),
    ("expected_term_years", "12", "longer than the contractual term"),
    ("exercise_multiple", "2", "lattice parameter but the row's model is bsm"),
    ("post_vest_exit_rate", "0.1", "lattice parameter but the row's model is bsm"),
])
def test_assumptions_out_of_range(tmp_path, column, value, fragment):
    data = set_cell(BASE, "assumptions", 0, column, value)
    assert_problem(problems_of(tmp_path, data), "assumptions.csv", 2, column, fragment)


def test_option_assumptions_need_volatility(tmp_path):
    data = set_cell(BASE, "assumptions", 0, "volatility", "")
    assert_problem(problems_of(tmp_path, data), "assumptions.csv", 2, "volatility", "required for option grants")


EVENTS = [{"grant_id": "G1", "event_date": "2028-06-01", "event_type": "exercise", "quantity": "100", "share_price": "15"}]


@pytest.mark.parametrize("column, value, fragment", [
    ("grant_id", "G9", "'G9' is not a grant"),
    ("event_date", "2026-12-31", "before the grant date 2027-01-01"),
    ("quantity", "300", "exercises 300 but only 250 of grant G1 are vested and outstanding on 2028-06-01"),
    ("event_type", "explode", "not one of"),
])
def test_event_problems(tmp_path, column, value, fragment):
    data = tables(events=EVENTS)
    data = set_cell(data, "events", 0, column, value)
    assert_problem(problems_of(tmp_path, data), "events.csv", 2, column, fragment)


def test_forfeiting_vested_options(tmp_path):
    ev = [{"grant_id": "G1", "event_date": "2028-06-01", "event_type": "forfeit", "quantity": "800", "share_price": ""}]
    assert_problem(problems_of(tmp_path, tables(events=ev)), "events.csv", 2, "quantity",
                   "only 750 of grant G1 are unvested")


def test_exercise_after_earlier_exercise_counts_what_is_left(tmp_path):
    ev = [dict(EVENTS[0], quantity="200"), dict(EVENTS[0], event_date="2028-07-01", quantity="100")]
    assert_problem(problems_of(tmp_path, tables(events=ev)), "events.csv", 3, "quantity", "only 50 of grant G1")


def test_rsu_cannot_be_exercised(tmp_path):
    ev = [dict(EVENTS[0], grant_id="G2")]
    assert_problem(problems_of(tmp_path, tables(events=ev)), "events.csv", 2, "event_type", "RSU")


def test_tranches_must_sum_to_quantity(tmp_path):
    tr = [{"grant_id": "G1", "vest_date": "2028-01-01", "quantity": "500"},
          {"grant_id": "G1", "vest_date": "2029-01-01", "quantity": "400"}]
    assert_problem(problems_of(tmp_path, tables(tranches=tr)), "tranches.csv", 2, "quantity",
                   "sum to 900, not its quantity 1000")


@pytest.mark.parametrize("rate, frac, column, fragment", [
    ("0.05", "0.9", "annual_forfeiture_rate", "not both"),
    ("", "", "annual_forfeiture_rate", "give one of"),
    ("1.5", "", "annual_forfeiture_rate", "below 1"),
    ("", "1.2", "expected_vest_fraction", "at most 1"),
])
def test_estimates_problems(tmp_path, rate, frac, column, fragment):
    est = [{"applies_to": "*", "effective_date": "2027-01-01", "annual_forfeiture_rate": rate,
            "expected_vest_fraction": frac}]
    assert_problem(problems_of(tmp_path, tables(estimates=est)), "estimates.csv", 2, column, fragment)


def test_estimate_for_unknown_target(tmp_path):
    est = [{"applies_to": "marketing", "effective_date": "2027-01-01", "annual_forfeiture_rate": "0.05",
            "expected_vest_fraction": ""}]
    assert_problem(problems_of(tmp_path, tables(estimates=est)), "estimates.csv", 2, "applies_to",
                   "not a grant_id, a group")


def test_policy_problems(tmp_path):
    pol = [["key", "value"], ["standard", "gaap"], ["colour", "blue"]]
    report = problems_of(tmp_path, tables(policy=pol))
    assert_problem(report, "policy.csv", 2, "value", "not one of")
    assert_problem(report, "policy.csv", 3, "key", "not a policy key")


def test_every_problem_is_listed_not_only_the_first(tmp_path):
    data = set_cell(BASE, "grants", 0, "quantity", "0")
    data = set_cell(data, "grants", 1, "grant_date", "yesterday")
    data = set_cell(data, "assumptions", 1, "volatility", "9")
    report = problems_of(tmp_path, data)
    assert len(report.errors) >= 3


def test_problem_text_format(tmp_path):
    data = set_cell(BASE, "grants", 0, "quantity", "0")
    report = problems_of(tmp_path, data)
    assert any(str(p).startswith("grants.csv, row 2, quantity: ") for p in report.errors)
