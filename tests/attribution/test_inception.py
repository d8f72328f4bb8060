"""Service inception before the grant date: cost from the inception date, remeasured until the grant date.

Rule (docs/expense-rules.md, "Service inception before the grant date"): ASC 718-10-30-25 (the
requisite service period is estimated at the service inception date when it precedes the grant
date; wording checked in Deloitte's roadmap on share-based payment awards, section 3.6);
ASC 718-10-35-6 and 55-108 to 55-109 (from memory: before the grant date, cost is accrued at the
fair value at each reporting date; in the period of the grant date, cumulative cost is adjusted to
the grant-date fair value); IFRS 2 IG4 (from memory: services received before the grant date are
recognised at an estimate of the grant-date fair value, revised at each reporting date until the
grant date is established).  The figures below are invented and computed by hand.
"""

import datetime as dt
import math

import numpy as np
import pytest

from grantval import api
from grantval.errors import LedgerError
from tests.attribution.inception_ledgers import assumption, grant, option_ledger, rsu_ledger
from tests.attribution.reference import schedule_cents
from tests.factory import write_ledger


def cents(x: float) -> int:
    return math.floor(x * 100 + 0.5)


def test_rsu_worked_example_by_hand_asc718(tmp_path):
    # 1,200 RSUs; service 2027-01-01 to 2029-01-01 = 731 days (2028 is a leap year); granted 2027-07-01.
    run = api.expense(rsu_ledger(tmp_path / "l"), through="2027-12-31", period="quarter")
    got = run.schedule.cumulative_cents[0]
    assert str(run.schedule.window_start) == "2027-01-01"  # the first period holds the inception date
    # 2027-03-31, before the grant date: share price then 20; 90 days served (31 + 28 + 31)
    q1 = 1200 * 20 * 90 / 731                       # = 2,954.856...
    # 2027-06-30, before the grant date: remeasured at 22; 181 days served
    q2 = 1200 * 22 * 181 / 731                      # = 6,536.799...
    # 2027-09-30, after the grant date: grant-date value 25; 273 days served since the inception date
    q3 = 1200 * 25 * 273 / 731                      # = 11,203.830...
    q4 = 1200 * 25 * 365 / 731                      # = 14,979.480...
    assert list(got) == [cents(q1), cents(q2), cents(q3), cents(q4)] == [295_486, 653_680, 1_120_383, 1_497_948]
    # the period of the grant date carries the catch-up from 22 to 25 on the service already rendered
    catch_up = (25 - 22) * 1200 * 181 / 731         # = 891.38
    service_q3 = 25 * 1200 * 92 / 731               # = 3,775.65
    assert run.schedule.expense_cents[0, 2] == cents(q3) - cents(q2) == round((catch_up + service_q3) * 100)


def test_rsu_cost_at_vesting_is_the_grant_date_value(tmp_path):
    run = api.expense(rsu_ledger(tmp_path / "l"), through="2029-03-31", period="year")
    assert run.schedule.cumulative_cents[0, -1] == 1200 * 25 * 100   # 30,000.00: pre-grant values leave no trace


def test_without_the_inception_date_cost_starts_at_the_grant_date(tmp_path):
    # the same ledger with service_inception_date blank: nothing before 2027-07-01, and the service
    # period runs 2027-07-01 to 2029-01-01 (550 days)
    folder = rsu_ledger(tmp_path / "l", grants=[grant(grant_id="R", quantity="1200", service_inception_date="")])
    run = api.expense(folder, through="2027-12-31", period="quarter", start="2027-01-01")
    assert list(run.schedule.cumulative_cents[0]) == [0, 0, cents(1200 * 25 * 92 / 550), cents(1200 * 25 * 184 / 550)]


def test_option_two_tranches_ifrs2_graded_by_hand(tmp_path):
    # IFRS 2 (graded, each tranche over its own period): tranche 1 has 365 days of service from the
    # inception date 2027-01-01, tranche 2 has 731; 500 options each.  2027-03-31 (before the grant
    # date 2027-05-01): fair value 4.00; 2027-06-30: grant-date value 5.00; 90 and 181 days served.
    run = api.expense(option_ledger(tmp_path / "l", standard="ifrs2"), through="2027-06-30", period="quarter")
    q1 = 4 * 500 * 90 / 365 + 4 * 500 * 90 / 731      # = 493.151 + 246.238 = 739.389
    q2 = 5 * 500 * 181 / 365 + 5 * 500 * 181 / 731    # = 1,239.726 + 619.015 = 1,858.741
    assert list(run.schedule.cumulative_cents[0]) == [cents(q1), cents(q2)] == [73_939, 185_874]


