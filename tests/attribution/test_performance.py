"""Performance share units and service periods other than the schedule."""

import numpy as np
import pytest

from grantval import api
from grantval.errors import LedgerError
from tests.factory import write_ledger

UNIT = {"holder_id": "all", "group": "", "exercise_price": "", "expiration_date": "", "vest_start_date": "",
        "cliff_months": "0", "assumption_set": "a", "condition_set": "", "max_payout": "",
        "retirement_eligible_date": ""}


def _assumptions(price="30"):
    return [{"assumption_set": "a", "grant_date": "", "share_price": price, "volatility": "", "risk_free_rate": "",
             "dividend_yield": "0", "expected_term_years": "", "model": "bsm", "exercise_multiple": "",
             "post_vest_exit_rate": "", "fair_value": ""}]


def ig_example_2(folder):
    # IFRS 2 Implementation Guidance, IG Example 2 (grant with a performance condition, in which the
    # length of the vesting period varies); figures from memory: 500 employees x 100 shares, fair
    # value 30 per share at the grant date (no dividends). End of year 1: 30 have left, 30 more
    # expected to leave, vesting expected at the end of year 2 (440 employees). End of year 2: 28 more
    # have left, 25 more expected, vesting expected at the end of year 3 (417). End of year 3: 23 more
    # left; 419 employees x 100 shares vest.
    grants = [{**UNIT, "grant_id": "P", "award_type": "psu", "grant_date": "2025-01-01", "quantity": "50000",
               "vest_months": "36", "vest_every_months": "36", "condition_set": "eps"}]
    perf = [{"condition_set": "eps", "assessed_on": "2025-01-01", "payout": "1", "expected_vest_date": "2027-01-01"},
            {"condition_set": "eps", "assessed_on": "2026-12-31", "payout": "1", "expected_vest_date": "2028-01-01"}]
    est = [{"applies_to": "*", "effective_date": d, "annual_forfeiture_rate": "", "expected_vest_fraction": f}
           for d, f in (("2025-12-31", "0.88"), ("2026-12-31", "0.834"), ("2027-12-31", "0.838"))]
    events = [{"grant_id": "P", "event_date": f"{y}-12-31", "event_type": "forfeit", "quantity": q,
               "share_price": ""} for y, q in ((2025, "3000"), (2026, "2800"), (2027, "2300"))]
    return write_ledger(folder, {"grants": grants, "assumptions": _assumptions(), "performance": perf,
                                 "estimates": est, "events": events})


def test_ifrs2_ig_example_2_vesting_period_moves_from_year_2_to_year_3(tmp_path):
    run = api.expense(ig_example_2(tmp_path / "l"), through="2027-12-31", period="year", standard="ifrs2")
    cents = run.schedule.expense_cents[0]
    # IFRS 2 IG Example 2 (from memory): 440 x 100 x 30 x 1/2 = 660,000; 417 x 100 x 30 x 2/3 - 660,000
    # = 174,000; 419 x 100 x 30 - 834,000 = 423,000.
    assert list(cents) == [66_000_000, 17_400_000, 42_300_000]


def test_ifrs2_ig_example_2_with_the_vesting_date_left_on_the_schedule_differs(tmp_path):
    # the re-estimated vesting date matters: without it the year-1 figure is 440 x 100 x 30 x 1/3
    folder = ig_example_2(tmp_path / "l")
    text = (folder / "performance.csv").read_text().replace("2027-01-01", "").replace("2028-01-01", "")
    (folder / "performance.csv").write_text(text)
    run = api.expense(folder, through="2025-12-31", period="year", standard="ifrs2")
    assert run.schedule.expense_cents[0, 0] == 44_000_000


