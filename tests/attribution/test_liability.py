"""The liability engine of cash-settled awards: IFRS 2 IG Example 12, rules, tables, checks."""

import numpy as np
import pytest

from grantval import api
from grantval.attribution.engine import measure
from grantval.attribution.liability import hold_values_after, liability_engine
from grantval.attribution.periods import compute_schedule
from grantval.errors import LedgerError
from grantval.reporting import liability_tables as LT
from tests.attribution.cash_ledgers import event, ifrs_example_12, mixed_ledger


def _states(run, dates, attribution="graded", forfeitures="estimate"):
    engine = liability_engine(run.inputs)
    out = []
    for d in dates:
        m = measure(run.inputs, np.datetime64(d), attribution=attribution, forfeitures=forfeitures)
        out.append((engine.at(m, d, attribution), m))
    return out


# dates of the example's year ends in the ledger's convention (see tests/attribution/cash_ledgers.py)
YEAR_ENDS = ("2029-12-31", "2030-12-31", "2032-01-01", "2033-01-01", "2034-01-01")


def test_ifrs2_ig_example_12_liability_cash_and_expense(tmp_path):
    run = api.expense(ifrs_example_12(tmp_path / "l"), through="2030-12-31", period="year")
    states = _states(run, YEAR_ENDS)
    liability = [round(s.liability[0], 2) for s, _ in states]
    cash = [s.cash_paid[0] for s, _ in states]
    cost = [m.grant_cost[0] for _, m in states]
    # IFRS 2 IG Example 12, liability at each year end: 194,400 and 413,333 (quoted in the issue from the
    # standard); 460,460, 241,820 and 0 (from memory: 253 x 100 x 18.20; 113 x 100 x 21.40)
    assert liability == [194_400.0, pytest.approx(413_333.33, abs=0.01), 460_460.0, 241_820.0, 0.0]
    # cash paid (from memory): 150 x 100 x 15.00 = 225,000; 140 x 100 x 20.00 = 280,000; 113 x 100 x 25.00 = 282,500
    assert np.diff([0.0] + cash).tolist() == [0.0, 0.0, 225_000.0, 280_000.0, 282_500.0]
    # expense by year (from memory): 194,400; 218,933; 272,127; 61,360; 40,680 (total 787,500)
    expense = np.diff([0.0] + cost)
    assert np.round(expense).tolist() == [194_400, 218_933, 272_127, 61_360, 40_680]
    assert sum(expense) == pytest.approx(787_500, abs=1e-6) == cash[-1]


def test_ifrs2_example_years_1_and_2_through_the_expense_schedule(tmp_path):
    run = api.expense(ifrs_example_12(tmp_path / "l"), through="2030-12-31", period="year")
    assert run.policy.forfeitures == "estimate"
    # IFRS 2 IG Example 12 (figures quoted in the issue): 194,400 then 413,333 - 194,400 = 218,933
    assert run.schedule.expense_cents[0].tolist() == [19_440_000, 21_893_333]
    table = LT.liability_table(run)
    assert table["liability"].tolist() == [194_400.0, 413_333.33]
    assert table["fair_value_per_unit"].tolist() == [14.40, 15.50]
    assert table["fair_value_source"].tolist() == ["liability_values.csv row 2", "liability_values.csv row 3"]


def test_liability_after_vesting_is_remeasured_until_exercise_or_expiry(tmp_path):
    # common practice (IFRS 2.33): outstanding vested rights x fair value, no service fraction left
    run = api.expense(ifrs_example_12(tmp_path / "l"), through="2030-12-31", period="year")
    (s, _), = _states(run, ["2033-01-01"])
    assert s.units[0] == 11_300 and s.fair_value_per_unit[0] == 21.40 and s.unrecognised[0] == 0


def test_no_value_for_a_reporting_date_names_the_grant_and_date(tmp_path):
    # the year-3 period end 2031-12-31 has neither a liability_values row nor an assumptions row
    with pytest.raises(LedgerError) as e:
        api.expense(ifrs_example_12(tmp_path / "l"), through="2031-12-31", period="year")
    msg = str(e.value)
    assert "grant SAR (grants.csv row 2) has no fair value for 2031-12-31" in msg
    assert "liability_values.csv, measured_on" in msg