def test_option_two_tranches_asc718_straight_line_by_hand(tmp_path):
    # ASC 718 straight-line over the award's service, 2027-01-01 to 2029-01-01 (731 days)
    run = api.expense(option_ledger(tmp_path / "l"), through="2027-06-30", period="quarter")
    q1 = 4 * 1000 * 90 / 731                          # = 492.476
    q2 = 5 * 1000 * 181 / 731                         # = 1,238.030
    assert list(run.schedule.cumulative_cents[0]) == [cents(q1), cents(q2)] == [49_248, 123_803]


def test_through_date_before_the_grant_date_reports_the_value_then(tmp_path):
    run = api.expense(rsu_ledger(tmp_path / "l"), through="2027-06-30", period="quarter")
    m = run.schedule.at_through
    assert m.expected_total[0] == pytest.approx(1200 * 22)             # full cost at the value of 2027-06-30
    assert m.grant_cost[0] == pytest.approx(1200 * 22 * 181 / 731)
    assert m.unrecognised[0] == pytest.approx(1200 * 22 * (1 - 181 / 731))
    from grantval.reporting.expense_tables import tranche_table

    t = tranche_table(run.inputs, run.schedule, np.array([1]))
    assert t["status"].iat[0] == "service before grant"
    assert t["fair_value_per_unit"].iat[0] == 22 and t["quantity_expected_to_vest"].iat[0] == 1200


def test_forecast_from_before_the_grant_date_holds_that_value_and_totals_the_unrecognised(tmp_path):
    run = api.expense(rsu_ledger(tmp_path / "l"), through="2027-06-30", period="quarter",
                      forecast_through="2029-03-31")
    unrec = int(np.floor(run.schedule.at_through.expected_total[0] * 100 + 0.5)) - run.schedule.cumulative_cents[0, -1]
    assert run.schedule.forecast_cents[0].sum() == unrec == cents(1200 * 22) - cents(1200 * 22 * 181 / 731)


def test_option_valued_as_if_granted_on_the_reporting_date_matches_quantlib(tmp_path):
    ql = pytest.importorskip("QuantLib")
    # no fair_value on the pre-grant row: the option is valued as if granted on 2027-03-31, by BSM at the
    # simplified-method term (SEC SAB Topic 14.D.2) measured from that date
    rows = [assumption(grant_date="2027-05-01", share_price="10", fair_value="5"),
            assumption(assumption_set="2027-03-31", share_price="9", volatility="0.3", risk_free_rate="0.04",
                       dividend_yield="0.01")]
    run = api.expense(option_ledger(tmp_path / "l", assumptions=rows), through="2027-03-31", period="quarter")
    d = dt.date(2027, 3, 31)
    years = lambda a: (a - d).days / 365.25  # noqa: E731  (grantval's year fraction, days / 365.25)
    avg_vest = (years(dt.date(2028, 1, 1)) + years(dt.date(2029, 1, 1))) / 2
    term = (avg_vest + years(dt.date(2037, 1, 1))) / 2
    s, k, r, q, v = 9.0, 10.0, 0.04, 0.01, 0.3
    value = ql.blackFormula(ql.Option.Call, k, s * math.exp((r - q) * term), v * math.sqrt(term), math.exp(-r * term))
    assert run.schedule.cumulative_cents[0, 0] == cents(value * 1000 * 90 / 731)


def test_missing_value_before_the_grant_date_names_the_grant_and_the_date(tmp_path):
    folder = rsu_ledger(tmp_path / "l", pre_grant_rows=(("2027-06-30", "22"),))
    with pytest.raises(LedgerError) as e:
        api.expense(folder, through="2027-12-31", period="quarter")
    [p] = e.value.problems
    assert (p.source, p.row, p.column) == ("grants.csv", 2, "service_inception_date")
    assert "grant R has no fair value for 2027-03-31, before its grant date 2027-07-01" in p.message
    assert "assumption_set 2027-03-31" in p.message


def test_a_start_inside_the_pre_grant_service_needs_the_value_of_the_day_before(tmp_path):
    # the opening balance is measured on 2027-02-28: no value for that date is a clear error, not a guess
    with pytest.raises(LedgerError, match="2027-02-28"):
        api.expense(rsu_ledger(tmp_path / "l"), through="2027-12-31", period="quarter", start="2027-03-01")