def probable_then_improbable(folder):
    # ASC 718-10-25-20 and 35-3 (from memory): cost follows the outcome judged probable, and a change
    # of that judgement is a cumulative catch-up; when no outcome is probable, cost recognised to date
    # is reversed. Invented figures: 1,000 target units at 20, three-year cliff from 2027-01-01.
    grants = [{**UNIT, "grant_id": "Q", "award_type": "psu", "grant_date": "2027-01-01", "quantity": "1000",
               "vest_months": "36", "vest_every_months": "36", "condition_set": "rev", "max_payout": "2"}]
    perf = [{"condition_set": "rev", "assessed_on": "2027-01-01", "payout": "1", "expected_vest_date": ""},
            {"condition_set": "rev", "assessed_on": "2028-06-30", "payout": "1.5", "expected_vest_date": ""},
            {"condition_set": "rev", "assessed_on": "2029-03-31", "payout": "0", "expected_vest_date": ""}]
    return write_ledger(folder, {"grants": grants, "assumptions": _assumptions("20"), "performance": perf})


def test_asc718_probable_outcome_rises_then_becomes_improbable(tmp_path):
    run = api.expense(probable_then_improbable(tmp_path / "l"), through="2029-12-31", period="year")
    cents = run.schedule.expense_cents[0]
    days = 365 + 366 + 365  # 2027-01-01 to 2030-01-01
    first = round(20 * 1000 * 1.0 * 365 / days * 100)
    second = round(20 * 1000 * 1.5 * 731 / days * 100)
    assert cents[0] == first                       # payout 100%
    assert cents[0] + cents[1] == second           # catch-up to 150% in 2028
    assert cents.sum() == 0 and cents[2] == -second  # improbable: everything reversed in 2029


def test_final_payout_sets_whole_shares_at_vesting(tmp_path):
    folder = probable_then_improbable(tmp_path / "l")
    _set("performance", 2, "payout", "1.2345")(folder)
    run = api.expense(folder, through="2030-06-30", period="year")
    # 1,000 x 1.2345 = 1,234.5 shares: 1,234 issued (rounded down; common practice), at 20 each
    assert run.schedule.cumulative_cents[0, -1] == 1234 * 20 * 100


def retirement_ledger(folder):
    # Invented: 1,200 RSUs vesting 300 a year from 2027-01-01; the holder is retirement eligible on
    # 2028-07-01 and keeps the award on retirement, so service after that date is not required
    # (ASC 718-10-55-87 and IFRS 2.15, from memory): every tranche is fully expensed by then.
    grants = [{**UNIT, "grant_id": "R", "award_type": "rsu", "grant_date": "2027-01-01", "quantity": "1200",
               "vest_months": "48", "vest_every_months": "12", "retirement_eligible_date": "2028-07-01"}]
    return write_ledger(folder, {"grants": grants, "assumptions": _assumptions("10")})


def test_retirement_eligibility_in_the_middle_of_a_schedule(tmp_path):
    run = api.expense(retirement_ledger(tmp_path / "l"), through="2030-12-31", period="quarter", attribution="graded")
    s = run.schedule
    ends = [str(d) for d in s.period_ends]
    at = ends.index("2028-06-30")
    assert s.cumulative_cents[0, at] == 1200 * 10 * 100
    assert s.expense_cents[0, at + 1:].sum() == 0
    # the first tranche (vesting 2028-01-01, before eligibility) keeps its own service period
    q1 = ends.index("2027-03-31")
    t1 = 300 * 10 * 90 / 365          # 2027-01-01..2027-03-31 of 2027-01-01..2028-01-01
    rest = 900 * 10 * 90 / 547        # ... of 2027-01-01..2028-07-01
    assert s.cumulative_cents[0, q1] == pytest.approx(round((t1 + rest) * 100), abs=2)
    # vesting for the holder still follows the schedule
    from grantval.reporting.expense_tables import tranche_table
    t = tranche_table(run.inputs, run.schedule, run.ledger.tranches["tranche"].to_numpy())
    assert list(t["vested"]) == [True, True, True, False]  # at 2030-12-31: 2028, 2029, 2030 tranches


def _bad(tmp_path, edit):
    folder = probable_then_improbable(tmp_path / "l")
    edit(folder)
    with pytest.raises(LedgerError) as info:
        api.expense(folder, through="2029-12-31")
    return [str(p) for p in info.value.problems]