def test_a_mid_period_date_without_a_value_is_an_error_not_interpolated(tmp_path):
    run = api.expense(ifrs_example_12(tmp_path / "l"), through="2030-12-31", period="year")
    with pytest.raises(LedgerError, match="no fair value for 2030-06-30"):
        _states(run, ["2030-06-30"])


def test_before_the_grant_and_after_expiry_no_value_is_needed(tmp_path):
    run = api.expense(ifrs_example_12(tmp_path / "l"), through="2030-12-31", period="year")
    (before, _), (after, _) = _states(run, ["2028-06-30", "2035-03-31"])
    assert before.liability[0] == 0 and before.cash_paid[0] == 0
    assert after.liability[0] == 0 and after.cash_paid[0] == 787_500


def test_rights_not_exercised_lapse_at_expiry(tmp_path):
    # drop the year-5 exercise: the 11,300 rights lapse on 2034-01-01, the liability is released
    folder = ifrs_example_12(tmp_path / "l")
    import csv
    rows = list(csv.reader(open(folder / "events.csv")))
    with open(folder / "events.csv", "w", newline="") as fh:
        csv.writer(fh).writerows(rows[:-1])
    run = api.expense(folder, through="2030-12-31", period="year")
    (s4, m4), (s5, m5) = _states(run, ["2033-01-01", "2034-01-01"])
    assert s4.liability[0] == pytest.approx(241_820) and s5.liability[0] == 0
    assert m5.grant_cost[0] == pytest.approx(505_000)  # total expense = cash paid, 225,000 + 280,000


def test_cash_unit_settles_at_vesting_at_the_share_price_of_that_date(tmp_path):
    # closed form of IFRS 2.33 for units: liability = S e^{-q(vest-d)} x units x service fraction;
    # at vesting cash = units x S_vest and the liability is 0 (derived in docs/cash-settled.md)
    run = api.expense(mixed_ledger(tmp_path / "l"), through="2031-12-31", period="year", attribution="graded")
    u = list(run.inputs.grant_id).index("U1")
    (s1, _), (s2, _), (s3, _) = _states(run, ["2029-12-31", "2030-01-01", "2031-01-01"], "graded", "as-occur")
    q = 0.01
    t1 = 300 * 22 * np.exp(-q * 1 / 365.25) * 1.0  # tranche 1 vests 2030-01-01: served 365/365
    t2 = 240 * 22 * np.exp(-q * 366 / 365.25) * 365 / 730
    assert s1.liability[u] == pytest.approx(t1 + t2, rel=1e-12)
    assert s2.cash_paid[u] == 300 * 21.0  # liability_values row for U1 on 2030-01-01
    assert s3.cash_paid[u] == 300 * 21.0 + 240 * 19.0 and s3.liability[u] == 0  # group row 'ops' on 2031-01-01
    assert run.schedule.cumulative_cents[u, -1] == 1_086_000  # total expense = cash paid, 10,860.00


def test_straight_line_liability_never_below_the_vested_tranches(tmp_path):
    # common practice (ASC 718-10-35-8 applied to the liability): the service fraction of the award,
    # but at least the full liability of the vested tranches
    run = api.expense(mixed_ledger(tmp_path / "l"), through="2031-12-31", period="year")
    s = list(run.inputs.grant_id).index("S1")
    (st, _), = _states(run, ["2030-01-01"], "straight-line", "as-occur")
    assert st.liability[s] == pytest.approx(1000 * 6.0 * 366 / 730, rel=1e-12)  # liability_values 'eng' row
    events = [event("S1", "2030-01-01", "forfeit", "500"), event("U1", "2029-06-30", "forfeit", "60")]
    run = api.expense(mixed_ledger(tmp_path / "f", events=events), through="2031-12-31", period="year")
    (st, _), = _states(run, ["2030-01-01"], "straight-line", "as-occur")
    assert st.liability[s] == 500 * 6.0  # the vested tranche in full, not 500 x 6 x 366/730