def test_option_without_volatility_on_the_pre_grant_row_is_refused(tmp_path):
    rows = [assumption(grant_date="2027-05-01", share_price="10", fair_value="5"),
            assumption(assumption_set="2027-03-31", share_price="9", risk_free_rate="0.04")]
    with pytest.raises(LedgerError, match="volatility.*option grant O on 2027-03-31|option grant O on 2027-03-31"):
        api.expense(option_ledger(tmp_path / "l", assumptions=rows), through="2027-03-31", period="quarter")


@pytest.mark.parametrize("award, extra", [("psu", {"condition_set": "c"}),
                                          ("cash_unit", {}),
                                          ("cash_sar", {"exercise_price": "10", "expiration_date": "2037-01-01"})])
def test_inception_date_on_award_kinds_with_their_own_cost_rule_is_refused(tmp_path, award, extra):
    g = grant(grant_id="X", award_type=award, quantity="100", **extra)
    tables = {"grants": [g], "assumptions": [assumption(grant_date="2027-07-01", share_price="25")]}
    if award == "psu":
        tables["performance"] = [{"condition_set": "c", "assessed_on": "2027-07-01", "payout": "1",
                                  "expected_vest_date": ""}]
    problems = api.check(write_ledger(tmp_path / "l", tables)).problems
    assert any(p.column == "service_inception_date" and p.row == 2 and f"award_type {award}" in p.message
               for p in problems)


def test_inception_after_the_grant_date_is_refused(tmp_path):
    folder = rsu_ledger(tmp_path / "l", grants=[grant(grant_id="R", quantity="1200",
                                                       service_inception_date="2027-08-01")])
    p = [p for p in api.check(folder).problems if p.column == "service_inception_date"]
    assert p and p[0].row == 2 and "after the grant date" in p[0].message


def test_inception_on_the_grant_date_changes_nothing(tmp_path):
    a = api.expense(rsu_ledger(tmp_path / "a", grants=[grant(grant_id="R", quantity="1200",
                                                            service_inception_date="2027-07-01")]),
                    through="2028-12-31", period="quarter", start="2027-01-01")
    b = api.expense(rsu_ledger(tmp_path / "b", grants=[grant(grant_id="R", quantity="1200",
                                                            service_inception_date="")]),
                    through="2028-12-31", period="quarter", start="2027-01-01")
    assert np.array_equal(a.schedule.cumulative_cents, b.schedule.cumulative_cents)


# --- against the independent slow implementation (tests/attribution/reference.py) -------------------------

PRE_GRANT = {"2027-03-31": "3.5", "2027-06-30": "4.5", "2027-09-30": "6"}


def mixed_ledger(folder):
    """Invented: options and RSUs, with and without earlier service, forfeits after the grant date."""
    grants = [
        grant(grant_id="A", award_type="option", grant_date="2027-10-15", quantity="2400", exercise_price="10",
              expiration_date="2037-01-01", vest_months="48", vest_every_months="12", assumption_set="g",
              service_inception_date="2027-02-10"),
        grant(grant_id="B", grant_date="2027-08-20", quantity="900", vest_start_date="2027-05-01",
              vest_months="36", vest_every_months="6", cliff_months="12", assumption_set="g",
              service_inception_date="2027-05-01"),
        grant(grant_id="C", award_type="option", grant_date="2027-06-01", quantity="500", exercise_price="10",
              expiration_date="2037-06-01", vest_start_date="", vest_months="24", vest_every_months="12",
              assumption_set="g", service_inception_date=""),
    ]
    rows = [assumption(assumption_set="g", share_price="10", fair_value="5")] + [
        assumption(assumption_set=d, share_price="9", fair_value=v) for d, v in PRE_GRANT.items()]
    events = [{"grant_id": "A", "event_date": "2028-03-01", "event_type": "forfeit", "quantity": "200",
               "share_price": ""},
              {"grant_id": "B", "event_date": "2028-09-30", "event_type": "forfeit", "quantity": "150",
               "share_price": ""}]
    est = [{"applies_to": "*", "effective_date": "2027-01-01", "annual_forfeiture_rate": "0.08",
            "expected_vest_fraction": ""}]
    return write_ledger(folder, {"grants": grants, "assumptions": rows, "events": events, "estimates": est})