def _set(name, row, column, value):
    """Edit one cell (row 0 = first data row) of a CSV table of the ledger."""
    def edit(folder):
        import csv

        path = folder / f"{name}.csv"
        with open(path, newline="") as fh:
            rows = list(csv.DictReader(fh))
        rows[row][column] = value
        with open(path, "w", newline="") as fh:
            w = csv.DictWriter(fh, fieldnames=list(rows[0]), lineterminator="\n")
            w.writeheader()
            w.writerows(rows)
    return edit


@pytest.mark.parametrize("table,row,column,value,where,words", [
    ("performance", 1, "payout", "-0.5", "performance.csv, row 3, payout", "must be zero or more"),
    ("performance", 1, "payout", "2.5", "performance.csv, row 3, payout", "above the grant's max_payout"),
    ("performance", 0, "assessed_on", "2026-06-30", "performance.csv, row 2, assessed_on", "before the grant date"),
    ("performance", 1, "expected_vest_date", "2026-12-31", "performance.csv, row 3, expected_vest_date",
     "not after the grant date"),
    ("grants", 0, "condition_set", "nosuch", "grants.csv, row 2, condition_set", "has no rows in the performance table"),
    ("grants", 0, "retirement_eligible_date", "2026-01-01", "grants.csv, row 2, retirement_eligible_date",
     "before the grant date"),
    ("grants", 0, "exercise_price", "12", "grants.csv, row 2, exercise_price", "has no exercise price"),
])
def test_bad_performance_input_is_named(tmp_path, table, row, column, value, where, words):
    found = _bad(tmp_path, _set(table, row, column, value))
    assert any(f.startswith(where) and words in f for f in found), found


def test_moving_vest_date_needs_a_single_tranche(tmp_path):
    # IG Example 2 ledger with the grant vesting yearly (3 tranches) under a set that re-estimates the vesting date
    folder = ig_example_2(tmp_path / "l")
    _set("grants", 0, "vest_every_months", "12")(folder)
    with pytest.raises(LedgerError) as info:
        api.expense(folder, through="2027-12-31", period="year", standard="ifrs2")
    found = [str(p) for p in info.value.problems]
    assert any("grants.csv, row 2, condition_set" in f and "needs a single vesting date" in f for f in found), found


def test_psu_without_a_grant_date_assessment_is_an_error(tmp_path):
    found = _bad(tmp_path, _set("performance", 0, "assessed_on", "2027-02-01"))
    assert any("grants.csv, row 2, condition_set" in f and "no assessment on the grant date" in f for f in found)


def test_psu_expense_is_identical_rerun_and_unaffected_ledgers_unchanged(tmp_path):
    a = api.expense(ig_example_2(tmp_path / "a"), through="2027-12-31", period="year", standard="ifrs2")
    b = api.expense(ig_example_2(tmp_path / "b"), through="2027-12-31", period="year", standard="ifrs2")
    assert np.array_equal(a.schedule.expense_cents, b.schedule.expense_cents)


def test_performance_unit_roll_forward_ties_with_the_final_payout(tmp_path):
    folder = probable_then_improbable(tmp_path / "l")
    _set("performance", 2, "payout", "1.2345")(folder)
    run = api.disclose(folder, start="2027-01-01", through="2030-06-30")
    pu = run.disclosure.performance_units.set_index("line")["number"]
    # invented ledger: 1,000 target units vest on 2030-01-01 at a payout of 1.2345 -> 1,234 shares
    assert pu["Granted (target units)"] == 1000
    assert pu["Vested (shares issued at the final payout)"] == 1234
    assert pu["Change from performance adjustments"] == 234
    assert pu["Nonvested at end (target units)"] == 0
    assert run.disclosure.psu_tie[0] == run.disclosure.psu_tie[1]
    # performance units are not in the RSU table
    assert run.disclosure.rsus["number"].abs().sum() == 0