def test_checks_pass_and_turn_to_fail_when_the_cash_differs(tmp_path):
    run = api.expense(mixed_ledger(tmp_path / "l"), through="2032-12-31", period="year")
    checks = LT.liability_checks(run)
    assert len(checks) == 2 and all(c.tool_pass for c in checks), checks
    assert checks[1].a == checks[1].b == 10_860.0  # U1 settled: expense = cash paid
    # an exercise price different from the one the engine used: the independent cash figure moves
    run.ledger.events.loc[run.ledger.events["grant_id"] == "S1", "share_price"] = 25.0
    assert not LT.liability_checks(run)[0].tool_pass
    run2 = api.expense(mixed_ledger(tmp_path / "l2"), through="2032-12-31", period="year")
    run2.schedule.expense_cents[list(run2.inputs.grant_id).index("U1"), 1] += 5
    assert [c.tool_pass for c in LT.liability_checks(run2)] == [False, False]


def test_rollforward_ties_and_journal_balances(tmp_path):
    run = api.expense(mixed_ledger(tmp_path / "l"), through="2032-12-31", period="year")
    rf = LT.rollforward(run)
    closing = rf["opening_liability"] + rf["expense"] - rf["cash_paid"]
    assert np.allclose(closing, rf["closing_liability"], atol=0.02)
    assert rf["opening_liability"].iloc[1:].tolist() == rf["closing_liability"].iloc[:-1].tolist()
    j = LT.liability_journal(run)
    assert j["debit"].sum() == pytest.approx(j["credit"].sum())
    assert set(j["account"]) == {LT.EXPENSE_ACCOUNT, LT.LIABILITY_ACCOUNT, LT.CASH_ACCOUNT}
    expense_lines = j[j["account"] == LT.EXPENSE_ACCOUNT]
    assert (expense_lines["debit"] - expense_lines["credit"]).sum() == pytest.approx(rf["expense"].sum())
    assert "equity" not in " ".join(j["account"]).lower()
    lines = LT.liability_disclosure(run)
    assert lines["value"].iloc[-1] == rf["closing_liability"].iloc[-1]


def test_sheets_hold_the_table_and_a_live_rollforward_formula(tmp_path):
    run = api.expense(mixed_ledger(tmp_path / "l"), through="2032-12-31", period="year")
    sheets = LT.liability_sheets(run)
    assert [s.name for s in sheets] == ["liabilities", "liability_rollforward"]
    assert sheets[1].frame["closing_by_formula"].iloc[0] == "=B2+C2-D2"
    assert len(sheets[0].frame) == 2 * 4


def test_equity_awards_are_untouched_by_the_hook(tmp_path):
    run = api.expense(mixed_ledger(tmp_path / "l"), through="2032-12-31", period="year")
    o = list(run.inputs.grant_id).index("O1")
    expected = np.floor(run.fair_values.grant_value[o] * 500 * 100 + 0.5)
    assert run.schedule.expense_cents[o].sum() == expected
    assert LT.liability_table(run)["grant_id"].isin(["S1", "U1"]).all()


def test_forecast_holds_values_at_the_through_date(tmp_path):
    run = api.expense(mixed_ledger(tmp_path / "l"), through="2030-12-31", period="year")
    with pytest.raises(LedgerError, match="no fair value for 2033-12-31"):
        compute_schedule(run.inputs, run.policy, "2030-12-31", forecast_through="2033-12-31")
    hold_values_after(run.inputs, "2030-12-31")
    sched = compute_schedule(run.inputs, run.policy, "2030-12-31", forecast_through="2033-12-31")
    assert sched.forecast_cents.shape[1] == 3
    s = list(run.inputs.grant_id).index("S1")
    (held, _), (st, _) = _states(run, ["2030-12-31", "2033-12-31"], run.policy.attribution, run.policy.forfeitures)
    # the 2031 exercise is after the through date: ignored, so no cash; the fair value is the through date's
    assert st.cash_paid[s] == 0 and st.fair_value_per_unit[s] == held.fair_value_per_unit[s]
    assert st.liability[s] == pytest.approx(1000 * held.fair_value_per_unit[s])