@pytest.mark.parametrize("attribution, forfeitures", [("straight-line", "as-occur"), ("graded", "as-occur"),
                                                      ("straight-line", "estimate"), ("graded", "estimate")])
def test_engine_matches_the_reference_implementation(tmp_path, attribution, forfeitures):
    run = api.expense(mixed_ledger(tmp_path / "l"), through="2029-06-30", period="quarter", start="2027-01-01",
                      attribution=attribution, forfeitures=forfeitures)
    values = {dt.date.fromisoformat(d): float(v) for d, v in PRE_GRANT.items()}
    ends, ref = schedule_cents(run.ledger, run.fair_values.tranche_value, dt.date(2027, 1, 1), dt.date(2029, 6, 30),
                               attribution, forfeitures, "quarter", 12,
                               pre_grant_value=lambda t, day: values[day])
    assert [str(e) for e in run.schedule.period_ends] == [e.isoformat() for e in ends]
    for i, gid in enumerate(run.ledger.grants["grant_id"]):
        assert list(run.schedule.expense_cents[i]) == ref[gid], gid
    assert run.schedule.expense_cents[:2, :3].sum() > 0   # pre-grant periods carry cost


def test_notes_state_the_rule_only_when_the_ledger_uses_it(tmp_path):
    from grantval.reporting.notes import expense_notes

    with_it = api.expense(rsu_ledger(tmp_path / "a"), through="2027-12-31", period="quarter")
    without = api.expense(rsu_ledger(tmp_path / "b", grants=[grant(grant_id="R", quantity="1200",
                                                                  service_inception_date="")]),
                          through="2027-12-31", period="quarter")
    keys = lambda run: [k for k, _ in expense_notes(run.policy, run.ledger)]  # noqa: E731
    assert "service inception" in keys(with_it) and "service inception" not in keys(without)
    text = dict(expense_notes(with_it.policy, with_it.ledger))["service inception"]
    assert "ASC 718-10-30-25" in text and "each reporting date" in text


def test_expense_workbook_notes_and_checks_with_a_through_date_before_the_grant_date(tmp_path):
    import openpyxl

    from grantval.runs.expense import write_expense

    run = api.expense(rsu_ledger(tmp_path / "l"), through="2027-06-30", period="quarter")
    out = write_expense(run, tmp_path / "o.xlsx", None, timestamp=False)
    assert out.checks and not out.failed           # recognised + unrecognised ties at the value of 2027-06-30
    wb = openpyxl.load_workbook(tmp_path / "o.xlsx")
    notes = [str(c) for row in wb["notes"].iter_rows(values_only=True) for c in row if c]
    assert any("Service inception before the grant date" in t for t in notes)


def test_no_value_is_asked_for_when_no_reporting_date_falls_before_the_grant_date(tmp_path):
    # inception 2027-04-10 and grant 2027-06-01 in the same quarter: no pre-grant rows, none needed;
    # through 2027-06-30, 82 days served (2027-04-10 to 2027-06-30 inclusive) of 632 (to 2029-01-01)
    folder = rsu_ledger(tmp_path / "l", pre_grant_rows=(),
                        grants=[grant(grant_id="R", quantity="1200", grant_date="2027-06-01",
                                      service_inception_date="2027-04-10")],
                        assumptions=[assumption(grant_date="2027-06-01", share_price="25")])
    run = api.expense(folder, through="2027-06-30", period="quarter")
    assert str(run.schedule.window_start) == "2027-04-01"
    assert list(run.schedule.cumulative_cents[0]) == [cents(1200 * 25 * 82 / 632)]


def test_rsu_valued_as_if_granted_discounts_dividends_to_vesting_from_the_reporting_date(tmp_path):
    # RSU value S exp(-q t) (docs: share price less the present value of dividends forgone), with t from the
    # reporting date 2027-03-31 to the vesting date 2029-01-01: 642 days / 365.25
    rows = (("2027-03-31", "20"), ("2027-06-30", "22"))
    folder = rsu_ledger(tmp_path / "l", pre_grant_rows=rows,
                        assumptions=[assumption(grant_date="2027-07-01", share_price="25")]
                        + [assumption(assumption_set=d, share_price=p, dividend_yield="0.02") for d, p in rows])
    run = api.expense(folder, through="2027-03-31", period="quarter")
    value = 20 * math.exp(-0.02 * 642 / 365.25)    # = 19.31...
    assert run.schedule.cumulative_cents[0, 0] == cents(value * 1200 * 90 / 731)