def test_lattice_remeasurement_over_the_remaining_term(tmp_path):
    from grantval.pricing import lattice_value
    from tests.attribution.cash_ledgers import assumption
    folder = mixed_ledger(tmp_path / "l")
    import csv
    rows = list(csv.DictReader(open(folder / "assumptions.csv")))
    rows.append(assumption(assumption_set="2030-06-30", share_price="21", volatility="0.3", risk_free_rate="0.03",
                           model="lattice", exercise_multiple="2", post_vest_exit_rate="0.05"))
    with open(folder / "assumptions.csv", "w", newline="") as fh:
        w = csv.DictWriter(fh, fieldnames=list(rows[0]))
        w.writeheader()
        w.writerows(rows)
    run = api.expense(folder, through="2030-12-31", period="year")
    engine = liability_engine(run.inputs)
    s = list(run.inputs.grant_id).index("S1")
    got = engine.values.values_at(np.datetime64("2030-06-30"), np.arange(3) == s)
    left = (np.datetime64("2035-01-01") - np.datetime64("2030-06-30")).astype(int) / 365.25
    t = run.inputs.t_grant == s
    vest = np.maximum((run.inputs.t_vest[t] - np.datetime64("2030-06-30")).astype(int), 0) / 365.25
    # the pricing core's own lattice on the remaining term and remaining vesting (common practice)
    want = lattice_value(21, 20, left, 0.03, 0.3, 0.0, vesting=vest, exercise_multiple=2.0, exit_rate=0.05)
    assert got.tranche_value[t] == pytest.approx(want, rel=1e-12)
    assert got.method[s].startswith("lattice, remaining contractual term")


def test_cash_units_with_no_events_at_all(tmp_path):
    # regression: no event of any cash grant (empty allocations); liability then settlement (closed form)
    from tests.attribution.cash_ledgers import assumption, grant
    from tests.factory import write_ledger
    data = {"grants": [grant(grant_id="U", award_type="cash_unit", quantity="100", vest_months="12",
                             vest_every_months="12")],
            "assumptions": [assumption(grant_date="2029-01-01", share_price="10"),
                            assumption(assumption_set="2029-03-31", share_price="11"),
                            assumption(assumption_set="2029-06-30", share_price="12"),
                            assumption(assumption_set="2029-09-30", share_price="12.5"),
                            assumption(assumption_set="2029-12-31", share_price="13"),
                            assumption(assumption_set="2030-01-01", share_price="14")]}
    run = api.expense(write_ledger(tmp_path / "l", data), through="2030-06-30", start="2029-01-01", period="quarter")
    table = LT.liability_table(run).set_index("period_end")
    assert table.loc[np.datetime64("2029-06-30"), "liability"] == round(100 * 12 * 181 / 365, 2)
    assert table.loc[np.datetime64("2030-03-31"), "cash_paid"] == 1400.0
    assert run.schedule.expense_cents.sum() == 140_000


def test_cancelling_vested_rights_releases_their_liability(tmp_path):
    # common practice: cancelled rights without payment leave the liability (no cash is recorded)
    events = [event("SAR", "2029-12-31", "forfeit", "3500"), event("SAR", "2030-12-31", "forfeit", "4000"),
              event("SAR", "2031-12-31", "forfeit", "2200"), event("SAR", "2032-01-01", "exercise", "15000", "25"),
              event("SAR", "2032-06-30", "cancel", "5300"), event("SAR", "2033-01-01", "exercise", "14000", "30")]
    run = api.expense(ifrs_example_12(tmp_path / "l", events=events), through="2030-12-31", period="year")
    (s, _), = _states(run, ["2033-01-01"])
    # 25,300 rights left after the year-3 exercise, 5,300 cancelled, 14,000 exercised: 6,000 at 21.40
    assert s.units[0] == 6_000 and s.liability[0] == pytest.approx(6_000 * 21.40)


def test_sheets_write_to_a_workbook_and_csv(tmp_path):
    import openpyxl

    from grantval.io.csv import write_csv
    from grantval.io.xlsx.write import write_workbook
    run = api.expense(mixed_ledger(tmp_path / "l"), through="2032-12-31", period="year")
    path = tmp_path / "out.xlsx"
    write_workbook(path, LT.liability_sheets(run))
    ws = openpyxl.load_workbook(path)["liability_rollforward"]
    assert ws["F2"].value == "=B2+C2-D2"
    write_csv(tmp_path / "liabilities.csv", LT.liability_table(run), money=("liability", "cash_paid"))
    lines = (tmp_path / "liabilities.csv").read_text().splitlines()
    assert lines[0] == ",".join(LT.COLUMNS) and len(lines) == 9
